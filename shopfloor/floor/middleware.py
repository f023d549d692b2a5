"""Log a session out when it has been idle too long (a tablet left at a work center).

When it fires, the person is sent to the badge login with ?idle=1 (the page says why)
and ?next= so they come back to where they were; an htmx request gets HX-Redirect so
the whole page changes, not just the fragment it asked for.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from urllib.parse import urlencode

from django.conf import settings
from django.contrib.auth import logout
from django.http import HttpRequest, HttpResponse, HttpResponseRedirect, JsonResponse
from django.urls import reverse

_KEY = "last_activity"


class IdleTimeoutMiddleware:
    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        if request.user.is_authenticated and hasattr(request, "session"):
            now = time.time()
            last = request.session.get(_KEY)
            if last is not None and now - float(last) > settings.SESSION_IDLE_TIMEOUT_SECONDS:
                logout(request)
                request.idle_logged_out = True  # type: ignore[attr-defined]
                return self._to_login(request)
            request.session[_KEY] = now
        return self.get_response(request)

    @staticmethod
    def _to_login(request: HttpRequest) -> HttpResponse:
        if request.path.startswith("/api/"):
            return JsonResponse(
                {
                    "error": "not_authenticated",
                    "detail": "The session was idle too long; log in again.",
                },
                status=401,
            )
        params = {"idle": "1"}
        if request.method == "GET":
            params["next"] = request.get_full_path()
        url = f"{reverse('floor:login')}?{urlencode(params)}"
        if request.headers.get("HX-Request") == "true":
            response = HttpResponse(status=204)
            response["HX-Redirect"] = url
            return response
        return HttpResponseRedirect(url)
