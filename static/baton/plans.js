// The plan editor: a change in a row's own fields saves that row. The selection box
// (name "tasks") belongs to the bulk form and never saves. This replaces an htmx
// trigger filter, which htmx would evaluate as code and the page's policy refuses.
document.addEventListener("change", (event) => {
  const field = event.target;
  if (!(field instanceof Element) || field.name === "tasks") return;
  const row = field.closest("tr.assignment[hx-post]");
  if (row && window.htmx) window.htmx.trigger(row, "baton:save");
});
