/* The tablet through a Wi-Fi drop (DEVELOPERS.md "Offline tablet").
 *
 * Readings, starts and pauses made while the network is down are kept on this device
 * (IndexedDB, store "queue") with the idempotency key and capture time stamped when the
 * operator made them, and sent in the order they were made once the network is back.
 * The server's answer decides each item's fate: sent, refused (shown with the server's
 * reason and never sent again on its own), or waiting for the operator (a value to
 * confirm, a badge to log in again). Sign-offs, corrections, materials and scrap need the
 * network and say so. The service worker (/floor/sw.js) keeps pages and static files so
 * a reload while offline still shows the lot the operator was on.
 *
 * Plain page script, no framework; the panel's state is written into the page
 * (data-state, data-waiting) so tests wait on the page, never on the clock.
 */
(function () {
  "use strict";

  var DB_NAME = "floor-offline";
  var STORE = "queue";
  var PAGES = "floor-pages-v1";
  var panel = document.getElementById("offline-panel");
  if (!panel) { return; }
  // The offline page is kept for everyone, so it names nobody: it works for the last
  // person who opened a floor page on this tablet (forgotten at logout).
  var me = panel.getAttribute("data-person") || "";
  try {
    if (panel.hasAttribute("data-anonymous")) {
      me = window.localStorage.getItem("floor-person") || "";
      panel.setAttribute("data-badge", window.localStorage.getItem("floor-badge") || "");
    } else if (me) {
      window.localStorage.setItem("floor-person", me);
      window.localStorage.setItem("floor-badge", panel.getAttribute("data-badge") || "");
    } else if (panel.hasAttribute("data-forget")) {
      window.localStorage.removeItem("floor-person");
      window.localStorage.removeItem("floor-badge");
    }
  } catch (err) { /* storage refused: the panel still works for this page */ }
  var running = false;
  var sentSomething = false;
  var replayedHere = false;  // this page sent or was refused something: keep the report

  // --- IndexedDB -------------------------------------------------------------------

  var dbPromise = null;
  function db() {
    if (!dbPromise) {
      dbPromise = new Promise(function (resolve, reject) {
        var req = window.indexedDB.open(DB_NAME, 1);
        req.onupgradeneeded = function () {
          var store = req.result.createObjectStore(STORE, { keyPath: "seq", autoIncrement: true });
          store.createIndex("key", "key", { unique: true });
        };
        req.onsuccess = function () { resolve(req.result); };
        req.onerror = function () { reject(req.error); };
      });
    }
    return dbPromise;
  }
  function tx(mode, work) {
    return db().then(function (d) {
      return new Promise(function (resolve, reject) {
        var t = d.transaction(STORE, mode);
        var result = work(t.objectStore(STORE));
        t.oncomplete = function () { resolve(result && "value" in result ? result.value : result); };
        t.onerror = function () { reject(t.error); };
        t.onabort = function () { reject(t.error); };
      });
    });
  }
  function allItems() {
    return tx("readonly", function (store) {
      var box = { value: [] };
      store.openCursor().onsuccess = function (e) {
        var cursor = e.target.result;
        if (cursor) { box.value.push(cursor.value); cursor.continue(); }
      };
      return box;
    });
  }
  function putItem(item) { return tx("readwrite", function (store) { store.put(item); }); }
  function addItem(item) { return tx("readwrite", function (store) { store.add(item); }); }
  function removeItem(seq) { return tx("readwrite", function (store) { store.delete(seq); }); }

  // --- what the page shows -----------------------------------------------------------

  // The words come from the page (templates/floor/_offline.html, through Django's
  // translation machinery); the English here is only a fallback.
  var WORDS = {
    state_waiting: "waiting to send",
    state_sending: "sending…",
    state_sent: "sent",
    state_refused: "refused",
    state_confirm: "needs your check",
    state_signin: "log in again to send",
    state_failed: "not sent: server problem",
    state_other: "waiting for its operator",
    reading_one: "{n} reading", reading_many: "{n} readings",
    start_one: "{n} start", start_many: "{n} starts",
    pause_one: "{n} pause", pause_many: "{n} pauses",
    offline_waiting: "offline: {items} waiting",
    offline_nothing: "offline: nothing waiting",
    offline_kept: "Readings, starts and pauses are kept on this tablet and sent when the network is back.",
    sending_waiting: "sending: {items} waiting",
    online_waiting: "online: {items} waiting",
    online_nothing: "online: nothing waiting",
    attention_one: "{n} needs your attention (below)",
    attention_many: "{n} need your attention (below)",
    made_at: "made {time}",
    other_badge: "Made by badge {badge}: sent when that person logs in on this tablet.",
    confirm_send: "Confirm and send",
    send_again: "Send again",
    clear: "Clear",
    remove: "Remove from this tablet",
    row_note: "{value} — {state} (taken {time})",
    step_note: "{action} — {state} (pressed {time})",
    start: "Start",
    pause: "Pause",
    reading_label: "{quantity}, sample {sample}: {value}",
    step_label: "{action} '{step}'",
    on_lot: "(lot {lot})",
    needs_network: "This needs the network, which is down: try again when the tablet is back online. Readings, starts and pauses are kept on the tablet meanwhile.",
    logged_out: "You were logged out; log in again on this tablet and press Send again.",
    server_problem: "The server could not take it (error {status}). Press Send again, or tell a supervisor.",
    sign_in_changed: "The tablet's sign-in has changed; reload the page and press Send again.",
    refused_status: "Refused by the server ({status}).",
    lot: "Lot {code}",
    none_kept: "None kept yet.",
    sent_count: "{n} sent",
    send_now: "Send now"
  };
  var wordsBox = document.getElementById("offline-words");
  if (wordsBox && wordsBox.content) {
    wordsBox.content.querySelectorAll("[data-k]").forEach(function (w) {
      WORDS[w.getAttribute("data-k")] = w.textContent.trim();
    });
  }
  function t(key, vars) {
    var text = WORDS[key] || key;
    return text.replace(/\{(\w+)\}/g, function (all, name) {
      return vars && name in vars ? String(vars[name]) : all;
    });
  }
  function stateWord(state) { return WORDS["state_" + state] ? t("state_" + state) : state; }

  function mine(item) { return item.person === me; }
  function plural(n, kind) {
    return t(kind + (n === 1 ? "_one" : "_many"), { n: n });
  }
  function summary(items) {
    var counts = { reading: 0, start: 0, pause: 0 };
    var waiting = 0;
    var stuck = 0;
    var sent = 0;
    items.forEach(function (it) {
      if (!mine(it)) { return; }
      if (it.state === "waiting" || it.state === "sending") {
        counts[it.kind] = (counts[it.kind] || 0) + 1;
        waiting += 1;
      } else if (it.state !== "sent") {
        stuck += 1;
      } else {
        sent += 1;
      }
    });
    var parts = [];
    ["reading", "start", "pause"].forEach(function (k) {
      if (counts[k]) { parts.push(plural(counts[k], k)); }
    });
    var text;
    var note = "";
    var items = parts.join(", ");
    if (!navigator.onLine) {
      text = (parts.length ? t("offline_waiting", { items: items }) : t("offline_nothing")) + ".";
      note = t("offline_kept");
    } else if (waiting) {
      text = t(running ? "sending_waiting" : "online_waiting", { items: items });
    } else {
      text = t("online_nothing");
    }
    if (sent && replayedHere) { text += " · " + t("sent_count", { n: sent }); }
    if (stuck) { text += " · " + t(stuck === 1 ? "attention_one" : "attention_many", { n: stuck }); }
    return { text: text, note: note, waiting: waiting, stuck: stuck };
  }

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) { e.className = cls; }
    if (text) { e.textContent = text; }
    return e;
  }
  function timeOf(iso) {
    return iso ? iso.slice(11, 19) : "";
  }

  function render() {
    return allItems().then(function (items) {
      var s = summary(items);
      var status = panel.querySelector(".offline-summary");
      status.textContent = s.text;
      if (s.note) { status.appendChild(el("span", "offline-note", " " + s.note)); }
      panel.setAttribute("data-online", navigator.onLine ? "yes" : "no");
      panel.setAttribute("data-waiting", String(s.waiting));
      panel.setAttribute("data-stuck", String(s.stuck));
      panel.setAttribute("data-state", running ? "sending" : (s.waiting && navigator.onLine ? "waiting" : "idle"));
      var visible = items.filter(function (it) { return mine(it) || it.state !== "sent"; });
      // Online with nothing to do, the panel only stays to report a replay just made.
      panel.hidden = navigator.onLine && !visible.length ||
        navigator.onLine && !s.waiting && !s.stuck && !replayedHere;
      var sendNow = panel.querySelector(".offline-send-now");
      if (s.waiting && navigator.onLine && !running && me) {
        if (!sendNow) {
          sendNow = button(t("send_now"), "send-all", { seq: 0 }, "btn primary offline-send-now");
          status.parentNode.insertBefore(sendNow, status.nextSibling);
        }
      } else if (sendNow) {
        sendNow.remove();
      }
      // The list folds away so the lot stays in view; items that need the operator open it.
      var details = panel.querySelector(".offline-details");
      if (details && s.stuck && !details.hasAttribute("data-opened")) {
        details.open = true;
        details.setAttribute("data-opened", "");
      }
      if (details) { details.hidden = !visible.length; }
      var list = panel.querySelector(".offline-items");
      list.textContent = "";
      visible.forEach(function (it) {
        var state = mine(it) ? it.state : "other";
        var li = el("li", "offline-item state-" + state);
        li.setAttribute("data-key", it.key);
        li.setAttribute("data-state", state);
        li.appendChild(el("span", "oi-label", it.label));
        li.appendChild(el("span", "oi-time", t("made_at", { time: timeOf(it.capturedAt) })));
        li.appendChild(el("strong", "oi-state", stateWord(state)));
        if (!mine(it)) {
          li.appendChild(el("span", "oi-reason", t("other_badge", { badge: it.badge || "?" })));
        }
        if (it.reason && mine(it)) { li.appendChild(el("span", "oi-reason", it.reason)); }
        if (mine(it) && it.state === "confirm") {
          li.appendChild(button(t("confirm_send"), "confirm", it, "btn warn"));
        }
        if (mine(it) && (it.state === "failed" || it.state === "signin")) {
          li.appendChild(button(t("send_again"), "retry", it, "btn primary"));
        }
        if (mine(it) && ["refused", "confirm", "failed", "sent"].indexOf(it.state) >= 0) {
          li.appendChild(button(t(it.state === "sent" ? "clear" : "remove"), "remove", it, "btn"));
        }
        list.appendChild(li);
      });
      markRows(items);
      return s;
    });
  }

  function button(text, action, item, cls) {
    var b = el("button", cls, text);
    b.type = "button";
    b.setAttribute("data-queue-action", action);
    b.setAttribute("data-seq", String(item.seq));
    return b;
  }

  // Rows whose reading is kept on the tablet show that instead of an empty form, also
  // after a reload from the offline copy of the page.
  function markRows(items) {
    var byRow = {};
    var stepAction = null;
    items.forEach(function (it) {
      if ((it.kind === "start" || it.kind === "pause") && it.state !== "sent" && it.page === location.pathname) {
        stepAction = it;
      }
      if (it.kind === "reading" && it.rowId && it.state !== "sent" && it.page === location.pathname) {
        byRow[it.rowId] = it;
      }
    });
    document.querySelectorAll(".sample-row").forEach(function (row) {
      var it = byRow[row.id];
      var note = row.querySelector(".queued-note");
      var form = row.querySelector("form.reading-form[data-offline]");
      if (!it) {
        if (note) { note.remove(); }
        if (form) { form.hidden = false; }
        row.classList.remove("queued");
        return;
      }
      if (!form) { return; }  // the server already shows a stored reading here
      form.hidden = it.state === "refused" || it.state === "failed" ? false : true;
      row.classList.add("queued");
      if (!note) {
        note = el("p", "queued-note");
        form.parentNode.insertBefore(note, form);
      }
      note.setAttribute("data-state", it.state);
      note.textContent = t("row_note", { value: it.value, state: stateWord(it.state), time: timeOf(it.capturedAt) }) +
        (it.reason ? ": " + it.reason : "");
    });
    document.querySelectorAll("form[data-offline=start], form[data-offline=pause]").forEach(function (form) {
      var note = form.parentNode.querySelector(".queued-note");
      if (!stepAction) {
        if (note) { note.remove(); }
        form.hidden = false;
        return;
      }
      form.hidden = stepAction.state !== "refused" && stepAction.state !== "failed";
      if (!note) {
        note = el("p", "queued-note");
        form.parentNode.insertBefore(note, form);
      }
      note.setAttribute("data-state", stepAction.state);
      note.textContent = t("step_note", {
        action: t(stepAction.kind), state: stateWord(stepAction.state), time: timeOf(stepAction.capturedAt)
      }) + (stepAction.reason ? ": " + stepAction.reason : "");
    });
  }

  // --- keeping an action on the tablet ----------------------------------------------

  function formFields(form, submitter) {
    var fields = [];
    var data;
    try { data = new FormData(form, submitter || undefined); } catch (err) { data = new FormData(form); }
    data.forEach(function (value, name) {
      if (name !== "csrfmiddlewaretoken") { fields.push([name, String(value)]); }
    });
    return fields;
  }
  function field(fields, name) {
    for (var i = 0; i < fields.length; i++) { if (fields[i][0] === name) { return fields[i][1]; } }
    return "";
  }
  function labelFor(form, kind, fields) {
    var lot = panel.getAttribute("data-lot") || "";
    if (kind === "reading") {
      var article = form.closest("article.measure");
      var title = article ? article.querySelector("h3").textContent.trim() : field(fields, "quantity");
      return t("reading_label", {
        quantity: title, sample: field(fields, "sample_index"),
        value: (field(fields, "value") + " " + field(fields, "unit")).trim()
      }) + (lot ? " " + t("on_lot", { lot: lot }) : "");
    }
    var step = form.getAttribute("data-step-name") || "";
    return t("step_label", { action: t(kind), step: step }) + (lot ? " " + t("on_lot", { lot: lot }) : "");
  }

  function keep(form, submitter) {
    var kind = form.getAttribute("data-offline");
    if (window.floorTablet) { window.floorTablet.stamp(form, false); }
    var fields = formFields(form, submitter);
    var key = field(fields, "idempotency_key");
    var row = form.closest(".sample-row");
    var item = {
      key: key,
      person: me,
      badge: panel.getAttribute("data-badge") || "",
      kind: kind,
      url: form.getAttribute("action"),
      fields: fields,
      label: labelFor(form, kind, fields),
      value: (field(fields, "value") + " " + field(fields, "unit")).trim(),
      lot: panel.getAttribute("data-lot") || "",
      page: location.pathname,
      rowId: row ? row.id : "",
      capturedAt: field(fields, "captured_at") ||
        (window.floorTablet ? window.floorTablet.now() : new Date().toISOString()),
      state: "waiting",
      reason: ""
    };
    // The form's key now belongs to the kept item: the next action gets a new one.
    var keyInput = form.querySelector("input[name=idempotency_key]");
    if (keyInput) { keyInput.value = ""; }
    var atInput = form.querySelector("input[name=captured_at]");
    if (atInput) { atInput.value = ""; }
    var valueInput = form.querySelector("input[name=value]");
    if (valueInput) { valueInput.value = ""; }
    return addItem(item).then(render).then(function () {
      focusNext(row);
    });
  }

  function focusNext(row) {
    var inputs = Array.prototype.slice.call(
      document.querySelectorAll(".sample-row form.reading-form[data-offline]:not([hidden]) input[name=value]")
    );
    var next = inputs.filter(function (i) {
      return !row || (row.compareDocumentPosition(i) & Node.DOCUMENT_POSITION_FOLLOWING);
    })[0] || inputs[0];
    if (next) { next.focus(); } else {
      var scan = document.getElementById("lot-code");
      if (scan) { scan.focus(); }
    }
  }

  function say(form, text) {
    var box = form.querySelector(".needs-network");
    if (!box) {
      box = el("p", "error needs-network");
      box.setAttribute("role", "alert");
      form.appendChild(box);
    }
    box.textContent = text;
  }

  document.addEventListener("submit", function (e) {
    var form = e.target;
    if (!navigator.onLine && form && form.hasAttribute && form.hasAttribute("data-scan") &&
        (form.method || "").toLowerCase() === "post") {
      // Offline, a scan can only open a lot kept on the tablet (the worker knows them).
      e.preventDefault();
      e.stopImmediatePropagation();
      var code = (form.querySelector("input[name=code]") || {}).value || "";
      location.assign("/floor/scan/?code=" + encodeURIComponent(code.trim()));
      return;
    }
    if (!form || !form.closest || !form.closest("main, header") || (form.method || "").toLowerCase() !== "post") { return; }
    if (navigator.onLine) { return; }
    e.preventDefault();
    e.stopImmediatePropagation();
    if (form.hasAttribute("data-offline")) {
      keep(form, e.submitter);
      return;
    }
    say(form, form.getAttribute("data-needs-network") || t("needs_network"));
  }, true);

  // Online by the browser's account, but the request never reached the server.
  document.addEventListener("htmx:sendError", function (e) {
    var form = e.detail && e.detail.elt && e.detail.elt.closest ? e.detail.elt.closest("form[data-offline]") : null;
    if (form) { keep(form, null).then(later); }
  });

  // --- sending what was kept -----------------------------------------------------------

  function csrfToken() {
    try {
      return JSON.parse(document.body.getAttribute("hx-headers") || "{}")["X-CSRFToken"] || "";
    } catch (err) {
      return "";
    }
  }

  function reasonIn(html) {
    var doc = new DOMParser().parseFromString(html, "text/html");
    var confirm = doc.querySelector(".confirm-box p");
    if (confirm) { return { confirm: true, text: confirm.textContent.replace(/\s+/g, " ").trim() }; }
    var node = doc.querySelector("#refusal, .sample-row .error, main .error, [role=alert]");
    var text = node ? node.textContent.replace(/\s+/g, " ").trim() : "";
    return { confirm: false, text: text.replace(/^Not done:\s*/, "") };
  }

  function send(item) {
    var body = new URLSearchParams();
    item.fields.forEach(function (f) { body.append(f[0], f[1]); });
    body.append("csrfmiddlewaretoken", csrfToken());
    var headers = {
      "X-CSRFToken": csrfToken(),
      "Idempotency-Key": item.key,
      "Content-Type": "application/x-www-form-urlencoded"
    };
    // A reading's answer is its row (as htmx would get it), with the refusal inside.
    if (item.kind === "reading") { headers["HX-Request"] = "true"; }
    return fetch(item.url, {
      method: "POST",
      body: body.toString(),
      headers: headers,
      credentials: "same-origin",
      redirect: "follow"
    }).then(function (resp) {
      return resp.text().then(function (html) {
        var landed = new URL(resp.url || item.url, location.href).pathname;
        if (landed.indexOf("/floor/login/") === 0 || resp.headers.get("HX-Redirect")) {
          return { state: "signin", reason: t("logged_out") };
        }
        if (resp.status >= 200 && resp.status < 300) {
          return { state: "sent", reason: "" };
        }
        var found = reasonIn(html);
        if (resp.status >= 500) {
          return { state: "failed", reason: t("server_problem", { status: resp.status }) };
        }
        if (resp.status === 409 && /still being processed/.test(found.text)) {
          return { state: "waiting", reason: "", busy: true };
        }
        if (found.confirm) {
          return { state: "confirm", reason: found.text };
        }
        if (resp.status === 403 && /CSRF/i.test(html)) {
          return { state: "signin", reason: t("sign_in_changed") };
        }
        return { state: "refused", reason: found.text || t("refused_status", { status: resp.status }) };
      });
    });
  }

  var laterTimer = 0;
  function later() {
    if (laterTimer) { return; }
    laterTimer = window.setTimeout(function () { laterTimer = 0; replay(); }, 15000);
  }

  function replay() {
    if (running || !navigator.onLine) { return Promise.resolve(); }
    running = true;
    var busy = false;
    var unreachable = false;
    return render().then(allItems).then(function (items) {
      var queue = items.filter(function (it) { return mine(it) && it.state === "waiting"; });
      var chain = Promise.resolve(true);
      queue.forEach(function (item) {
        chain = chain.then(function (go) {
          if (!go) { return false; }
          item.state = "sending";
          return putItem(item).then(render).then(function () { return send(item); }).then(function (answer) {
            item.state = answer.state;
            item.reason = answer.reason;
            if (answer.state === "sent") { item.sentAt = new Date().toISOString(); }
            if (answer.state === "sent" || answer.state === "refused") {
              sentSomething = true;
              replayedHere = true;
            }
            if (answer.busy) { busy = true; }
            return putItem(item).then(function () {
              // Later items wait when the session is gone or the server is busy with this one.
              return answer.state !== "signin" && !answer.busy;
            });
          }, function () {
            item.state = "waiting";  // the network dropped again: keep it, stop here
            unreachable = true;
            return putItem(item).then(function () { return false; });
          });
        });
      });
      return chain;
    }).then(function () {
      running = false;
      if (busy) { window.setTimeout(replay, 3000); }
      // The browser says online but the server was out of reach (Wi-Fi up, network
      // down): try again a little later; only waiting items are ever sent.
      if (unreachable) { later(); }
      return afterReplay();
    }, function (err) {
      running = false;
      return render().then(function () { throw err; });
    });
  }

  // Show the server's truth once things were sent: the page's main part is fetched again
  // (unless the operator is typing a value) and the kept items are marked on it anew.
  function afterReplay() {
    return render().then(function (s) {
      if (!sentSomething || s.waiting || !panel.hasAttribute("data-refresh")) { return s; }
      var typing = Array.prototype.some.call(
        document.querySelectorAll("main form[data-offline] input[name=value]"),
        function (i) { return i.value; }
      );
      if (typing) { return s; }
      sentSomething = false;
      return fetch(location.href, { credentials: "same-origin" }).then(function (resp) {
        if (!resp.ok || new URL(resp.url).pathname !== location.pathname) { return s; }
        return resp.text().then(function (html) {
          var doc = new DOMParser().parseFromString(html, "text/html");
          var fresh = doc.querySelector("main");
          var main = document.querySelector("main");
          if (!fresh || !main) { return s; }
          var freshPanel = fresh.querySelector("#offline-panel");
          if (freshPanel) { freshPanel.replaceWith(panel); }
          main.replaceWith(fresh);
          if (window.htmx) { window.htmx.process(fresh); }
          // The kept copy for a reload offline must show what was just sent.
          if (navigator.serviceWorker && navigator.serviceWorker.controller) {
            navigator.serviceWorker.controller.postMessage({ type: "keep", url: pageUrl(), fresh: true });
          }
          return render();
        });
      }, function () { return s; });
    }).then(function (s) {
      panel.setAttribute("data-replayed", "yes");
      return s;
    });
  }

  panel.addEventListener("click", function (e) {
    var b = e.target.closest ? e.target.closest("[data-queue-action]") : null;
    if (!b) { return; }
    var seq = Number(b.getAttribute("data-seq"));
    var action = b.getAttribute("data-queue-action");
    if (action === "send-all") { replay(); return; }
    allItems().then(function (items) {
      var item = items.filter(function (it) { return it.seq === seq; })[0];
      if (!item || !mine(item)) { return null; }
      if (action === "remove") { return removeItem(seq).then(render); }
      if (action === "confirm") {
        item.fields = item.fields.filter(function (f) { return f[0] !== "confirm_out_of_window"; });
        item.fields.push(["confirm_out_of_window", "1"]);
      }
      item.state = "waiting";
      item.reason = "";
      return putItem(item).then(replay);
    }).then(function () {
      var scan = document.getElementById("lot-code");
      if (scan) { scan.focus(); }
    });
  });

  window.addEventListener("online", function () { replay(); });
  window.addEventListener("offline", function () { render(); });

  // --- pages kept for a reload while offline (service worker) ---------------------

  function whenSaved(event) {
    var d = event.data || {};
    if (d.type === "saved" && d.url === pageUrl()) {
      panel.setAttribute("data-page-saved", d.saved ? "yes" : "no");
    }
  }
  function pageUrl() { return location.href.split("#")[0]; }
  function registerWorker() {
    if (!("serviceWorker" in navigator) || !panel.getAttribute("data-worker")) { return; }
    navigator.serviceWorker.addEventListener("message", whenSaved);
    var ask = function () {
      if (navigator.serviceWorker.controller) {
        panel.setAttribute("data-worker-ready", "yes");
        navigator.serviceWorker.controller.postMessage({ type: "keep", url: pageUrl() });
      }
    };
    navigator.serviceWorker.addEventListener("controllerchange", ask);
    navigator.serviceWorker.register(panel.getAttribute("data-worker"), { scope: "/floor/" })
      .then(ask, function () { panel.setAttribute("data-worker-ready", "no"); });
  }

  // Someone logging out or the login page showing: the pages kept for them go.
  function forgetPages() {
    if (window.caches) { window.caches.delete(PAGES); }
  }
  document.addEventListener("submit", function (e) {
    if (e.target && e.target.classList && e.target.classList.contains("logout") && navigator.onLine) {
      forgetPages();
    }
  });
  if (panel.hasAttribute("data-forget")) { forgetPages(); }

  // The offline page lists the lots whose pages are kept on this tablet.
  function listKeptLots() {
    var list = document.getElementById("kept-lots");
    if (!list || !window.caches) { return Promise.resolve(); }
    return window.caches.open(PAGES).then(function (cache) { return cache.keys(); }).then(function (reqs) {
      var seen = {};
      reqs.forEach(function (r) {
        var m = new URL(r.url).pathname.match(/^\/floor\/lots\/([^/]+)\/$/);
        if (!m || seen[m[1]]) { return; }
        seen[m[1]] = true;
        var li = el("li");
        var a = el("a", "tile", t("lot", { code: decodeURIComponent(m[1]) }));
        a.href = new URL(r.url).pathname;
        li.appendChild(a);
        list.appendChild(li);
      });
      if (!reqs.length) { list.appendChild(el("li", "muted", t("none_kept"))); }
    });
  }
  listKeptLots();

  // Sent items are kept for the operator to see, then cleared after an hour.
  function prune() {
    return allItems().then(function (items) {
      var old = Date.now() - 3600 * 1000;
      var gone = items.filter(function (it) { return it.state === "sent" && Date.parse(it.sentAt || 0) < old; });
      return Promise.all(gone.map(function (it) { return removeItem(it.seq); }));
    });
  }

  registerWorker();
  prune().then(render).then(function () {
    panel.setAttribute("data-ready", "yes");
    if (navigator.onLine && me) { return replay(); }
    return null;
  });
})();
