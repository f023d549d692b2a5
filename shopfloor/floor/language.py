"""The person's language on the tablet pages and the traveller.

`Person.language` (set in the admin, or by the person on the tablet's language page)
decides; before login, or for a person with no choice, the browser's Accept-Language
picks among the shipped languages, else the site's LANGUAGE_CODE. Only /floor/ pages are
switched: the desk pages (board, quality, engineering) are not translated yet, and their
numbers must keep the decimal point their charts and forms expect.
"""

from __future__ import annotations

from collections.abc import Callable

from django.conf import settings
from django.http import HttpRequest, HttpResponse
from django.utils import translation
from django.utils.cache import patch_vary_headers

TRANSLATED_PREFIXES = ("/floor/",)


def person_language(request: HttpRequest) -> str:
    """The language to render `request` in (one of settings.LANGUAGES)."""
    user = getattr(request, "user", None)
    if user is not None and user.is_authenticated:
        person = getattr(user, "person", None)
        chosen = getattr(person, "language", "") if person is not None else ""
        if chosen and chosen in dict(settings.LANGUAGES):
            return str(chosen)
    return translation.get_language_from_request(request, check_path=False)


class PersonLanguageMiddleware:
    """Activates the person's language for tablet pages, the site language elsewhere."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        translated = request.path.startswith(TRANSLATED_PREFIXES)
        language = person_language(request) if translated else settings.LANGUAGE_CODE
        translation.activate(language)
        request.LANGUAGE_CODE = translation.get_language()  # type: ignore[attr-defined]
        try:
            response = self.get_response(request)
        finally:
            # Back to the site language: work done later on this thread (an eager task,
            # the next request's early middleware) must not speak this person's language.
            translation.activate(settings.LANGUAGE_CODE)
        if translated:
            patch_vary_headers(response, ("Accept-Language",))
            response.headers.setdefault("Content-Language", language)
        return response
