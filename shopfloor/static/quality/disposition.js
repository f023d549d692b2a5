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

// "Close as a recording error" (offered when a correction brought the set back inside)
// keeps every panel as it is: the per-panel parts are hidden and switched off (not sent) while
// it is chosen. Without this script the server refuses a recording error that also
// marks panels for rework or scrap, and says so.
function syncDecisionKind(form) {
  const chosen = form.querySelector('input[name="disposition"][value="recording_error"]');
  if (!chosen) return;
  form.querySelectorAll("[data-per-panel]").forEach((part) => {
    part.hidden = chosen.checked;
    part.querySelectorAll("input, select, textarea, button").forEach((control) => {
      control.disabled = chosen.checked;
    });
  });
}
document.addEventListener("change", (event) => {
  if (event.target.matches('#decision-kind input[name="disposition"]')) {
    syncDecisionKind(event.target.form);
  }
});
document.addEventListener("DOMContentLoaded", () => {
  const form = document.getElementById("disposition-form");
  if (form) syncDecisionKind(form);
});
