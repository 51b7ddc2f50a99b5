// An inline editor's "Cancel" or "Keep it" closes the form opened in place. The link
// leads back to the page it is on, differing only in its fragment, and such a link loads
// nothing (HTML, "navigate to a fragment"): the form would stay open. On the form's own
// page (no inline editor around it) the link is followed as usual.
document.addEventListener("click", (event) => {
  if (!(event.target instanceof Element)) return;
  const link = event.target.closest("a[data-close-editor]");
  const editor = link && link.closest(".inline-editor");
  if (!editor) return;
  event.preventDefault();
  editor.replaceChildren();
});
