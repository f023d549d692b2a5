/* Tablet helpers: an Idempotency-Key and a capture time for every state-changing form.
 * A reading is "taken" when its value is typed; the key and time made then travel with
 * every retry of that submit, so a tablet on flaky Wi-Fi never records it twice. */
(function () {
  "use strict";
  function uuid() {
    if (window.crypto && typeof window.crypto.randomUUID === "function") {
      return window.crypto.randomUUID();
    }
    // randomUUID needs a secure context; getRandomValues works on plain http too.
    var b = new Uint8Array(16);
    window.crypto.getRandomValues(b);
    b[6] = (b[6] & 0x0f) | 0x40;
    b[8] = (b[8] & 0x3f) | 0x80;
    var h = Array.prototype.map.call(b, function (x) {
      return ("0" + x.toString(16)).slice(-2);
    }).join("");
    return [h.slice(0, 8), h.slice(8, 12), h.slice(12, 16), h.slice(16, 20), h.slice(20)].join("-");
  }
  function pad(n) { return (n < 10 ? "0" : "") + n; }
  function isoWithOffset(d) {
    var off = -d.getTimezoneOffset();
    var sign = off >= 0 ? "+" : "-";
    off = Math.abs(off);
    return d.getFullYear() + "-" + pad(d.getMonth() + 1) + "-" + pad(d.getDate()) +
      "T" + pad(d.getHours()) + ":" + pad(d.getMinutes()) + ":" + pad(d.getSeconds()) +
      sign + pad(Math.floor(off / 60)) + ":" + pad(off % 60);
  }
  function stamp(form, fresh) {
    var key = form.querySelector("input[name=idempotency_key]");
    var at = form.querySelector("input[name=captured_at]");
    if (key && (fresh || !key.value)) { key.value = uuid(); }
    if (at && (fresh || !at.value)) { at.value = isoWithOffset(new Date()); }
  }
  // For the offline queue (offline.js): the same key and time stamping.
  window.floorTablet = {
    stamp: stamp,
    now: function () { return isoWithOffset(new Date()); }
  };
  document.addEventListener("change", function (e) {
    var form = e.target.form;
    if (form && form.hasAttribute("data-idempotent") && e.target.name === "value") {
      stamp(form, true);
    }
  });
  // Capture phase: runs before htmx reads the form values.
  document.addEventListener("submit", function (e) {
    if (e.target.hasAttribute && e.target.hasAttribute("data-idempotent")) {
      stamp(e.target, false);
    }
  }, true);
  // The scan field: a scanner types the whole code then Enter, so whatever the field
  // still shows (the last scan) is selected and the next scan replaces it.
  function selectScan(field) {
    if (field && field.id === "lot-code" && field.value) { field.select(); }
  }
  document.addEventListener("focusin", function (e) { selectScan(e.target); });
  selectScan(document.activeElement);
  // After a swap, put the cursor where the next reading goes (scanner/keyboard flow).
  document.addEventListener("htmx:afterSwap", function (e) {
    if (!e.detail || !e.detail.target || e.detail.target.querySelector(".error, .confirm-box")) {
      return;
    }
    var next = document.querySelector(".sample-row form:not([hidden]) input[name=value]");
    // Every sample recorded: back to the scan field for the next lot or material.
    (next || document.getElementById("lot-code") || document.body).focus({ preventScroll: false });
  });
})();
