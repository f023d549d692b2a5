"""The health check: is the database reachable, is the broker reachable, and which is down.

`/healthz` is what the container healthcheck (docker-compose.yml) and a load balancer
call over plain http on the host's loopback address, so `HealthCheckMiddleware` answers it
before host validation and the https redirect (both meant for people's browsers); it says
nothing but "ok" or "down" per dependency, so exposing it there costs nothing.
"""

from __future__ import annotations

import logging
from collections.abc import Callable

import redis
from django.conf import settings
from django.db import connection
from django.http import HttpRequest, HttpResponse, JsonResponse

log = logging.getLogger(__name__)

PATH = "/healthz"
#: Seconds each dependency may take to answer; the compose check itself times out at 4-5 s.
TIMEOUT_SECONDS = 2.0


def check_database() -> str:
    try:
        with connection.cursor() as cursor:
            cursor.execute("SELECT 1")
    except Exception as exc:  # any failure means "down": the reply names it
        log.warning("health: database down: %s", exc)
        return f"down ({type(exc).__name__})"
    return "ok"


def check_broker() -> str:
    url = settings.REDIS_URL
    if not url:
        return "not used (tasks run in-process)"

    try:
        client = redis.Redis.from_url(
            url, socket_connect_timeout=TIMEOUT_SECONDS, socket_timeout=TIMEOUT_SECONDS
        )
        try:
            client.ping()
        finally:
            client.close()
    except Exception as exc:  # any failure means "down": the reply names it
        log.warning("health: broker down: %s", exc)
        return f"down ({type(exc).__name__})"
    return "ok"


def health_response() -> JsonResponse:
    checks = {"database": check_database(), "broker": check_broker()}
    down = [name for name, state in checks.items() if state.startswith("down")]
    body: dict[str, object] = {"status": "down" if down else "ok", **checks}
    if down:
        body["down"] = down
    response = JsonResponse(body, status=503 if down else 200)
    response["Cache-Control"] = "no-store"
    if down:
        response["Retry-After"] = "10"
    return response


class HealthCheckMiddleware:
    """Answer GET /healthz before host checks, the https redirect, sessions and auth."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        if request.path == PATH and request.method in ("GET", "HEAD"):
            return health_response()
        return self.get_response(request)
