"""Sign-in throttling and lockout, shared by every process (state in the database).

Several gunicorn processes serve the same tablets, so a counter in process memory would
let an attacker spread guesses across them; the counts live in `LoginThrottle` rows,
updated under a row lock. Each failed sign-in counts against every key it touches (the
client address, and the badge number or admin user name as typed, whether or not it
exists, so a real badge and an invented one behave alike). A key that reaches its limit
within the window is refused with 429 and Retry-After until the block ends, even with the
right secret; the start of a block is logged and written to the audit trail.

Limits (settings, README "Configuration"): LOGIN_FAILURES_PER_IP, LOGIN_FAILURES_PER_BADGE
(default PIN_MAX_FAILURES), ADMIN_LOGIN_MAX_FAILURES, each within LOGIN_THROTTLE_WINDOW_SECONDS,
then blocked for LOGIN_BLOCK_SECONDS. Guidance: OWASP Authentication Cheat Sheet
("Protect against automated attacks", "Account lockout").
"""

from __future__ import annotations

import datetime as dt
import logging
import math
from dataclasses import dataclass
from typing import Any

from django.conf import settings
from django.db import transaction
from django.http import HttpRequest
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.errors import DomainError
from shopfloor.plant.models import LoginThrottle

log = logging.getLogger(__name__)


class Throttled(DomainError):
    """Too many failed sign-ins: answer 429 with Retry-After (whole seconds)."""

    status = 429
    code = "too_many_attempts"

    def __init__(self, detail: str, *, retry_after: int) -> None:
        super().__init__(detail)
        self.retry_after = max(1, retry_after)


@dataclass(frozen=True)
class Key:
    """One throttled key and its limit."""

    name: str
    limit: int

    @property
    def kind(self) -> str:
        return self.name.split(":", 1)[0]


def client_ip(request: HttpRequest) -> str:
    """The client's address. Behind a proxy, CLIENT_IP_HEADER names the header the proxy
    sets (for example HTTP_X_REAL_IP); its last comma-separated value is used."""
    header = getattr(settings, "CLIENT_IP_HEADER", "")
    if header and request.META.get(header):
        return str(request.META[header]).split(",")[-1].strip()[:100]
    return str(request.META.get("REMOTE_ADDR", "") or "unknown")[:100]


def _clean(value: str) -> str:
    return "".join(ch for ch in (value or "").strip() if ch.isprintable())[:120]


def badge_keys(ip: str, badge: str) -> list[Key]:
    return [
        Key(f"ip:{ip}", settings.LOGIN_FAILURES_PER_IP),
        Key(f"badge:{_clean(badge).upper()}", settings.LOGIN_FAILURES_PER_BADGE),
    ]


def admin_keys(ip: str, username: str) -> list[Key]:
    return [
        Key(f"ip:{ip}", settings.LOGIN_FAILURES_PER_IP),
        Key(f"admin:{_clean(username).lower()}", settings.ADMIN_LOGIN_MAX_FAILURES),
    ]


def _refusal(retry_after: float) -> Throttled:
    seconds = math.ceil(retry_after)
    minutes = max(1, math.ceil(seconds / 60))
    return Throttled(
        f"Too many failed sign-ins. Wait {minutes} minute(s) and try again, or ask a "
        "supervisor (an administrator for the admin pages).",
        retry_after=seconds,
    )


def check(keys: list[Key]) -> None:
    """Refuse (Throttled) while any key is blocked; otherwise do nothing."""
    now = timezone.now()
    blocked = (
        LoginThrottle.objects.filter(key__in=[k.name for k in keys], blocked_until__gt=now)
        .order_by("-blocked_until")
        .values_list("blocked_until", flat=True)
        .first()
    )
    if blocked is not None:
        raise _refusal((blocked - now).total_seconds())


def record_failure(keys: list[Key], *, actor: Any = None, what: str = "sign-in") -> None:
    """Count one failure against every key; start a block (logged, audited) at a limit."""

    now = timezone.now()
    window = dt.timedelta(seconds=settings.LOGIN_THROTTLE_WINDOW_SECONDS)
    block = dt.timedelta(seconds=settings.LOGIN_BLOCK_SECONDS)
    with transaction.atomic():
        LoginThrottle.objects.bulk_create(
            [LoginThrottle(key=k.name, window_started_at=now) for k in keys],
            ignore_conflicts=True,
        )
        rows = {
            r.key: r
            for r in LoginThrottle.objects.select_for_update()
            .filter(key__in=[k.name for k in keys])
            .order_by("key")
        }
        for key in keys:
            row = rows[key.name]
            if row.window_started_at <= now - window:
                row.failures, row.window_started_at = 0, now
            row.failures += 1
            started_block = row.failures >= key.limit and not (
                row.blocked_until and row.blocked_until > now
            )
            until = now + block
            if started_block:
                row.blocked_until = until
            row.save(update_fields=["failures", "window_started_at", "blocked_until"])
            if started_block:
                log.warning(
                    "%s blocked for %ss after %s failed %s attempts",
                    key.name,
                    settings.LOGIN_BLOCK_SECONDS,
                    row.failures,
                    what,
                )
                audit.record(
                    actor=actor,
                    action="login.blocked",
                    object_type="login_throttle",
                    object_id=key.name[:60],
                    after={
                        "key": key.name,
                        "what": what,
                        "failures": row.failures,
                        "blocked_until": until.isoformat(),
                    },
                )


def clear(keys: list[Key]) -> None:
    """Forget the failures of these keys (a successful sign-in clears its badge or user
    name, never the address: one good login must not reset a guesser's budget)."""
    LoginThrottle.objects.filter(key__in=[k.name for k in keys if k.kind != "ip"]).delete()
