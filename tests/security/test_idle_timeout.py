"""A tablet session idle past settings.SESSION_IDLE_TIMEOUT_SECONDS is logged out.

Idle timeouts for shared terminals: OWASP Session Management Cheat Sheet ("idle
timeout"; 15-30 minutes is its suggested range for low-risk applications, from memory).
Time is moved with time_machine, so nothing sleeps.
"""

from __future__ import annotations

import datetime as dt

import pytest
import time_machine
from django.conf import settings
from django.test import Client

pytestmark = pytest.mark.django_db

START = dt.datetime(2030, 3, 4, 6, 0, tzinfo=dt.UTC)
PAGE = "/floor/"


@pytest.fixture
def clock():
    with time_machine.travel(START, tick=False) as traveller:
        yield traveller


@pytest.fixture
def tablet(personas, clock) -> Client:
    # Logged in at START, so the session's own expiry date is measured from then.
    client = Client()
    client.force_login(personas["operator"].user)
    return client


def _limit() -> dt.timedelta:
    return dt.timedelta(seconds=settings.SESSION_IDLE_TIMEOUT_SECONDS)


def test_activity_within_the_limit_keeps_the_session(clock, tablet):
    assert tablet.get(PAGE).status_code == 200
    # Three gaps just under the limit: well past it in total, never idle too long.
    for _ in range(3):
        clock.shift(_limit() - dt.timedelta(seconds=5))
        assert tablet.get(PAGE).status_code == 200
    assert "_auth_user_id" in tablet.session


def test_idle_past_the_limit_logs_out_and_asks_for_the_badge_again(clock, tablet):
    assert tablet.get(PAGE).status_code == 200
    clock.shift(_limit() + dt.timedelta(seconds=1))
    reply = tablet.get(PAGE)
    assert reply.status_code == 302
    assert reply["Location"].startswith("/floor/login/?")
    assert "idle=1" in reply["Location"]
    assert "_auth_user_id" not in tablet.session
    login_page = tablet.get(reply["Location"])
    assert login_page.status_code == 200
    assert b"logged out after a quiet spell" in login_page.content
    # Still logged out on the next request, not just for that one.
    again = tablet.get(PAGE)
    assert again.status_code == 302 and again["Location"].startswith("/floor/login/")


def test_idle_htmx_request_redirects_the_whole_page(clock, tablet):
    tablet.get(PAGE)
    clock.shift(_limit() + dt.timedelta(seconds=1))
    reply = tablet.get(PAGE, headers={"HX-Request": "true"})
    assert reply.status_code == 204
    assert reply["HX-Redirect"].startswith("/floor/login/?")


def test_idle_session_on_the_api_gets_401_json(clock, tablet, floor):
    assert tablet.get(PAGE).status_code == 200
    clock.shift(_limit() + dt.timedelta(seconds=1))
    reply = tablet.get(f"/api/v1/lots/{floor.lot.code}/")
    assert reply.status_code == 401
    assert reply.json()["error"] == "not_authenticated"
