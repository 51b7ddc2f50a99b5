// The workshop view: arrow keys and a presenter's PageUp/PageDown follow the
// Previous/Next links (which work without this script), except while typing.
document.addEventListener("keydown", (event) => {
  if (event.altKey || event.ctrlKey || event.metaKey || event.shiftKey) return;
  const typing = event.target.closest("input, textarea, select, [contenteditable]");
  if (typing) return;
  const rel = { ArrowRight: "next", PageDown: "next", ArrowLeft: "prev", PageUp: "prev" }[event.key];
  const link = rel && document.querySelector(`#workshop-item a[rel=${rel}]`);
  if (link) {
    event.preventDefault();
    link.click();
  }
});
