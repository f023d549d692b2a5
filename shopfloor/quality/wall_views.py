"""The wall board's pages (thin: parse the URL, build the wall, render)."""

from __future__ import annotations

from typing import Any

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils.http import urlencode
from django.views.decorators.http import require_GET

from shopfloor.access import Scope
from shopfloor.errors import DomainError
from shopfloor.pages import reader
from shopfloor.quality.read import board, wall


def _wall_context(request: HttpRequest, scope: Scope) -> dict[str, Any]:
    error = ""
    try:
        filters = board.parse_filters(request.GET)
        options = wall.parse_wall_options(request.GET)
    except DomainError as exc:
        error, filters, options = exc.detail, board.BoardFilters(), wall.WallOptions()
    data = wall.build_wall(scope, filters, options)
    query = urlencode({**filters.as_query(), **options.as_query()})
    return {"wall": data, "board": data.board, "query": query, "error": error}


@require_GET
@reader
def wall_page(request: HttpRequest, scope: Scope) -> HttpResponse:
    ctx = _wall_context(request, scope)
    return render(request, "board/wall.html", ctx, status=400 if ctx["error"] else 200)


@require_GET
@reader
def wall_body(request: HttpRequest, scope: Scope) -> HttpResponse:
    """The wall's body alone, polled by htmx with the same URL parameters."""
    ctx = _wall_context(request, scope)
    return render(request, "board/wall.html#wall_body", ctx, status=400 if ctx["error"] else 200)
