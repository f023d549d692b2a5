"""Board and quality pages: thin views that parse input, call one read or service, render.

Every refusal is a DomainError turned into a page (or JSON) with its status and message:
403 says why, 404 says what was not found, 400 says what was wrong and what is allowed.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import wraps
from typing import Any

from django.contrib.auth.views import redirect_to_login
from django.http import (
    HttpRequest,
    HttpResponse,
    JsonResponse,
    StreamingHttpResponse,
)
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.http import urlencode
from django.views.decorators.http import require_GET, require_POST

from shopfloor.errors import DomainError, InvalidInput
from shopfloor.quality import board, charts, exports, history
from shopfloor.quality.access import Scope, scope_for

View = Callable[..., HttpResponse]


def _refusal(request: HttpRequest, exc: DomainError) -> HttpResponse:
    template = {403: "403.html", 404: "404.html"}.get(exc.status, "quality/refusal.html")
    return render(
        request, template, {"reason": exc.detail, "problems": exc.problems}, status=exc.status
    )


def reader(view: Callable[..., HttpResponse]) -> View:
    """Sign-in required; the reader's scope is passed in; domain errors become pages."""

    @wraps(view)
    def wrapped(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponse:
        if not request.user.is_authenticated:
            return redirect_to_login(request.get_full_path())
        try:
            return view(request, scope_for(request.user), *args, **kwargs)
        except DomainError as exc:
            return _refusal(request, exc)

    return wrapped


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


def _int(value: Any) -> int | None:
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


@require_POST
@reader
def queue_move(request: HttpRequest, scope: Scope, work_center_id: int) -> HttpResponse:
    step_id = _int(request.POST.get("lot_step"))
    if step_id is None:
        return _refusal(request, InvalidInput("Pick a lot to move (lot_step is missing)."))
    board.move_in_queue(scope.person, work_center_id, step_id, request.POST.get("move", ""))
    return redirect(reverse("quality:board") + _back_query(request))


@require_POST
@reader
def queue_release(request: HttpRequest, scope: Scope, lot_step_id: int) -> HttpResponse:
    board.release_queue_warning(scope.person, lot_step_id, request.POST.get("reason", ""))
    return redirect(reverse("quality:board") + _back_query(request))


def _back_query(request: HttpRequest) -> str:
    query = request.POST.get("back", "")
    return f"?{query}" if query and "\n" not in query and not query.startswith("/") else ""


# --- quality pages --------------------------------------------------------------------


@require_GET
@reader
def overview(request: HttpRequest, scope: Scope) -> HttpResponse:
    return render(request, "quality/overview.html", {"data": history.overview(scope)})


@require_GET
@reader
def lot_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    h = history.lot_history(scope, code, full_readings=False)
    return render(request, "quality/lot.html", {"h": h, "summary": exports.reading_summary(h)})


@require_GET
@reader
def lot_history_json(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    return JsonResponse(history.history_dict(history.lot_history(scope, code)))


@require_GET
@reader
def lot_csv(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    lot = history.find_lot_for(scope, code)
    response = StreamingHttpResponse(exports.stream_lot_csv(lot), content_type="text/csv")
    response["Content-Disposition"] = f'attachment; filename="lot-{lot.code}.csv"'
    return response


@require_GET
@reader
def lot_pdf(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    certificate = request.GET.get("kind") == "certificate"
    h = history.lot_history(scope, code)
    response = HttpResponse(
        exports.lot_record_pdf(h, certificate=certificate), content_type="application/pdf"
    )
    name = "certificate" if certificate else "record"
    response["Content-Disposition"] = f'inline; filename="lot-{h.lot.code}-{name}.pdf"'
    return response


@require_GET
@reader
def job_page(request: HttpRequest, scope: Scope, number: str) -> HttpResponse:
    return render(request, "quality/job.html", {"g": history.job_genealogy(scope, number)})


@require_GET
@reader
def panel_page(request: HttpRequest, scope: Scope, serial: str) -> HttpResponse:
    return render(request, "quality/panel.html", {"panel": history.panel_genealogy(scope, serial)})


@require_GET
@reader
def material_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    return render(request, "quality/material.html", {"r": history.material_recall(scope, code)})


@require_GET
@reader
def search_page(request: HttpRequest, scope: Scope) -> HttpResponse:
    try:
        result = history.search(scope, request.GET) if request.GET else None
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
    return render(request, "quality/spc_list.html", {"series": history.spc_series(scope)})


@require_GET
@reader
def spc_page(request: HttpRequest, scope: Scope, key: str) -> HttpResponse:
    d = history.spc_detail(scope, key)
    chart_svg = hist_svg = ""
    if d.limits is not None:
        chart_svg = charts.to_svg(
            charts.control_chart(
                d.values,
                d.limits.centre,
                d.limits.ucl,
                d.limits.lcl,
                [(s.index, s.rule) for s in d.signals],
                title=f"{d.row.quantity} at {d.row.work_center} (individuals)",
                unit=d.unit,
            )
        )
    if d.values:
        hist_svg = charts.to_svg(
            charts.capability_histogram(
                d.values,
                d.window.get("min"),
                d.window.get("max"),
                target=d.window.get("target"),
                title=f"{d.row.quantity} against its window",
                unit=d.unit,
            )
        )
    return render(
        request, "quality/spc_series.html", {"d": d, "chart_svg": chart_svg, "hist_svg": hist_svg}
    )
