"""Idempotency-Key handling shared by the tablet pages and the API.

A tablet on flaky Wi-Fi may send the same reading several times. The first request
with a key runs the use case and stores its reply in the same transaction; a repeat
after that gets the stored reply and records nothing; the same key with a different
body is refused (422); a repeat that arrives while the first is still running gets a
409 at once (PostgreSQL advisory lock), so it can retry shortly.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from django.db import connection, transaction

from shopfloor.errors import Conflict, DomainError, IdempotencyMismatch, InvalidInput
from shopfloor.floor.models import IdempotencyRecord

MAX_KEY_LENGTH = 100


@dataclass(frozen=True)
class Outcome:
    status: int
    body: dict[str, Any]
    replayed: bool


@dataclass(frozen=True)
class Claim:
    """A request's Idempotency-Key, checked, with what identifies the request: for a use
    case that looks up and stores the reply in its own statements (the reading POST)."""

    user_id: int
    key: str
    fingerprint: str

    @property
    def lock_id(self) -> int:
        return _lock_id(self.user_id, self.key)


def claim(user: Any, key: str | None, request_fingerprint: str) -> Claim | None:
    """The request's claim (None without a key); InvalidInput for a malformed key."""
    if key is None or key == "":
        return None
    return Claim(user.pk, _checked_key(key), request_fingerprint)


def _checked_key(key: str) -> str:
    key = key.strip()
    if not key or len(key) > MAX_KEY_LENGTH or not key.isprintable():
        raise InvalidInput(f"Idempotency-Key must be 1 to {MAX_KEY_LENGTH} printable characters.")
    return key


STILL_RUNNING = (
    "The same request is still being processed; wait a moment and retry with the same "
    "Idempotency-Key."
)
KEY_REUSED = (
    "This Idempotency-Key was already used for a different request. Use a new key for a new "
    "reading or action."
)


def fingerprint(method: str, path: str, payload: Any) -> str:
    text = json.dumps([method.upper(), path, payload], sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def _lock_id(user_id: int, key: str) -> int:
    digest = hashlib.sha256(f"{user_id}:{key}".encode()).digest()
    return int.from_bytes(digest[:8], "big", signed=True)


def run(
    *,
    user: Any,
    key: str | None,
    request_fingerprint: str,
    action: Callable[[], tuple[int, dict[str, Any]]],
) -> Outcome:
    """Run `action` at most once per (user, key). `action` returns (status, body)."""
    if key is None or key == "":
        status, body = action()
        return Outcome(status, body, False)
    key = key.strip()
    if not key or len(key) > MAX_KEY_LENGTH or not key.isprintable():
        raise InvalidInput(f"Idempotency-Key must be 1 to {MAX_KEY_LENGTH} printable characters.")
    refusal: DomainError | None = None
    with transaction.atomic():
        if connection.vendor == "postgresql":
            with connection.cursor() as cursor:
                cursor.execute("SELECT pg_try_advisory_xact_lock(%s)", [_lock_id(user.pk, key)])
                if not cursor.fetchone()[0]:
                    raise Conflict(
                        "The same request is still being processed; wait a moment and retry "
                        "with the same Idempotency-Key."
                    )
        stored = IdempotencyRecord.objects.filter(user=user, key=key).first()
        if stored is not None:
            if stored.fingerprint != request_fingerprint:
                raise IdempotencyMismatch(
                    "This Idempotency-Key was already used for a different request. Use a new "
                    "key for a new reading or action."
                )
            return Outcome(stored.status_code or 200, stored.body or {}, True)
        try:
            status, body = action()
        except DomainError as exc:
            # The use case rolled back its own savepoint; keep what must survive a refusal
            # (e.g. a wrong-PIN count) by committing, then report the refusal.
            refusal = exc
        else:
            IdempotencyRecord.objects.create(
                user=user,
                key=key,
                fingerprint=request_fingerprint,
                completed=True,
                status_code=status,
                body=body,
            )
    if refusal is not None:
        raise refusal
    return Outcome(status, body, False)


def run_in_steps(
    *,
    user: Any,
    key: str | None,
    request_fingerprint: str,
    action: Callable[[], tuple[int, dict[str, Any]]],
) -> Outcome:
    """`run` for an action that commits in several transactions (a batch post).

    The reply cannot be stored in the same transaction as every change, so a repeat is
    kept out by a session-level advisory lock while the action runs (a concurrent repeat
    gets 409), and the reply is stored after it. If the process dies in between, a retry
    runs the action again: each item's sample key then makes it a duplicate, never a
    second reading.
    """
    if key is None or key == "":
        status, body = action()
        return Outcome(status, body, False)
    key = key.strip()
    if not key or len(key) > MAX_KEY_LENGTH or not key.isprintable():
        raise InvalidInput(f"Idempotency-Key must be 1 to {MAX_KEY_LENGTH} printable characters.")
    lock = _lock_id(user.pk, key)
    locked = False
    if connection.vendor == "postgresql":
        with connection.cursor() as cursor:
            cursor.execute("SELECT pg_try_advisory_lock(%s)", [lock])
            locked = bool(cursor.fetchone()[0])
        if not locked:
            raise Conflict(
                "The same request is still being processed; wait a moment and retry with the "
                "same Idempotency-Key."
            )
    try:
        stored = IdempotencyRecord.objects.filter(user=user, key=key).first()
        if stored is not None:
            if stored.fingerprint != request_fingerprint:
                raise IdempotencyMismatch(
                    "This Idempotency-Key was already used for a different request. Use a new "
                    "key for a new batch."
                )
            return Outcome(stored.status_code or 200, stored.body or {}, True)
        status, body = action()
        IdempotencyRecord.objects.create(
            user=user,
            key=key,
            fingerprint=request_fingerprint,
            completed=True,
            status_code=status,
            body=body,
        )
        return Outcome(status, body, False)
    finally:
        if locked:
            with connection.cursor() as cursor:
                cursor.execute("SELECT pg_advisory_unlock(%s)", [lock])
