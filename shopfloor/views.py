"""Site-wide pages: the start page, health check, and friendly error pages."""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import redirect, render

from shopfloor.health import health_response


def home(request: HttpRequest) -> HttpResponse:
    if not request.user.is_authenticated:
        return redirect("floor:login")
    return render(request, "home.html")


def healthz(request: HttpRequest) -> JsonResponse:
    """Normally answered by shopfloor.health.HealthCheckMiddleware; same reply here."""
    return health_response()


def forbidden(request: HttpRequest, exception: Exception | None = None) -> HttpResponse:
    reason = str(exception) if exception and str(exception) else "You do not have access to this."
    return render(request, "403.html", {"reason": reason}, status=403)


def not_found(request: HttpRequest, exception: Exception | None = None) -> HttpResponse:
    if request.path.startswith("/api/"):
        return JsonResponse(
            {"error": "not_found", "detail": f"No API endpoint at {request.path}; see /api/docs/."},
            status=404,
        )
    return render(
        request, "404.html", {"reason": "That page or record does not exist."}, status=404
    )
