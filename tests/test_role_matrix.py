"""ONE table: every API endpoint and page × every kind of caller -> allowed or refused.

"Allowed" means the request got past authentication and authorisation (any reply but
401, 403, or a redirect to the login page); a 400/404/409 from the use case still counts
as allowed. The hard rule checked for every row is zero unexpected allows; for the rows
this module's owners know, unexpected refusals fail too.

Rows for pages of other areas state only what every page must do (anonymous callers and
instrument tokens never get in); their owners replace the `None` cells (don't care yet)
with their decisions. A row whose URL does not resolve yet is skipped, so rows can be
added before the page exists. Source for the rules: shopfloor/floor/permissions.py and
the routing services (process engineers release; common practice for controlled
documents is that only the owning function releases them).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from django.test import Client
from django.urls import Resolver404, resolve
from django.utils import timezone
from rest_framework.test import APIClient

from shopfloor.plant.models import Qualification, Role
from tests.api.helpers import advance_to, issue_token
from tests.factories import PIN, make_person

pytestmark = pytest.mark.django_db

CALLERS = (
    "operator",
    "supervisor",
    "process_engineer",
    "quality_engineer",
    "admin",
    "instrument",
    "anonymous",
    "other_operator",
)
A, D, X = True, False, None  # allow, deny, don't care (yet)


@dataclass(frozen=True)
class Row:
    method: str
    url: Callable[[dict[str, Any]], str]
    expect: tuple[bool | None, ...]  # in CALLERS order
    body: Callable[[dict[str, Any]], dict[str, Any]] | None = None
    api: bool = True
    owned: bool = True  # False: another area's page; only unexpected allows fail


def _reading(ctx):
    # The first allowed caller records sample 1; later allowed callers get 409 (still allowed).
    return {
        "lot": ctx["lot"].code,
        "quantity": "hole_wall_copper",
        "value": 22,
        "unit": "um",
        "sample_index": 1,
    }


ROWS: dict[str, Row] = {
    # --- API ---------------------------------------------------- op sup pe qe adm ins ano oth
    "GET lot status": Row(
        "GET", lambda c: f"/api/v1/lots/{c['lot'].code}/", (A, A, A, A, A, D, D, A)
    ),
    "GET lot windows": Row(
        "GET", lambda c: f"/api/v1/lots/{c['lot'].code}/windows/", (A, A, A, A, A, D, D, A)
    ),
    "POST routing preview": Row(
        "POST",
        lambda c: "/api/v1/routing/preview/",
        (A, A, A, A, A, D, D, A),
        body=lambda c: c["spec"],
    ),
    "POST reading": Row(
        "POST", lambda c: "/api/v1/readings/", (A, A, D, D, A, A, D, D), body=_reading
    ),
    "POST reading correction": Row(
        "POST",
        lambda c: f"/api/v1/readings/{c['reading'].pk}/correct/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"value": 23, "unit": "um", "reason": "re-measured"},
    ),
    "POST step pause": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/pause/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {},
    ),
    "POST step start": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/start/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {},
    ),
    "POST step complete": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/complete/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"pin": PIN},
    ),
    # --- engineering pages -------------------------------------- op sup pe qe adm ins ano oth
    "GET engineering index": Row(
        "GET", lambda c: "/engineering/", (A, A, A, A, A, D, D, A), api=False
    ),
    "GET engineering preview": Row(
        "GET", lambda c: "/engineering/preview/", (A, A, A, A, A, D, D, A), api=False
    ),
    "POST engineering preview": Row(
        "POST",
        lambda c: "/engineering/preview/",
        (A, A, A, A, A, D, D, A),
        api=False,
        body=lambda c: {"spec": "{}"},
    ),
    "GET routing revision": Row(
        "GET",
        lambda c: f"/engineering/revisions/{c['routing'].pk}/",
        (A, A, A, A, A, D, D, A),
        api=False,
    ),
    "POST create draft": Row(
        "POST",
        lambda c: f"/engineering/part-revisions/{c['routing'].part_revision_id}/draft/",
        (D, D, A, D, A, D, D, D),
        api=False,
        body=lambda c: {"reason": "matrix"},
    ),
    "POST release": Row(
        "POST",
        lambda c: f"/engineering/revisions/{c['routing'].pk}/release/",
        (D, D, A, D, A, D, D, D),
        api=False,
        body=lambda c: {"pin": PIN},
    ),
    # --- other areas (owners fill in the X cells) -------------- op sup pe qe adm ins ano oth
    "GET floor work centers": Row(
        "GET", lambda c: "/floor/", (X, X, X, X, X, D, D, X), api=False, owned=False
    ),
    "GET floor lot page": Row(
        "GET",
        lambda c: f"/floor/lots/{c['lot'].code}/",
        (X, X, X, X, X, D, D, X),
        api=False,
        owned=False,
    ),
    "GET board": Row("GET", lambda c: "/board/", (X, X, X, X, X, D, D, X), api=False, owned=False),
    "GET quality overview": Row(
        "GET", lambda c: "/quality/", (X, X, X, X, X, D, D, X), api=False, owned=False
    ),
    "GET quality lot": Row(
        "GET",
        lambda c: f"/quality/lots/{c['lot'].code}/",
        (X, X, X, X, X, D, D, X),
        api=False,
        owned=False,
    ),
    "GET quality SPC": Row(
        "GET", lambda c: "/quality/spc/", (X, X, X, X, X, D, D, X), api=False, owned=False
    ),
}


@pytest.fixture
def world(floor):
    from shopfloor.floor import services

    personas = floor.personas
    step = advance_to(floor.lot, "pattern_plate_copper", personas["operator"])
    admin = make_person(Role.ADMIN, "1006", "Ada Admin")
    for wc in floor.work_centers.values():
        Qualification.objects.create(
            person=admin, work_center=wc, valid_until=timezone.localdate() + dt.timedelta(days=30)
        )
    elsewhere = [wc for wc in floor.work_centers.values() if wc.pk != step.work_center_id]
    other = make_person(Role.OPERATOR, "1007", "Noor Elsewhere", work_centers=elsewhere)
    reading = services.record_reading(
        person=personas["operator"],
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="surface_copper", value=40, unit="um"),
    )
    from tests.factories import SPEC_4L_ENIG

    people = {**personas, "admin": admin, "other_operator": other}
    return {
        "lot": floor.lot,
        "step": step,
        "reading": reading,
        "routing": floor.routing,
        "spec": SPEC_4L_ENIG,
        "people": people,
        "token": issue_token("matrix-gauge", step.work_center.code),
    }


def _client(caller: str, ctx: dict[str, Any], api: bool) -> Client:
    client: Client = APIClient() if api else Client()
    if caller == "instrument":
        client.defaults["HTTP_AUTHORIZATION"] = f"Token {ctx['token']}"
    elif caller != "anonymous":
        client.force_login(ctx["people"][caller].user)
    return client


def _allowed(reply: Any) -> bool:
    if reply.status_code in (401, 403):
        return False
    if reply.status_code == 302 and "/floor/login/" in reply.get("Location", ""):
        return False
    return True


def test_role_matrix(world):
    unexpected_allows: list[str] = []
    unexpected_denies: list[str] = []
    checked = 0
    for label, row in ROWS.items():
        url = row.url(world)
        try:
            resolve(url.split("?")[0])
        except Resolver404:
            continue  # page not built yet
        for caller, expected in zip(CALLERS, row.expect, strict=True):
            client = _client(caller, world, row.api)
            body = row.body(world) if row.body else None
            if row.method == "GET":
                reply = client.get(url)
            elif row.api:
                reply = client.post(url, body, format="json")
            else:
                reply = client.post(url, body or {})
            assert reply.status_code < 500, f"{label} as {caller}: {reply.status_code}"
            got = _allowed(reply)
            checked += 1
            if got and expected is False:
                unexpected_allows.append(f"{label} as {caller} -> {reply.status_code}")
            if not got and expected is True and row.owned:
                unexpected_denies.append(f"{label} as {caller} -> {reply.status_code}")
    assert checked >= 14 * len(CALLERS)
    assert unexpected_allows == []
    assert unexpected_denies == []
