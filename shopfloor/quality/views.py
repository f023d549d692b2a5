"""Board and quality pages: thin views that parse input, call one read or service, render.

Every refusal is a DomainError turned into a page (or JSON) with its status and message:
403 says why, 404 says what was not found, 400 says what was wrong and what is allowed.
"""

from __future__ import annotations

import datetime as dt
from typing import Any
from zoneinfo import ZoneInfo

from django.conf import settings
from django.contrib import messages
from django.http import (
    HttpRequest,
    HttpResponse,
    JsonResponse,
    StreamingHttpResponse,
)
from django.http.response import HttpResponseBase
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.http import urlencode
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from shopfloor import parsing
from shopfloor.access import Scope
from shopfloor.chemistry.read import bath_coverage
from shopfloor.core import judging
from shopfloor.core.judging import describe_window
from shopfloor.core.yields import overall_yield as rolled_yield
from shopfloor.errors import Conflict, DomainError, InvalidInput
from shopfloor.floor.models import ScrapReason
from shopfloor.floor.services import lot_yields
from shopfloor.orders import read as orders_read
from shopfloor.pages import reader, refusal
from shopfloor.planning import services as planning
from shopfloor.planning.services import PLANNING_ROLES
from shopfloor.quality.models import RootCause
from shopfloor.quality.read import (
    board,
    charts,
    exports,
    genealogy,
    history,
    records,
    search,
    spc_series,
)
from shopfloor.quality.services import deadlines, dispositions, limits, queue
from shopfloor.shipping.models import Certificate

# --- board ----------------------------------------------------------------------------


def _board_context(request: HttpRequest, scope: Scope) -> dict[str, Any]:
    error = ""
    try:
        filters = board.parse_filters(request.GET)
    except DomainError as exc:
        error, filters = exc.detail, board.BoardFilters()
    data = board.build_board(scope, filters)
    query = urlencode(filters.as_query())
    return {
        "board": data,
        "filters": filters,
        "query": query,
        "error": error,
        "scope": scope,
        "may_plan": bool(scope.roles & PLANNING_ROLES),
        # jobs whose remaining good boards no longer cover the order (one query)
        "short_jobs": orders_read.short_jobs() if scope.sees_all else [],
        "sorts": board.SORTS,
        "raw": request.GET,
    }


@require_GET
@reader
def board_page(request: HttpRequest, scope: Scope) -> HttpResponse:
    ctx = _board_context(request, scope)
    return render(request, "board/board.html", ctx, status=400 if ctx["error"] else 200)


@require_GET
@reader
def board_body(request: HttpRequest, scope: Scope) -> HttpResponse:
    """The board body alone, polled by htmx with the current filters."""
    ctx = _board_context(request, scope)
    return render(request, "board/board.html#board_body", ctx, status=400 if ctx["error"] else 200)


@require_POST
@reader
def queue_move(request: HttpRequest, scope: Scope, work_center_id: int) -> HttpResponse:
    """Move one lot in a queue: move=top|up|down with lot_step=<id>, or move=<move>:<id>
    (the board has one form per work center; each row's buttons carry their lot)."""
    move, _, step_raw = request.POST.get("move", "").partition(":")
    step_id = parsing.whole_or_none(step_raw or request.POST.get("lot_step"))
    if step_id is None:
        return refusal(request, InvalidInput("Pick a lot to move (lot_step is missing)."))
    queue.move_in_queue(scope.actor, work_center_id, step_id, move)
    return redirect(reverse("quality:board") + _back_query(request))


@require_POST
@reader
def queue_release(request: HttpRequest, scope: Scope, lot_step_id: int) -> HttpResponse:
    deadlines.release_queue_warning(scope.actor, lot_step_id, request.POST.get("reason", ""))
    return redirect(reverse("quality:board") + _back_query(request))


def _back_query(request: HttpRequest) -> str:
    query = request.POST.get("back", "")
    return f"?{query}" if query and "\n" not in query and not query.startswith("/") else ""


# --- quality pages --------------------------------------------------------------------


@require_GET
@reader
def overview(request: HttpRequest, scope: Scope) -> HttpResponse:
    return render(request, "quality/overview.html", {"data": search.overview(scope)})


@require_GET
@reader
def lot_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:

    h = history.lot_history(scope, code, full_readings=False)
    yields = lot_yields(h.lot)
    return render(
        request,
        "quality/lot.html",
        {
            "h": h,
            "summary": exports.reading_summary(h),
            "forecast": planning.lot_projection(h.lot),
            "baths": bath_coverage(h.lot),
            "yields": [y for y in yields if y.boards_scrapped or y.panels_scrapped],
            "all_yields": yields,
            "rolled_yield": rolled_yield(yields),
            "certificates": list(
                Certificate.objects.filter(shipment__lots__lot=h.lot)
                .select_related("shipment__job")
                .distinct()
            ),
        },
    )


@require_GET
@reader
def lot_history_json(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    return JsonResponse(history.history_dict(history.lot_history(scope, code)))


@require_GET
@reader
def lot_csv(request: HttpRequest, scope: Scope, code: str) -> HttpResponseBase:
    lot = history.find_lot_for(scope, code)
    response = StreamingHttpResponse(exports.stream_lot_csv(lot), content_type="text/csv")
    response["Content-Disposition"] = f'attachment; filename="lot-{lot.code}.csv"'
    return response


@require_GET
@reader
def lot_pdf(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    if request.GET.get("kind") == "certificate":
        raise Conflict(
            "A certificate of conformance is issued with a shipment, and only when every lot "
            "in it has completed every step, every reading is in window or dispositioned and "
            "no NCR is open. Ship the job from the shipping page; its certificate is listed "
            "there and on this lot's page."
        )
    h = history.lot_history(scope, code)
    response = HttpResponse(exports.lot_record_pdf(h), content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="lot-{h.lot.code}-record.pdf"'
    return response


@require_GET
@reader
def job_page(request: HttpRequest, scope: Scope, number: str) -> HttpResponse:
    g = genealogy.job_genealogy(scope, number)
    return render(request, "quality/job.html", {"g": g, "forecast": planning.job_projection(g.job)})


@require_GET
@reader
def panel_page(request: HttpRequest, scope: Scope, serial: str) -> HttpResponse:
    return render(
        request, "quality/panel.html", {"panel": genealogy.panel_genealogy(scope, serial)}
    )


@require_GET
@reader
def material_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    return render(request, "quality/material.html", {"r": genealogy.material_recall(scope, code)})


@require_GET
@reader
def search_page(request: HttpRequest, scope: Scope) -> HttpResponse:
    try:
        result = search.search(scope, request.GET) if request.GET else None
    except DomainError as exc:
        return render(
            request,
            "quality/search.html",
            {"error": exc.detail, "q": request.GET},
            status=exc.status,
        )
    return render(request, "quality/search.html", {"result": result, "q": request.GET})


@require_GET
@reader
def spc_list(request: HttpRequest, scope: Scope) -> HttpResponse:
    return render(request, "quality/spc_list.html", {"series": spc_series.spc_series(scope)})


def _spc_context(scope: Scope, key: str) -> dict[str, Any]:
    d = spc_series.spc_detail(scope, key)
    chart_svg = spread_svg = hist_svg = ""

    extra = 2 if d.attribute is not None or d.chart in ("c", "u", "p", "np") else 1

    def fmt(v: float) -> str:  # control limits: a digit or two finer than one reading
        return judging.for_people(d.row.quantity, v, symbol=False, extra_digits=extra)

    if d.chart == "p":

        def fmt(v: float) -> str:  # a share failed, as a percentage
            return f"{100 * v:.2f} %"

    elif d.chart == "np":

        def fmt(v: float) -> str:  # boards failed
            return f"{v:.2f}"

    where = f"{d.row.quantity} at {d.row.work_center}"
    if d.limits is not None:
        what = f"subgroup means of {d.subgroup_size}" if d.subgroup_size > 1 else "points"
        if d.chart == "p":
            what = "share of boards failed per lot (limits move with each lot's n)"
        elif d.chart == "np":
            what = f"boards failed per lot of {d.point_n[0] if d.point_n else ''}"
        chart_svg = charts.to_svg(
            charts.control_chart(
                d.values,
                d.limits.centre,
                d.limits.ucl,
                d.limits.lcl,
                [(s.index, s.rule) for s in d.signals],
                title=f"{where}: {d.chart_label}, {what}",
                unit=d.unit,
                fmt=fmt,
                ucls=d.point_ucl or None,
                lcls=d.point_lcl or None,
            )
        )
        spread = d.limits.range
        if d.spreads and spread is not None:
            name = "range" if d.spread_label == "R" else "standard deviation"
            spread_svg = charts.to_svg(
                charts.control_chart(
                    d.spreads,
                    spread.centre,
                    spread.ucl,
                    spread.lcl,
                    [],
                    title=f"{d.spread_label} chart: each subgroup's {name} (same subgroups)",
                    unit=d.unit,
                    height=260,
                    fmt=fmt,
                )
            )
    if d.readings and d.attribute is None:
        hist_svg = charts.to_svg(
            charts.capability_histogram(
                d.readings,
                d.window.get("min"),
                d.window.get("max"),
                target=d.window.get("target"),
                title=f"{d.row.quantity} readings against the each-reading window",
                unit=d.unit,
            )
        )
    return {
        "d": d,
        "chart_svg": chart_svg,
        "spread_svg": spread_svg,
        "hist_svg": hist_svg,
        "limits_text": (
            {k: fmt(getattr(d.limits, k)) for k in ("centre", "ucl", "lcl")} if d.limits else {}
        ),
        "window_words": describe_window(d.window) if d.window else "",
        "may_set_limits": "quality_engineer" in scope.roles and scope.person is not None,
        "rule_sets": list(limits.RULESET_NAMES.items()),
        "rules_name": limits.RULESET_NAMES.get(d.rules, d.rules),
        "entered": {},
    }


@require_GET
@reader
def spc_page(request: HttpRequest, scope: Scope, key: str) -> HttpResponse:
    return render(request, "quality/spc_series.html", _spc_context(scope, key))


def _site_day(raw: str, label: str, *, end: bool) -> dt.datetime:
    """A date field as the start (or end) of that day in the site's time zone."""
    try:
        day = dt.date.fromisoformat((raw or "").strip())
    except ValueError:
        raise InvalidInput(
            f"{label} must be a date like 2024-03-01; got {raw!r}." if raw else f"Give {label}."
        ) from None
    tz = ZoneInfo(getattr(settings, "SITE_TIME_ZONE", "UTC") or "UTC")
    moment = dt.datetime.combine(day, dt.time.max if end else dt.time.min)
    return moment.replace(tzinfo=tz)


@require_POST
@reader
def spc_limits(request: HttpRequest, scope: Scope, key: str) -> HttpResponse:
    """Fix the limits by hand, recompute them from a baseline window, or choose the run
    rules (quality engineer)."""
    action = request.POST.get("action", "")
    try:
        series = records.access_series(scope, key)
        if action == "fix":
            limits.fix_limits(
                scope.actor,
                series.pk,
                centre=parsing.finite_number(request.POST.get("centre", ""), "Centre line"),
                ucl=parsing.finite_number(request.POST.get("ucl", ""), "UCL"),
                lcl=parsing.finite_number(request.POST.get("lcl", ""), "LCL"),
            )
            messages.success(request, "Control limits fixed; the change is in the audit trail.")
        elif action == "recompute":
            limits.recompute_limits(
                scope.actor,
                series.pk,
                _site_day(request.POST.get("start", ""), "the baseline's first day", end=False),
                _site_day(request.POST.get("end", ""), "the baseline's last day", end=True),
            )
            messages.success(
                request, "Control limits recomputed from the baseline; the change is audited."
            )
        elif action == "rules":
            limits.set_series_rules(scope.actor, series.pk, request.POST.get("rules", ""))
            messages.success(request, "Run rules changed; the change is in the audit trail.")
        else:
            raise InvalidInput(f"Unknown action {action!r}; use fix, recompute or rules.")
    except DomainError as exc:
        if exc.status == 404 or (exc.status == 403 and "quality_engineer" not in scope.roles):
            return refusal(request, exc)  # no such series, or the wrong role: say why
        try:
            ctx = _spc_context(scope, key)
        except DomainError:
            return refusal(request, exc)
        ctx.update(
            limits_error=exc.detail,
            limits_action=action,
            entered={k: request.POST.get(k, "") for k in ("centre", "ucl", "lcl", "start", "end")},
        )
        return render(request, "quality/spc_series.html", ctx, status=exc.status)
    return redirect(reverse("quality:spc_series", args=[key]))


# --- nonconformances ------------------------------------------------------------------


def _rework_lines(text: str) -> list[dict[str, Any]] | None:
    """'Name' or 'Name | WORK-CENTER-CODE' per line; None (the default step) when empty."""
    steps: list[dict[str, Any]] = []
    for line in (text or "").splitlines():
        if not line.strip():
            continue
        name, _, wc = line.partition("|")
        step: dict[str, Any] = {"name": name.strip()}
        if wc.strip():
            step["work_center"] = wc.strip()
        steps.append(step)
    return steps or None


def _panel_ids(raw: list[str]) -> list[Any]:
    # Non-numbers are passed on as they are, so the service names them in its refusal.
    return [int(v) if v.strip().isdigit() else v for v in raw]


def _ncr_context(scope: Scope, number: str) -> dict[str, Any]:

    ncr = records.access_ncr(scope, number)
    held = ncr.lot_step
    default_route = dispositions.default_rework(held) if held else []
    route_rows = max(len(default_route) + 2, 4)
    return {
        "ncr": ncr,
        "readings": list(
            ncr.readings.select_related("operator", "equipment", "lot_step").order_by(
                "recorded_at", "pk"
            )
        ),
        "holds": list(ncr.holds.order_by("opened_at")),
        "panels": list(ncr.lot.panels.filter(scrapped=False).order_by("serial")),
        "panel_rows": [(p, "") for p in ncr.lot.panels.filter(scrapped=False).order_by("serial")],
        "panel_choices": PANEL_CHOICES,
        "rework_steps": list(ncr.rework_steps.select_related("work_center").order_by("position")),
        "rework_library": dispositions.rework_choices(held) if held else [],
        "default_route": default_route,
        "route_slots": [
            default_route[i] if i < len(default_route) else "" for i in range(route_rows)
        ],
        "scrap_reasons": list(ScrapReason.objects.filter(active=True)),
        "root_causes": list(RootCause.objects.filter(active=True)),
        "panel_actions": sorted((ncr.panel_actions or {}).items()),
        "may_disposition": "quality_engineer" in scope.roles,
        "signer": scope.person.printed_name if scope.person else "",
        "entered": {},
    }


PANEL_CHOICES = [("use_as_is", "Use as is"), ("rework", "Rework"), ("scrap", "Scrap")]


def _disposition_input(request: HttpRequest) -> dict[str, Any]:
    """The form as the service's arguments: per-panel actions when any panel has one,
    else the older whole-lot choice (scrap some = the ticked panels)."""
    post = request.POST
    panel_actions = {
        key.removeprefix("action-"): value
        for key, value in post.items()
        if key.startswith("action-") and value
    }
    route = [c.strip() for c in post.getlist("rework_route") if c.strip()]
    common: dict[str, Any] = {
        "root_cause": post.get("root_cause", ""),
        "corrective_action": post.get("corrective_action", ""),
        "scrap_reason": post.get("scrap_reason", ""),
    }
    choice = post.get("disposition", "")
    if choice == "recording_error":
        # Offered when a correction brought the set back inside: every panel stays.
        marked = sorted(k for k, v in panel_actions.items() if v != "use_as_is")
        if marked or post.getlist("panels") or route:
            raise InvalidInput(
                "A recording error keeps every panel as it is, so it takes no rework or "
                f"scrap{' (marked: ' + ', '.join(marked) + ')' if marked else ''}. Clear "
                "those, or choose 'Decide per panel'."
            )
        return {**common, "disposition": "recording_error", "scrap_reason": ""}
    if choice == "per_panel":
        choice = ""
    if panel_actions:
        return {
            **common,
            "disposition": "",
            "panel_actions": panel_actions,
            "rework_route": route if "rework" in panel_actions.values() and route else None,
        }
    ticked = post.getlist("panels")
    if ticked and choice not in ("scrap_some", "scrap_all"):
        raise InvalidInput(
            "Panels are ticked, but the decision is not a scrap: say per panel what happens "
            "to it (nothing ticked is dropped)."
        )
    return {
        **common,
        "disposition": "scrap" if choice in ("scrap_all", "scrap_some") else choice,
        "scrap_panel_ids": _panel_ids(ticked) if choice == "scrap_some" else None,
        "rework_steps": _rework_lines(post.get("rework_steps", "")) if choice == "rework" else None,
        "rework_route": route if choice == "rework" and route else None,
    }


@require_http_methods(["GET", "POST"])
@reader
def ncr_page(request: HttpRequest, scope: Scope, number: str) -> HttpResponse:
    """An NCR with its evidence; for an open one, the disposition form (quality engineer)."""
    if request.method == "GET":
        return render(request, "quality/ncr.html", _ncr_context(scope, number))
    ncr = records.access_ncr(scope, number)
    try:
        args = _disposition_input(request)
        disposition = args.pop("disposition")
        dispositions.disposition_ncr(
            scope.actor,
            ncr.pk,
            disposition,
            request.POST.get("note", ""),
            request.POST.get("pin", ""),
            **args,
        )
    except DomainError as exc:
        if exc.status == 403 and "quality_engineer" not in scope.roles:
            return refusal(request, exc)  # wrong role: the 403 page says why
        ctx = _ncr_context(scope, number)
        entered_actions = {
            k.removeprefix("action-"): v for k, v in request.POST.items() if k.startswith("action-")
        }
        ctx.update(
            error=exc.detail,
            problems=exc.problems,
            entered={
                "disposition": request.POST.get("disposition", ""),
                "note": request.POST.get("note", ""),
                "rework_steps": request.POST.get("rework_steps", ""),
                "panels": set(request.POST.getlist("panels")),
                "actions": entered_actions,
                "root_cause": request.POST.get("root_cause", ""),
                "corrective_action": request.POST.get("corrective_action", ""),
                "scrap_reason": request.POST.get("scrap_reason", ""),
            },
        )
        ctx["panel_rows"] = [(p, entered_actions.get(p.serial, "")) for p in ctx["panels"]]
        route = list(request.POST.getlist("rework_route"))
        if route:
            ctx["route_slots"] = route + [""] * max(0, 4 - len(route))
        return render(request, "quality/ncr.html", ctx, status=exc.status)
    messages.success(request, f"{ncr.number} dispositioned and signed; the hold is released.")
    return redirect(reverse("quality:ncr", args=[ncr.number]))
