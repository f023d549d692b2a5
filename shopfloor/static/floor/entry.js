/* Reading entry: the unit and gauge chosen for one sample are kept for the quantity's
 * other samples on the page (the server keeps them for the next page too), and the
 * window line in the chosen unit is shown ("In mil: average of 5 samples >= 0.98 mil"). */
(function () {
  "use strict";
  function newReadingForms(article) {
    return Array.prototype.filter.call(
      article.querySelectorAll("form.reading-form"),
      function (f) { return f.querySelector("input[name=sample_index]"); }
    );
  }
  function showWindowIn(article, unit) {
    Array.prototype.forEach.call(article.querySelectorAll(".window-in"), function (p) {
      p.hidden = p.getAttribute("data-unit") !== unit;
    });
  }
  document.addEventListener("change", function (e) {
    var el = e.target;
    if (!el || !el.matches || !el.matches("select[data-unit-for], select[data-gauge-for]")) {
      return;
    }
    var article = el.closest("article.measure");
    if (!article) { return; }
    var name = el.name;
    newReadingForms(article).forEach(function (f) {
      var other = f.querySelector("select[name=" + name + "]");
      if (other && other !== el && f.querySelector("input[name=value]").value === "") {
        other.value = el.value;
      }
    });
    if (name === "unit") { showWindowIn(article, el.value); }
  });
})();
