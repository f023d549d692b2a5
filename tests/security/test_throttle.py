"""Sign-in throttling (issue 14, findings 7 and 8).

OWASP Authentication Cheat Sheet: the same answer (and the same work) for an unknown
account, a wrong secret and a locked account; throttle automated guessing per source and
per account; log and audit lockouts. RFC 6585 section 4: 429 Too Many Requests, with a
Retry-After header saying how long to wait. The counts live in the database (one row per
key), never in process memory, because several gunicorn processes serve one site.
"""

from __future__ import annotations

import datetime as dt
import html
import logging
import re

import pytest
import time_machine
from django.conf import settings
from django.contrib.auth.models import User
from django.test import Client
from django.utils import timezone

from shopfloor.audit.models import AuditEntry
from shopfloor.plant import hashers
from shopfloor.plant.models import LoginThrottle, Person
from tests.factories import PIN

pytestmark = pytest.mark.django_db

URL = "/floor/login/"
WRONG = "0000"
_ERROR = re.compile(r'<p class="error" role="alert">(.*?)</p>', re.S)


def attempt(badge: str, pin: str, ip: str = "10.0.0.1") -> tuple[int, str, str | None]:
    reply = Client(REMOTE_ADDR=ip).post(URL, {"badge": badge, "pin": pin})
    found = _ERROR.search(reply.content.decode())
    message = html.unescape(found.group(1)).strip() if found else ""
    return reply.status_code, message, reply.headers.get("Retry-After")


def test_thirty_fast_failures_from_one_address_are_throttled(personas, caplog):
    caplog.set_level(logging.WARNING, logger="shopfloor.throttle")
    statuses = [attempt(f"5{i:04d}", WRONG)[0] for i in range(30)]  # 30 different badges
    limit = settings.LOGIN_FAILURES_PER_IP
    assert statuses[:limit] == [400] * limit
    assert set(statuses[limit:]) == {429}
    status, message, retry_after = attempt("59999", WRONG)
    assert status == 429 and "Wait" in message
    assert retry_after is not None and 0 < int(retry_after) <= settings.LOGIN_BLOCK_SECONDS
    # Even the right PIN of a real badge waits while the address is blocked.
    assert attempt(personas["operator"].badge_number, PIN)[0] == 429
    # Logged and audited once, when the block started; the state is a database row.
    assert any("ip:10.0.0.1 blocked" in r.getMessage() for r in caplog.records)
    assert AuditEntry.objects.filter(action="login.blocked", object_id="ip:10.0.0.1").count() == 1
    assert LoginThrottle.objects.get(key="ip:10.0.0.1").blocked_until > timezone.now()
    # Another address is not affected.
    assert attempt(personas["operator"].badge_number, PIN, ip="10.0.0.2")[0] == 302


def test_one_badge_is_throttled_across_addresses(personas):
    badge = "77777"  # unknown: throttled exactly like a real one
    limit = settings.LOGIN_FAILURES_PER_BADGE
    for i in range(limit):
        assert attempt(badge, WRONG, ip=f"10.1.0.{i}")[0] == 400
    status, _, retry_after = attempt(badge, WRONG, ip="10.1.1.1")
    assert status == 429 and retry_after
    with time_machine.travel(
        timezone.now() + dt.timedelta(seconds=settings.LOGIN_BLOCK_SECONDS + 1), tick=False
    ):
        assert attempt(badge, WRONG, ip="10.1.1.2")[0] == 400  # the block ends


def test_unknown_wrong_and_locked_badges_answer_alike(personas):
    operator, other = personas["operator"], personas["supervisor"]
    Person.objects.filter(pk=other.pk).update(locked_at=timezone.now(), pin_failures=5)
    unknown = attempt("77777", WRONG, ip="10.2.0.1")
    wrong = attempt(operator.badge_number, WRONG, ip="10.2.0.2")
    locked = attempt(other.badge_number, PIN, ip="10.2.0.3")  # right PIN, locked badge
    assert unknown == wrong == locked
    assert unknown[0] == 400 and "locked" in unknown[1]


def test_unknown_wrong_and_locked_badges_do_the_same_hashing_work(personas, monkeypatch):
    calls: list[str] = []
    original = hashers.PinHasher.verify

    def counting(self, password, encoded):
        calls.append(password)
        return original(self, password, encoded)

    monkeypatch.setattr(hashers.PinHasher, "verify", counting)
    other = personas["supervisor"]
    Person.objects.filter(pk=other.pk).update(locked_at=timezone.now())
    counts = []
    for badge, ip in [
        ("77777", "10.3.0.1"),
        (personas["operator"].badge_number, "10.3.0.2"),
        (other.badge_number, "10.3.0.3"),
    ]:
        calls.clear()
        attempt(badge, WRONG, ip=ip)
        counts.append(len(calls))
    assert counts == [1, 1, 1]


@pytest.mark.parametrize("badge", ["20\x0001", "\x00", "1\r\n2", "12\x1b3"])
def test_control_characters_in_the_badge_are_a_400(personas, badge):
    reply = Client(REMOTE_ADDR="10.4.0.1").post(URL, {"badge": badge, "pin": PIN})
    assert reply.status_code == 400
    # NUL is refused before the view (shopfloor.input_guard); other controls by the login.
    text = html.unescape(reply.content.decode())
    assert "NUL character" in text or "control character" in text


# --- the admin login (finding 8) -----------------------------------------------------------


def admin_try(password: str, ip: str = "10.9.0.1") -> Client:
    client = Client(REMOTE_ADDR=ip)
    client.post("/admin/login/", {"username": "chief", "password": password, "next": "/admin/"})
    return client


def test_admin_login_locks_after_wrong_passwords_and_is_audited(db, caplog):
    caplog.set_level(logging.WARNING, logger="shopfloor.throttle")
    User.objects.create_superuser("chief", "c@example.invalid", "the-right-password-1")
    for i in range(12):
        admin_try("wrong-password", ip=f"10.9.1.{i}")  # spread over addresses
    client = Client(REMOTE_ADDR="10.9.2.1")
    reply = client.post("/admin/login/", {"username": "chief", "password": "the-right-password-1"})
    assert reply.status_code == 429 and reply.headers["Retry-After"]
    assert "_auth_user_id" not in client.session  # the right password is refused
    entry = AuditEntry.objects.get(action="login.blocked", object_id="admin:chief")
    assert entry.after["failures"] == settings.ADMIN_LOGIN_MAX_FAILURES
    assert any("admin:chief blocked" in r.getMessage() for r in caplog.records)
    with time_machine.travel(
        timezone.now() + dt.timedelta(seconds=settings.LOGIN_BLOCK_SECONDS + 1), tick=False
    ):
        assert "_auth_user_id" in admin_try("the-right-password-1", ip="10.9.3.1").session


def test_admin_success_clears_the_name_count(db):
    User.objects.create_superuser("chief", "c@example.invalid", "the-right-password-1")
    for _ in range(settings.ADMIN_LOGIN_MAX_FAILURES - 1):
        admin_try("wrong-password")
    assert "_auth_user_id" in admin_try("the-right-password-1").session
    assert not LoginThrottle.objects.filter(key="admin:chief").exists()
