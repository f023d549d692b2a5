"""Input that never reaches a view: NUL characters in the URL, query or form fields.

PostgreSQL refuses NUL (0x00) in text, so a code like /floor/lots/%00/ or a badge with a
NUL used to end in a 500 wherever the text met a query. `RejectNulMiddleware` answers such
a request with a 400 in the usual shape (JSON under /api/, a page elsewhere) before any
view runs. JSON bodies are checked by the API's parser (shopfloor.api_parsers).
"""

from __future__ import annotations

from collections.abc import Callable

from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import render

FORM_TYPES = ("application/x-www-form-urlencoded", "multipart/form-data")
MESSAGE = (
    "The request holds a NUL character (0x00) in {where}. Codes, names and notes are "
    "printable text; scan or type the value again."
)


def _nul_in(pairs: object) -> bool:
    items = pairs.lists() if hasattr(pairs, "lists") else []  # QueryDict
    return any("\x00" in k or any("\x00" in str(v) for v in vs) for k, vs in items)


def bad_request(request: HttpRequest, detail: str) -> HttpResponse:
    if request.path.startswith("/api/") or "json" in request.headers.get("Accept", ""):
        return JsonResponse({"error": "invalid", "detail": detail}, status=400)
    return render(request, "400.html", {"reason": detail}, status=400)


class RejectNulMiddleware:
    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        where = ""
        if "\x00" in request.path:
            where = "the address"
        elif _nul_in(request.GET) and not request.path.startswith("/api/"):
            # API views that read their query refuse NUL themselves, after the caller's
            # permissions (an instrument asking for jobs gets its 403, not a 400)
            where = "the query"
        elif (
            request.method == "POST"
            and request.content_type in FORM_TYPES
            # API form bodies are checked by its parsers, after the caller's permissions
            and not request.path.startswith("/api/")
        ):
            try:
                if _nul_in(request.POST):
                    where = "a form field"
            except Exception:  # an unreadable form is for the view to refuse
                where = ""
        if where:
            return bad_request(request, MESSAGE.format(where=where))
        return self.get_response(request)
