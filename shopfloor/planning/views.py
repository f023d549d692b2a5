"""Planning pages: the what-if quote and the "forecast now" button. Thin: one service each."""

from __future__ import annotations

import json
from typing import Any

from django.contrib import messages
from django.contrib.auth.views import redirect_to_login
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_http_methods, require_POST

from routing.builder.examples import EXAMPLE_SPECS
from shopfloor import strict_json
from shopfloor.errors import DomainError
from shopfloor.floor.permissions import roles_of
from shopfloor.pages import refusal
from shopfloor.planning import services

QUOTE_FIELDS = ("quantity", "priority", "boards_per_panel", "panels_per_lot")


@require_http_methods(["GET", "POST"])
def quote_page(request: HttpRequest) -> HttpResponse:
    """A spec and quantity -> P50 / P90 ship dates against today's floor."""
    if not request.user.is_authenticated:
        return redirect_to_login(request.get_full_path())
    roles = roles_of(request.user)
    try:
        services.require_planning(roles, "quote a ship date")
    except DomainError as exc:
        return refusal(request, exc)
    form: dict[str, Any] = {
        "spec": json.dumps(EXAMPLE_SPECS["two_layer"], indent=2),
        "quantity": "400",
        "priority": "100",
        "boards_per_panel": str(services.DEFAULT_BOARDS_PER_PANEL),
        "panels_per_lot": str(services.DEFAULT_PANELS_PER_LOT),
    }
    context: dict[str, Any] = {"form": form, "result": None, "error": "", "problems": []}
    status = 200
    if request.method == "POST":
        form.update({k: request.POST.get(k, "") for k in ("spec", *QUOTE_FIELDS)})
        try:
            spec = strict_json.loads(form["spec"])
        except ValueError as exc:
            context["error"] = f"The build spec is not valid JSON: {exc}"
        else:
            data = {k: form[k] for k in QUOTE_FIELDS if form[k].strip()}
            try:
                context["result"] = services.quote(roles, {"spec": spec, **data})
            except DomainError as exc:
                context["error"], context["problems"] = exc.detail, exc.problems
        if context["error"]:
            status = 400
    context["run"] = services.latest_run()
    context["replications"] = services.QUOTE_REPLICATIONS
    return render(request, "planning/quote.html", context, status=status)


@require_POST
def run_now(request: HttpRequest) -> HttpResponse:
    """Ask for a forecast run (queued; the board picks it up when it is done)."""
    if not request.user.is_authenticated:
        return redirect_to_login(reverse("quality:board"))
    try:
        note = services.request_forecast(roles_of(request.user), request.user.pk)
    except DomainError as exc:
        return refusal(request, exc)
    messages.info(request, note)
    return redirect(reverse("quality:board"))
