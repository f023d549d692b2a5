// The wall board turns pages by itself: the work centers are split, in order, into pages
// that fit the screen, and the next page shows every data-seconds seconds. Recomputed
// when the body is refreshed (htmx) and when the window changes size. No controls.
(function () {
  "use strict";
  var root, pages = [], page = 0, timer = null;

  function cards() { return Array.prototype.slice.call(root.querySelectorAll(".wall-center")); }

  function show(i) {
    page = pages.length ? i % pages.length : 0;
    var wanted = pages[page] || [];
    cards().forEach(function (c) { c.hidden = wanted.indexOf(c) < 0; });
    root.dataset.page = String(page + 1);
    root.dataset.pages = String(Math.max(pages.length, 1));
    var label = root.querySelector(".wall-page-of");
    if (label) { label.textContent = pages.length > 1 ? " · page " + (page + 1) + " of " + pages.length : ""; }
  }

  function layout() {
    var all = cards(), rest = all.slice(), bottom = window.innerHeight - 4;
    pages = [];
    while (rest.length) {
      all.forEach(function (c) { c.hidden = rest.indexOf(c) < 0; });
      var fit = 0;
      for (var k = 0; k < rest.length; k++) {
        if (rest[k].getBoundingClientRect().bottom <= bottom) { fit++; } else { break; }
      }
      fit = Math.max(fit, 1); // a center taller than the screen still gets its own page
      pages.push(rest.slice(0, fit));
      rest = rest.slice(fit);
    }
    show(Math.min(page, Math.max(pages.length - 1, 0)));
    if (timer) { clearInterval(timer); timer = null; }
    var seconds = parseInt(root.dataset.seconds, 10) || 20;
    if (pages.length > 1) { timer = setInterval(function () { show(page + 1); }, seconds * 1000); }
  }

  document.addEventListener("DOMContentLoaded", function () {
    root = document.getElementById("wall");
    if (!root) { return; }
    layout();
    document.body.addEventListener("htmx:afterSwap", function (e) { if (e.target === root) { layout(); } });
    var resizeTimer = null;
    window.addEventListener("resize", function () { clearTimeout(resizeTimer); resizeTimer = setTimeout(layout, 200); });
  });
})();
