"""The tablet's offline support on the server side: the service worker and the page it
shows when the network is down and the asked-for page was not kept on the tablet.

The worker's script is a static file (floor/sw.js) served from /floor/ so its scope
covers the floor pages. In front of it go the list of static files to keep and a
version: a hash of the worker and of each of those files, so a release that changes any
of them installs a new worker with a fresh cache (DEVELOPERS.md "Offline tablet").
"""

from __future__ import annotations

import hashlib
import json
from functools import lru_cache

from django.contrib.staticfiles import finders
from django.contrib.staticfiles.storage import staticfiles_storage
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.templatetags.static import static
from django.urls import reverse
from django.views.decorators.http import require_GET

#: Static files every floor page needs, kept by the worker at install.
ASSETS = (
    "css/site.css",
    "floor/tablet.css",
    "django_htmx/htmx-2.min.js",
    "js/site.js",
    "floor/tablet.js",
    "floor/offline.js",
    "floor/entry.js",
    "floor/entry.css",
)
WORKER = "floor/sw.js"


def _read(path: str) -> bytes:
    """A static file's bytes: from collected static files when there, else the source."""
    if staticfiles_storage.exists(path):
        with staticfiles_storage.open(path) as handle:
            data: bytes = handle.read()
            return data
    found = finders.find(path)
    if not found:
        raise FileNotFoundError(f"static file {path} not found")
    with open(str(found), "rb") as handle:
        return handle.read()


@lru_cache(maxsize=1)
def worker_script() -> str:
    """The worker with its version and asset list in front (computed once per process)."""
    body = _read(WORKER)
    digest = hashlib.sha256(body)
    for path in ASSETS:
        digest.update(path.encode())
        digest.update(_read(path))
    head = (
        f"var VERSION = {json.dumps(digest.hexdigest()[:16])};\n"
        f"var ASSETS = {json.dumps([static(p) for p in ASSETS])};\n"
        f"var OFFLINE_URL = {json.dumps(reverse('floor:offline'))};\n"
    )
    return head + body.decode("utf-8")


@require_GET
def service_worker(request: HttpRequest) -> HttpResponse:
    response = HttpResponse(worker_script(), content_type="text/javascript; charset=utf-8")
    # Browsers check for a new worker on each visit; never let a proxy keep an old one.
    response["Cache-Control"] = "no-cache"
    return response


@require_GET
def offline_page(request: HttpRequest) -> HttpResponse:
    """Shown by the worker for a page it does not have while the network is down. It has
    no person's data: the page script fills in the lots kept on this tablet."""
    return render(request, "floor/offline.html", {})
