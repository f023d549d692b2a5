"""Tablet views: thin; parse the form, call one service, render the result."""

from __future__ import annotations

from django.contrib.auth import login, logout
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.views.decorators.http import require_http_methods

from shopfloor.errors import DomainError
from shopfloor.floor import services


@require_http_methods(["GET", "POST"])
def login_view(request: HttpRequest) -> HttpResponse:
    error = ""
    if request.method == "POST":
        try:
            person = services.badge_login(
                request.POST.get("badge", ""), request.POST.get("pin", "")
            )
        except DomainError as exc:
            error = exc.detail
        else:
            login(request, person.user, backend="django.contrib.auth.backends.ModelBackend")
            return redirect(request.GET.get("next") or "home")
    idle = request.GET.get("idle") == "1"
    return render(request, "floor/login.html", {"error": error, "idle": idle},
                  status=400 if error else 200)


def logout_view(request: HttpRequest) -> HttpResponse:
    logout(request)
    return redirect("floor:login")
