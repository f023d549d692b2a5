"""Site-wide pages: the start page, health check, and friendly error pages."""

from __future__ import annotations

from django.contrib import admin
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import redirect, render
from django.utils.http import url_has_allowed_host_and_scheme
from django.views.decorators.csrf import csrf_exempt
from django.views.decorators.http import require_POST

from shopfloor import display, throttle
from shopfloor.health import health_response


def home(request: HttpRequest) -> HttpResponse:
    if not request.user.is_authenticated:
        return redirect("floor:login")
    return render(request, "home.html")


def healthz(request: HttpRequest) -> JsonResponse:
    """Normally answered by shopfloor.health.HealthCheckMiddleware; same reply here."""
    return health_response()


@csrf_exempt  # a JSON 404 for any method; nothing is read or changed
def api_not_found(request: HttpRequest) -> JsonResponse:
    return JsonResponse(
        {"error": "not_found", "detail": f"No API endpoint at {request.path}; see /api/docs/."},
        status=404,
    )


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


def admin_login(request: HttpRequest) -> HttpResponse:
    """The admin site's login behind the same throttle and lockout as the badge login.

    Failures count per client address and per user name as typed; at
    ADMIN_LOGIN_MAX_FAILURES the name is locked for LOGIN_BLOCK_SECONDS (even the right
    password is refused, 429 with Retry-After), logged and audited (shopfloor.throttle).
    """

    if request.method != "POST":
        return admin.site.login(request)
    keys = throttle.admin_keys(throttle.client_ip(request), request.POST.get("username", ""))
    try:
        throttle.check(keys)
    except throttle.Throttled as exc:
        response = render(request, "admin_locked.html", {"reason": exc.detail}, status=exc.status)
        response["Retry-After"] = str(exc.retry_after)
        return response
    response = admin.site.login(request)
    if request.user.is_authenticated and request.user.is_staff:
        throttle.clear(keys)
    else:
        throttle.record_failure(keys, what="admin sign-in")
    return response


@require_POST
def set_theme(request: HttpRequest) -> HttpResponse:
    """The high-contrast toggle: kept on this device (a cookie, so the login page follows
    it too) and, for a signed-in person, as their own setting (it follows them to any
    tablet). Back to the page it was pressed on; an unknown theme is refused with 400."""

    theme = request.POST.get("theme", "")
    if theme not in display.THEMES:
        return HttpResponse(
            f"Theme {theme[:20]!r} is not offered; use {' or '.join(display.THEMES)}.",
            status=400,
            content_type="text/plain; charset=utf-8",
        )
    display.save_theme(request, theme)
    target = request.POST.get("next", "")
    if not url_has_allowed_host_and_scheme(target, allowed_hosts={request.get_host()}):
        target = "/"
    response = redirect(target)
    response.set_cookie(
        display.THEME_COOKIE, theme, max_age=400 * 24 * 3600, samesite="Lax", httponly=True
    )
    return response
