// Build spec form: add, remove and reorder rows of the stack-up, via and override tables,
// renumber their input names (stackup-0-kind, ...) and ask htmx for a new preview.
(function () {
  "use strict";

  function renumber(table) {
    var prefix = table.getAttribute("data-rows");
    var rows = table.querySelectorAll("tbody tr[data-row]");
    rows.forEach(function (row, i) {
      var no = row.querySelector(".row-no");
      if (no) { no.textContent = String(i + 1); }
      row.querySelectorAll("input, select").forEach(function (input) {
        var parts = input.name.split("-");
        if (parts.length === 3 && parts[0] === prefix) {
          input.name = prefix + "-" + i + "-" + parts[2];
        }
      });
    });
  }

  function changed(form) {
    form.querySelectorAll("table.rows").forEach(renumber);
    form.dispatchEvent(new Event("rows-changed", { bubbles: true }));
  }

  document.addEventListener("click", function (event) {
    var target = event.target;
    if (!(target instanceof Element)) { return; }
    var form = target.closest("#spec-form");
    if (!form) { return; }
    var add = target.closest("[data-add-row]");
    if (add) {
      var prefix = add.getAttribute("data-add-row");
      var template = document.getElementById(prefix + "-template");
      var table = form.querySelector('table[data-rows="' + prefix + '"] tbody');
      if (template && table) {
        var row = template.content.firstElementChild.cloneNode(true);
        table.appendChild(row);
        changed(form);
        var first = row.querySelector("input, select");
        if (first) { first.focus(); }
      }
      return;
    }
    var row = target.closest("tr[data-row]");
    if (!row) { return; }
    if (target.closest("[data-remove]")) {
      row.remove();
      changed(form);
    } else if (target.closest('[data-move="up"]') && row.previousElementSibling) {
      row.parentNode.insertBefore(row, row.previousElementSibling);
      changed(form);
    } else if (target.closest('[data-move="down"]') && row.nextElementSibling) {
      row.parentNode.insertBefore(row.nextElementSibling, row);
      changed(form);
    }
  });

  document.addEventListener("DOMContentLoaded", function () {
    document.querySelectorAll("#spec-form table.rows").forEach(renumber);
  });
})();
