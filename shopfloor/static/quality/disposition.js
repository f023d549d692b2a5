// NCR disposition form: "Set every panel to ..." ticks that choice on every panel row.
// Without this script each panel is ticked by hand; the server checks every panel has one.
document.addEventListener("click", (event) => {
  const button = event.target.closest("[data-set-all]");
  if (!button) return;
  const value = button.getAttribute("data-set-all");
  const form = button.closest("form");
  form.querySelectorAll('input[type="radio"][name^="action-"]').forEach((input) => {
    if (input.value === value) input.checked = true;
  });
});
