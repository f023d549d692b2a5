"""Turn a lost database connection into a clear 503 instead of a 500.

A tablet on flaky Wi-Fi retries with the same Idempotency-Key; a 503 tells it the
request did not land and is safe to repeat.
"""

from __future__ import annotations

from collections.abc import Callable

from django.db import DatabaseError, InterfaceError, OperationalError
from django.http import HttpRequest, HttpResponse, JsonResponse


class DatabaseUnavailableMiddleware:
    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        return self.get_response(request)

    def process_exception(self, request: HttpRequest, exception: Exception) -> HttpResponse | None:
        if isinstance(exception, OperationalError | InterfaceError) or (
            isinstance(exception, DatabaseError) and "connection" in str(exception).lower()
        ):
            response = JsonResponse(
                {
                    "error": "database_unavailable",
                    "detail": "The database is not reachable right now. Nothing was saved; "
                    "retry with the same Idempotency-Key.",
                },
                status=503,
            )
            response["Retry-After"] = "2"
            return response
        return None
