"""CSRF: every state-changing request made with a browser session needs the CSRF token.

Django's CsrfViewMiddleware protects every view unless it is marked csrf_exempt; DRF's
APIView is csrf_exempt and relies on SessionAuthentication to enforce the token for
session-authenticated requests. So the routes are enumerated from the URL resolver
(shopfloor.urls), not listed by hand: a new page or API view that opts out of CSRF
checking fails here. Instrument tokens are exempt by design: a token is sent explicitly
in a header, never attached by the browser (OWASP CSRF Prevention Cheat Sheet:
CSRF needs an ambient credential such as a cookie).
"""

from __future__ import annotations

import re
from collections.abc import Iterator

import pytest
from django.test import Client
from django.urls import URLPattern, URLResolver, get_resolver

from tests.helpers import advance_to, issue_token

pytestmark = pytest.mark.django_db

#: Routes left out, each with the reason. Everything else must refuse a token-less POST.
NOT_CHECKED = {
    "admin/": "Django's own admin (CSRF-protected by Django; not our forms)",
}

#: Named routes left out: the API's catch-all JSON 404 changes nothing and reads nothing.
NOT_CHECKED_NAMES = {"api-not-found"}

_CONVERTER = re.compile(r"<(?:(?P<conv>\w+):)?(?P<name>\w+)>")


def _sample(match: re.Match[str]) -> str:
    return "1" if match.group("conv") == "int" else "X1"


def _routes(patterns: list, prefix: str = "") -> Iterator[str]:
    for entry in patterns:
        route = str(entry.pattern)
        if isinstance(entry, URLResolver):
            if prefix + route in NOT_CHECKED:
                continue
            yield from _routes(entry.url_patterns, prefix + route)
        elif isinstance(entry, URLPattern):
            if entry.name in NOT_CHECKED_NAMES:
                continue
            yield prefix + route


def _urls() -> list[str]:
    urls = sorted(
        {
            "/" + _CONVERTER.sub(_sample, r).lstrip("^").rstrip("$")
            for r in _routes(get_resolver().url_patterns)
        }
    )
    return urls


def _is_csrf_refusal(reply) -> bool:
    # Django's csrf_failure page and DRF's "CSRF Failed: ..." both name CSRF.
    return reply.status_code == 403 and b"CSRF" in reply.content


@pytest.fixture
def session_client(personas) -> Client:
    client = Client(enforce_csrf_checks=True)
    client.force_login(personas["supervisor"].user)
    return client


def test_the_route_list_covers_pages_forms_and_api():
    urls = _urls()
    # The enumeration itself must find the forms and API views this service has.
    for expected in (
        "/floor/login/",
        "/floor/steps/1/readings/",
        "/api/v1/readings/",
        "/engineering/revisions/1/release/",
    ):
        assert expected in urls, (expected, urls)
    # Django's admin is left out, except our throttled admin login, which is checked here.
    assert "/admin/login/" in urls
    assert not any(u.startswith("/admin/") and u != "/admin/login/" for u in urls)


def test_every_route_refuses_a_session_post_without_csrf_token(session_client):
    not_refused = {}
    for url in _urls():
        for body in (
            {"content_type": "application/x-www-form-urlencoded"},
            {"content_type": "application/json"},
        ):
            reply = session_client.post(
                url, data="" if "x-www" in body["content_type"] else "{}", **body
            )
            # A 415 is a refusal too: an upload-only endpoint cannot parse a JSON body, and
            # DRF's CSRF check reads the body to look for the token, so it stops there.
            if not _is_csrf_refusal(reply) and reply.status_code != 415:
                not_refused[f"{url} ({body['content_type']})"] = reply.status_code
    assert not not_refused, f"accepted without a CSRF token: {not_refused}"


def test_anonymous_login_form_needs_the_token_too(floor):
    client = Client(enforce_csrf_checks=True)
    reply = client.post("/floor/login/", {"badge": "1001", "pin": "4321"})
    assert _is_csrf_refusal(reply)
    assert "_auth_user_id" not in client.session


def test_with_the_token_the_same_requests_get_through_csrf(floor):
    """Control: the refusal above is about the token, not about the route or the role."""
    client = Client(enforce_csrf_checks=True)
    client.get("/floor/login/")
    token = client.cookies["csrftoken"].value
    reply = client.post(
        "/floor/login/", {"badge": "1001", "pin": "4321", "csrfmiddlewaretoken": token}
    )
    assert reply.status_code == 302, reply.content[:500]
    assert "_auth_user_id" in client.session

    # A session-authenticated API POST with the header passes CSRF and reaches the service.
    step = advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    token = client.cookies["csrftoken"].value
    body = {
        "lot": floor.lot.code,
        "quantity": "hole_wall_copper",
        "value": 25,
        "unit": "um",
        "sample_index": 1,
    }
    refused = client.post("/api/v1/readings/", body, content_type="application/json")
    assert _is_csrf_refusal(refused)
    accepted = client.post(
        "/api/v1/readings/", body, content_type="application/json", headers={"X-CSRFToken": token}
    )
    assert accepted.status_code == 201, accepted.content[:500]
    assert accepted.json()["step"] == step.pk


def test_instrument_token_posts_need_no_csrf_token(floor):
    step = advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    raw = issue_token("csrf-gauge", step.work_center.code)
    client = Client(enforce_csrf_checks=True)
    reply = client.post(
        "/api/v1/readings/",
        {
            "lot": floor.lot.code,
            "quantity": "hole_wall_copper",
            "value": 25,
            "unit": "um",
            "sample_index": 1,
        },
        content_type="application/json",
        headers={"Authorization": f"Token {raw}"},
    )
    assert reply.status_code == 201, reply.content[:500]
    assert reply.json()["via"] == "instrument"
