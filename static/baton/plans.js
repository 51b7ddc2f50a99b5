// The plan editor: a change in a row's own fields saves that row. The selection box
// (name "tasks") belongs to the bulk form and never saves. This replaces an htmx
// trigger filter, which htmx would evaluate as code and the page's policy refuses.
document.addEventListener("change", (event) => {
  const field = event.target;
  if (!(field instanceof Element)) return;
  // "Select every row of this page": ticks or clears the selection box of each row the
  // page shows (the bulk form then changes those rows, and only those).
  if (field.matches("input[data-pick-page]")) {
    const table = field.closest("table");
    if (!table) return;
    for (const box of table.querySelectorAll('tbody input[type="checkbox"][name="tasks"]')) {
      box.checked = field.checked;
    }
    return;
  }
  if (field.name === "tasks") return;
  const row = field.closest("tr.assignment[hx-post]");
  if (row && window.htmx) window.htmx.trigger(row, "baton:save");
});
