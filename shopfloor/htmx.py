"""Whether a request came from htmx (the HX-Request header django-htmx also reads)."""

from __future__ import annotations

from django.http import HttpRequest


def is_htmx(request: HttpRequest) -> bool:
    """True for a request htmx sent (it sets `HX-Request: true` on every one)."""
    return request.headers.get("HX-Request") == "true"
