/* Service worker for the tablet pages (served at /floor/sw.js, scope /floor/).
 *
 * The view that serves this file puts VERSION, ASSETS and OFFLINE_URL in front of it:
 * VERSION is a hash of this file and of every static file in ASSETS, so any change to
 * them makes a new worker, which fills a new static cache and deletes the old ones.
 *
 *  - static files: from the cache first (they only change with VERSION);
 *  - floor pages (GET): from the network first, and a copy kept in PAGES, so a reload
 *    while offline shows the last copy of the page the operator was on;
 *  - a scan while offline opens the kept copy of that lot's page if there is one,
 *    otherwise the offline page (which lists the lots kept on this tablet);
 *  - POSTs are never touched: the page keeps readings, starts and pauses itself.
 */
/* global VERSION, ASSETS, OFFLINE_URL */
"use strict";

var STATIC = "floor-static-" + VERSION;
var PAGES = "floor-pages-v1";
var LOGIN = "/floor/login/";
var writes = {};  // url -> the promise of its copy being kept

self.addEventListener("install", function (event) {
  event.waitUntil(
    caches.open(STATIC).then(function (cache) {
      return cache.addAll(ASSETS.concat([OFFLINE_URL]));
    }).then(function () { return self.skipWaiting(); })
  );
});

self.addEventListener("activate", function (event) {
  event.waitUntil(
    caches.keys().then(function (names) {
      return Promise.all(names.filter(function (n) {
        return n.indexOf("floor-static-") === 0 && n !== STATIC;
      }).map(function (n) { return caches.delete(n); }));
    }).then(function () { return self.clients.claim(); })
  );
});

function keepable(resp) {
  if (!resp || !resp.ok || resp.type !== "basic") { return false; }
  var path = new URL(resp.url).pathname;
  return path.indexOf(LOGIN) !== 0 && (resp.headers.get("Content-Type") || "").indexOf("text/html") === 0;
}

// A copy without the "redirected" flag (a scan's redirect to the lot page), which a
// navigation refuses to use from the cache.
function keep(url, resp) {
  var p = resp.blob().then(function (body) {
    var copy = new Response(body, { status: resp.status, statusText: resp.statusText, headers: resp.headers });
    return caches.open(PAGES).then(function (cache) { return cache.put(url, copy); });
  });
  writes[url] = p;
  return p;
}

function fromPages(url) {
  return caches.open(PAGES).then(function (cache) {
    return cache.match(url, { ignoreVary: true });
  });
}

function offlineAnswer(url) {
  var tries = [url.href];
  if (url.pathname === "/floor/scan/") {
    var code = (url.searchParams.get("code") || "").trim();
    if (code) {
      tries.push(url.origin + "/floor/lots/" + encodeURIComponent(code) + "/");
      tries.push(url.origin + "/floor/lots/" + encodeURIComponent(code.toUpperCase()) + "/");
    }
  }
  var chain = Promise.resolve(null);
  tries.forEach(function (t) {
    chain = chain.then(function (hit) { return hit || fromPages(t); });
  });
  return chain.then(function (hit) {
    return hit || caches.match(OFFLINE_URL, { ignoreVary: true }).then(function (page) {
      return page || new Response("Offline, and this page was not kept on the tablet.", {
        status: 503, headers: { "Content-Type": "text/plain; charset=utf-8" }
      });
    });
  });
}

function page(event, url) {
  return fetch(event.request).then(function (resp) {
    var landed = new URL(resp.url || url.href);
    if (landed.pathname.indexOf(LOGIN) === 0) {
      // Signed out: nothing kept for the last person may be shown from here on.
      event.waitUntil(caches.delete(PAGES));
    } else if (keepable(resp)) {
      event.waitUntil(keep(resp.url, resp.clone()));
      if (resp.redirected && resp.url !== url.href) {
        event.waitUntil(keep(url.href, resp.clone()));
      }
    }
    return resp;
  }, function () {
    return offlineAnswer(url);
  });
}

function staticFile(event) {
  return caches.match(event.request, { ignoreVary: true }).then(function (hit) {
    return hit || fetch(event.request).then(function (resp) {
      if (resp.ok && resp.type === "basic") {
        var copy = resp.clone();
        event.waitUntil(caches.open(STATIC).then(function (c) { return c.put(event.request, copy); }));
      }
      return resp;
    });
  });
}

self.addEventListener("fetch", function (event) {
  var req = event.request;
  if (req.method !== "GET") { return; }
  var url = new URL(req.url);
  if (url.origin !== self.location.origin) { return; }
  if (url.pathname.indexOf("/static/") === 0) {
    event.respondWith(staticFile(event));
  } else if (req.mode === "navigate" && url.pathname.indexOf("/floor/") === 0 &&
             url.pathname.indexOf("/traveller.pdf") < 0) {
    event.respondWith(page(event, url));
  }
});

// The page asks for its own copy (its first load happened before this worker took
// over) and hears back once the copy is kept: tests and the panel wait on that answer.
self.addEventListener("message", function (event) {
  var d = event.data || {};
  if (d.type !== "keep" || !event.source) { return; }
  var url = d.url;
  var done = Promise.resolve(writes[url]).then(function () {
    return d.fresh ? null : fromPages(url);
  }).then(function (hit) {
    if (hit) { return true; }
    return fetch(url, { credentials: "same-origin" }).then(function (resp) {
      if (!keepable(resp) || resp.url !== url) { return false; }
      return keep(url, resp).then(function () { return true; });
    });
  }).then(function (saved) {
    event.source.postMessage({ type: "saved", url: url, saved: saved });
  }, function () {
    event.source.postMessage({ type: "saved", url: url, saved: false });
  });
  event.waitUntil(done);
});
