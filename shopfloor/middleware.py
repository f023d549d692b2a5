"""Turn a lost database connection into a clear 503 instead of a 500.

A tablet on flaky Wi-Fi retries with the same Idempotency-Key; a 503 tells it the
request did not land and is safe to repeat.

Two ways an outage reaches us:
- raised in a view: `process_exception` answers it (works wherever this middleware sits);
- raised in another middleware (the session or user lookup in the idle-timeout check, the
  session save on the way out): Django turns that into a 500 right where it happened, so no
  `try` around `get_response` ever sees it. The `got_request_exception` signal still fires
  for it, so we mark the request there and swap the 500 for the 503 in `__call__`. That part
  only covers middleware *inside* this one, so it belongs at the top of MIDDLEWARE.
"""

from __future__ import annotations

import contextlib
import sys
from collections.abc import Callable
from typing import Any

from django.core.signals import got_request_exception
from django.db import DatabaseError, InterfaceError, OperationalError, close_old_connections
from django.http import HttpRequest, HttpResponse, JsonResponse

_MARK = "_shopfloor_database_unavailable"
RETRY_AFTER_SECONDS = "2"


def is_database_outage(exc: BaseException | None) -> bool:
    return isinstance(exc, OperationalError | InterfaceError) or (
        isinstance(exc, DatabaseError) and "connection" in str(exc).lower()
    )


def _note_outage(sender: Any, request: HttpRequest | None = None, **kwargs: Any) -> None:
    # Sent by Django inside its `except` block, so the exception is the current one.
    if request is not None and is_database_outage(sys.exc_info()[1]):
        setattr(request, _MARK, True)


got_request_exception.connect(_note_outage, dispatch_uid="shopfloor.middleware.note_outage")


def database_unavailable_response(request: HttpRequest) -> HttpResponse:
    # Drop connections the outage broke, so the next request reconnects cleanly.
    with contextlib.suppress(Exception):
        close_old_connections()
    wants_json = (
        request.path.startswith("/api/")
        or "json" in request.headers.get("Accept", "")
        or request.headers.get("HX-Request") == "true"
    )
    response: HttpResponse
    if wants_json:
        response = JsonResponse(
            {
                "error": "database_unavailable",
                "detail": "The database is not reachable right now. Nothing was saved; "
                "retry with the same Idempotency-Key.",
            },
            status=503,
        )
    else:
        response = HttpResponse(
            "<!doctype html><title>Service unavailable</title>"
            "<h1>The database is not reachable right now</h1>"
            "<p>Nothing was saved. Wait a moment and try again.</p>",
            status=503,
            content_type="text/html; charset=utf-8",
        )
    response["Retry-After"] = RETRY_AFTER_SECONDS
    return response


class DatabaseUnavailableMiddleware:
    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        response = self.get_response(request)
        if response.status_code == 500 and getattr(request, _MARK, False):
            return database_unavailable_response(request)
        return response

    def process_exception(self, request: HttpRequest, exception: Exception) -> HttpResponse | None:
        if is_database_outage(exception):
            return database_unavailable_response(request)
        return None
