"""Log a session out when it has been idle too long (a tablet left at a work center)."""

from __future__ import annotations

import time
from collections.abc import Callable

from django.conf import settings
from django.contrib.auth import logout
from django.http import HttpRequest, HttpResponse

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
            else:
                request.session[_KEY] = now
        return self.get_response(request)
