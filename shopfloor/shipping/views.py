"""Shipping pages for the planner: jobs ready to ship, a job's lots and shipments, the
ship form, and the issued certificates. Thin: one read or one service call each."""

from __future__ import annotations

from collections.abc import Callable
from functools import wraps
from typing import Any

from django.contrib import messages
from django.contrib.auth.views import redirect_to_login
from django.db.models import Sum
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods

from shopfloor.errors import DomainError, InvalidInput, NotAllowed
from shopfloor.floor.models import AcceptedQuantity
from shopfloor.floor.permissions import roles_of
from shopfloor.pages import refusal
from shopfloor.plant.models import Job, Person
from shopfloor.plant.people import person_for
from shopfloor.shipping import services
from shopfloor.shipping.models import Certificate, Shipment
from shopfloor.shipping.services import CERTIFICATE_READ_ROLES

READ_ROLES = CERTIFICATE_READ_ROLES


def shipping_reader(view: Callable[..., HttpResponse]) -> Callable[..., HttpResponse]:
    """Signed in, with a role that may read shipping; refusals become pages."""

    @wraps(view)
    def wrapped(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponse:
        if not request.user.is_authenticated:
            return redirect_to_login(request.get_full_path())
        try:
            person = person_for(request.user)
            roles = roles_of(request.user)
            if not roles & READ_ROLES:
                raise NotAllowed(
                    "Shipping pages are for planners, quality engineers, supervisors and "
                    "administrators. Ask an administrator for the planner role."
                )
            return view(request, person, roles, *args, **kwargs)
        except DomainError as exc:
            return refusal(request, exc)

    return wrapped


@require_GET
@shipping_reader
def index(request: HttpRequest, person: Person, roles: set[str]) -> HttpResponse:
    number = (request.GET.get("job") or "").strip()
    if number:
        return redirect("shipping:job", number=number)
    accepted = (
        AcceptedQuantity.objects.values("job_id")
        .annotate(n=Sum("boards"))
        .values_list("job_id", "n")
    )
    shipped = dict(
        Shipment.objects.values("job_id").annotate(n=Sum("quantity")).values_list("job_id", "n")
    )
    jobs = {
        j.pk: j
        for j in Job.objects.filter(pk__in=[job_id for job_id, _ in accepted]).select_related(
            "part_revision__part__customer"
        )
    }
    ready: list[dict[str, Any]] = []
    done: list[dict[str, Any]] = []
    for job_id, n in accepted:
        job = jobs[job_id]
        sent = int(shipped.get(job_id, 0))
        row = {
            "job": job,
            "accepted": int(n or 0),
            "shipped": sent,
            "available": max(min(int(n or 0) - sent, job.quantity - sent), 0),
            "closed": sent >= job.quantity,
        }
        (done if row["closed"] else ready).append(row)
    ready.sort(key=lambda r: (r["job"].due_date, r["job"].number))
    recent = list(
        Shipment.objects.select_related("job__part_revision__part", "certificate").order_by(
            "-shipped_at"
        )[:20]
    )
    return render(
        request,
        "shipping/index.html",
        {"ready": ready, "closed": done, "recent": recent},
    )


def _job_context(job: Job) -> dict[str, Any]:
    state = services.job_shipping(job)
    lots = []
    for a in state.lots:
        lots.append(
            {
                "a": a,
                "problems": [p["problem"] for p in services.lot_problems(a.lot, job)],
            }
        )
    shipments = list(
        Shipment.objects.filter(job=job)
        .select_related("certificate", "shipped_by")
        .prefetch_related("lots__lot")
        .order_by("shipped_at")
    )
    suggested = min(state.available, state.remaining)
    return {
        "job": job,
        "state": state,
        "lots": lots,
        "shipments": shipments,
        "entered": {
            "quantity": suggested or "",
            "lots": {a.lot.code for a in state.lots if a.available > 0},
        },
    }


@require_http_methods(["GET", "POST"])
@shipping_reader
def job_page(request: HttpRequest, person: Person, roles: set[str], number: str) -> HttpResponse:
    job = services.find_job(number)
    may_ship = bool(roles & services.SHIP_ROLES)
    if request.method == "GET":
        return render(request, "shipping/job.html", {**_job_context(job), "may_ship": may_ship})
    raw = (request.POST.get("quantity") or "").strip()
    lots = request.POST.getlist("lots")
    try:
        try:
            quantity: Any = int(raw)
        except ValueError:
            raise InvalidInput(
                f"Quantity must be a whole number of boards; got {raw!r}."
                if raw
                else "Enter how many boards to ship."
            ) from None
        cert = services.ship(
            person=person, job_number=job.number, quantity=quantity, lot_codes=lots
        )
    except DomainError as exc:
        if exc.status == 403:
            raise
        ctx = {**_job_context(job), "may_ship": may_ship}
        ctx.update(
            error=exc.detail, problems=exc.problems, entered={"quantity": raw, "lots": set(lots)}
        )
        return render(request, "shipping/job.html", ctx, status=exc.status)
    messages.success(
        request,
        f"Shipment {cert.shipment.number} of {cert.shipment.quantity} board(s) recorded; "
        f"certificate {cert.number} issued.",
    )
    return redirect(reverse("shipping:job", args=[job.number]))


@require_GET
@shipping_reader
def certificate_pdf(
    request: HttpRequest, person: Person, roles: set[str], number: str
) -> HttpResponse:
    cert: Certificate = services.certificate_by_number(number)
    response = HttpResponse(bytes(cert.pdf), content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="{cert.number}.pdf"'
    return response
