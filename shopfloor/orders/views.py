"""Planner pages: the job list, job entry, the job page with release and make-up panels,
and the printable lot label.

Thin views: parse the form, call one orders service, render. Every person with a shop
role may read jobs; entering and releasing are for planners (and administrators), and
the services refuse everyone else with a reason the 403 page shows.
"""

from __future__ import annotations

import uuid
from typing import Any

from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from shopfloor.access import require_lot_visible, scope_for
from shopfloor.core import panelise, units
from shopfloor.errors import DomainError
from shopfloor.floor import idempotency
from shopfloor.floor.permissions import PLAN_ROLES, READ_ROLES, roles_of
from shopfloor.orders import labels, read, services
from shopfloor.plant.models import Customer, Lot, Part, Person
from shopfloor.plant.people import person_for

OVERRIDE_ROWS = 3


def _shown(problems: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Problems with the allowed values as one line of text for the table."""
    out = []
    for p in problems:
        allowed = p.get("allowed")
        text = ", ".join(map(str, allowed)) if isinstance(allowed, list) else (allowed or "")
        out.append({**p, "allowed_text": text})
    return out


def _reader(request: HttpRequest) -> frozenset[str]:
    roles = roles_of(request.user)
    if not roles & READ_ROLES:
        raise PermissionDenied(
            "The job pages are for people with a shop role; ask an administrator to add yours."
        )
    return roles


def _person(request: HttpRequest) -> Person:
    try:
        return person_for(request.user)
    except DomainError as exc:
        raise PermissionDenied(exc.detail) from exc


def _planner(request: HttpRequest) -> Person:
    person = _person(request)
    if not roles_of(request.user) & PLAN_ROLES:
        raise PermissionDenied("Only a planner (or an administrator) can enter and release jobs.")
    return person


@login_required
@require_GET
def job_list(request: HttpRequest) -> HttpResponse:
    roles = _reader(request)
    error, problems, rows = "", [], []
    try:
        flt = read.parse_filter(request.GET)
        rows = read.list_jobs(flt)
    except DomainError as exc:
        error, problems = exc.detail, exc.problems
    return render(
        request,
        "orders/list.html",
        {
            "rows": rows,
            "statuses": read.STATUSES,
            "q": request.GET,
            "error": error,
            "problems": _shown(problems),
            "can_plan": bool(roles & PLAN_ROLES),
        },
        status=400 if error else 200,
    )


def _entry_context(values: dict[str, Any], problems: list[dict[str, Any]]) -> dict[str, Any]:
    by_field: dict[str, list[str]] = {}
    for p in problems:
        root = str(p.get("field", "")).split("[")[0].split(".")[0]
        by_field.setdefault(root, []).append(p["problem"])
    rows = values.get("override_rows") or [{} for _ in range(OVERRIDE_ROWS)]
    return {
        "v": values,
        "problems": _shown(problems),
        "field_errors": by_field,
        "customers": Customer.objects.order_by("code"),
        "parts": Part.objects.select_related("customer").prefetch_related("revisions")[:500],
        "quantities": units.quantities(),
        "override_rows": rows,
        "today": timezone.localdate().isoformat(),
        "idempotency_key": values.get("idempotency_key") or uuid.uuid4().hex,
    }


def _override_rows(post: Any) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """(rows as typed, overrides to send): blank rows are ignored, numbers parsed."""
    typed: list[dict[str, Any]] = []
    overrides: list[dict[str, Any]] = []
    for i in range(OVERRIDE_ROWS):
        row = {k: post.get(f"ov-{i}-{k}", "").strip() for k in services.OVERRIDE_KEYS}
        typed.append(row)
        if not any(row.values()):
            continue
        item: dict[str, Any] = {"quantity": row["quantity"], "reason": row["reason"]}
        if row["step_code"]:
            item["step_code"] = row["step_code"]
        for key in ("min", "max", "target"):
            if row[key]:
                try:
                    item[key] = units.parse_decimal(row[key])  # ASCII decimals only
                except ValueError:
                    item[key] = row[key]  # the service reports it as not a number
        overrides.append(item)
    return typed, overrides


@login_required
@require_http_methods(["GET", "POST"])
def job_new(request: HttpRequest) -> HttpResponse:
    person = _planner(request)
    if request.method == "GET":
        return render(request, "orders/new.html", _entry_context({"ipc_class": "2"}, []))
    post = request.POST
    values: dict[str, Any] = {k: post.get(k, "") for k in services.JobInput.__dataclass_fields__}
    typed, overrides = _override_rows(post)
    values["override_rows"] = typed
    values["idempotency_key"] = post.get("idempotency_key", "")
    data = services.JobInput(
        **{k: v for k, v in values.items() if k in services.JobInput.__dataclass_fields__}
        | {"customer_overrides": overrides}
    )

    def action() -> tuple[int, dict[str, Any]]:
        job = services.enter_job(person=person, data=data)
        return 201, {"number": job.number}

    try:
        outcome = idempotency.run(
            user=request.user,
            key=values["idempotency_key"] or None,
            request_fingerprint=idempotency.fingerprint(
                "POST", request.path, {**{k: v for k, v in values.items()}, "ov": overrides}
            ),
            action=action,
        )
    except DomainError as exc:
        if exc.status == 403:
            raise PermissionDenied(exc.detail) from exc
        problems = exc.problems or [
            {"field": "job", "value": None, "problem": exc.detail, "allowed": None}
        ]
        return render(
            request, "orders/new.html", _entry_context(values, problems), status=exc.status
        )
    return redirect("orders:job", number=outcome.body["number"])


def _job_page(
    request: HttpRequest,
    number: str,
    *,
    error: str = "",
    problems: list[dict[str, Any]] | None = None,
    status: int = 200,
    bpp: int | None = None,
) -> HttpResponse:
    roles = _reader(request)
    try:
        summary = read.job_summary(number, scope_for(request.user))
    except DomainError as exc:
        return render(request, "404.html", {"reason": exc.detail}, status=exc.status)
    job = summary.job
    plan = services.release_plan(job, bpp) if not summary.released else None
    layout = getattr(job, "layout", None) if summary.released else None
    makeup_default = None
    if layout is not None and summary.quantities.shortfall:
        makeup_default = panelise.makeup_panels(
            summary.quantities.shortfall, layout.boards_per_panel, float(layout.scrap_allowance_pct)
        )
    return render(
        request,
        "orders/job.html",
        {
            "s": summary,
            "job": job,
            "q": summary.quantities,
            "plan": plan,
            "layout": layout,
            "partners": services.shareable_jobs(job) if plan and plan["routing"] else [],
            "makeup_default": makeup_default,
            "can_plan": bool(roles & PLAN_ROLES),
            "error": error,
            "problems": _shown(problems or []),
            "spec_missing": not job.part_revision.build_spec,
        },
        status=status,
    )


@login_required
@require_GET
def job_page(request: HttpRequest, number: str) -> HttpResponse:
    bpp = request.GET.get("boards_per_panel", "")
    return _job_page(
        request, number, bpp=int(bpp) if bpp.isdigit() and 0 < int(bpp) < 2001 else None
    )


@login_required
@require_POST
def job_release(request: HttpRequest, number: str) -> HttpResponse:
    person = _planner(request)
    share: list[tuple[str, Any]] = []
    partner = request.POST.get("share_job", "").strip()
    if partner:
        share.append((partner, request.POST.get("share_boards_per_panel", "").strip()))
    try:
        services.release_job(
            person=person,
            number=number,
            boards_per_panel=request.POST.get("boards_per_panel", "").strip(),
            share_with=share,
        )
    except DomainError as exc:
        if exc.status == 403:
            raise PermissionDenied(exc.detail) from exc
        return _job_page(
            request, number, error=exc.detail, problems=exc.problems, status=exc.status
        )
    return redirect("orders:job", number=number)


@login_required
@require_POST
def job_makeup(request: HttpRequest, number: str) -> HttpResponse:
    person = _planner(request)
    try:
        services.release_makeup(
            person=person, number=number, panels=request.POST.get("panels", "").strip() or None
        )
    except DomainError as exc:
        if exc.status == 403:
            raise PermissionDenied(exc.detail) from exc
        return _job_page(
            request, number, error=exc.detail, problems=exc.problems, status=exc.status
        )
    return redirect("orders:job", number=number)


@login_required
@require_GET
def lot_label(request: HttpRequest, code: str) -> HttpResponse:
    _reader(request)
    lot = (
        Lot.objects.select_related("routing_revision__part_revision__part").with_code(code).first()
    )
    if lot is None:
        return render(request, "404.html", {"reason": f"No lot {code!r}."}, status=404)
    try:
        require_lot_visible(scope_for(request.user), lot)
    except DomainError as exc:
        raise PermissionDenied(exc.detail) from exc
    paper = request.GET.get("paper", "label").lower()
    if paper not in labels.LABEL_SIZES:
        paper = "label"
    response = HttpResponse(labels.lot_label_pdf(lot, paper), content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="label-{lot.code}.pdf"'
    return response
