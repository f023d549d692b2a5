"""What every HTML page shares: the refusal page and the signed-in reader decorator.

A use case refuses with a DomainError (shopfloor.errors); a page turns it into the one
refusal page here: 403 and 404 get their own templates, anything else (400, 409, ...)
`quality/refusal.html`, each saying what was wrong and listing the problems. A page that
shows lots is wrapped in `reader`: sign-in is required, the reader's scope
(shopfloor.access) is passed in, and a DomainError becomes the refusal page.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import wraps
from typing import Any

from django.contrib.auth.views import redirect_to_login
from django.http import HttpRequest, HttpResponse
from django.http.response import HttpResponseBase
from django.shortcuts import render

from shopfloor.access import scope_for
from shopfloor.errors import DomainError

View = Callable[..., HttpResponseBase]


def refusal(request: HttpRequest, exc: DomainError) -> HttpResponse:
    """The refusal page for a DomainError, with its status."""
    template = {403: "403.html", 404: "404.html"}.get(exc.status, "quality/refusal.html")
    return render(
        request, template, {"reason": exc.detail, "problems": exc.problems}, status=exc.status
    )


def reader(view: View) -> View:
    """Sign-in required; the reader's scope is passed in; domain errors become pages."""

    @wraps(view)
    def wrapped(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponseBase:
        if not request.user.is_authenticated:
            return redirect_to_login(request.get_full_path())
        try:
            return view(request, scope_for(request.user), *args, **kwargs)
        except DomainError as exc:
            return refusal(request, exc)

    return wrapped
