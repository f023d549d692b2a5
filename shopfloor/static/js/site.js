/* Behaviour every page shares. Loaded by base.html from our own static files: the
 * Content-Security-Policy allows no inline script, no inline event handler and no
 * javascript: URL, so small behaviours hang off data- attributes here. */
(function () {
  "use strict";
  // <a href="/fallback/" data-history-back>Back</a>: go back when there is somewhere to
  // go back to, otherwise follow the link.
  document.addEventListener("click", function (e) {
    var link = e.target.closest ? e.target.closest("[data-history-back]") : null;
    if (link && window.history.length > 1) {
      e.preventDefault();
      window.history.back();
    }
  });
})();
