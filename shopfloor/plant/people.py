"""People on the floor: badge sign-in, PIN checks (with lock-out), qualification and
work-center assignment checks.
"""

from __future__ import annotations

import logging
import secrets
from datetime import datetime
from typing import Any

from django.conf import settings
from django.contrib.auth.hashers import check_password, make_password
from django.contrib.auth.models import AbstractBaseUser
from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from shopfloor import access, throttle
from shopfloor.audit import services as audit
from shopfloor.errors import InvalidInput, NotAllowed, NotFound
from shopfloor.plant.models import (
    Person,
    Qualification,
)

log = logging.getLogger("shopfloor.floor")


# --- people -------------------------------------------------------------------------


def person_for(user: AbstractBaseUser | Any) -> Person:
    person = getattr(user, "person", None) if user is not None else None
    if person is None:
        raise NotAllowed("This account has no badge on file; ask an administrator to add one.")
    return person


#: The one answer to every failed badge sign-in: an unknown badge, a wrong PIN and a locked
#: badge look the same, so the page cannot be used to find real badge numbers (OWASP
#: Authentication Cheat Sheet, "authentication and error messages").
LOGIN_REFUSED = (
    "Badge number or PIN is not right. After several wrong PINs a badge is locked; a "
    "supervisor can unlock it."
)
_dummy_pin_hash: list[str] = []


def _dummy_hash() -> str:
    """A PIN hash made once per process, checked for unknown badges so that they cost the
    same hashing work as real ones (no timing difference to enumerate badges by)."""
    if not _dummy_pin_hash:
        _dummy_pin_hash.append(make_password(secrets.token_hex(8), hasher="pin_pbkdf2_sha256"))
    return _dummy_pin_hash[0]


def badge_login(badge_number: str, pin: str, *, client_ip: str = "unknown") -> Person:
    """Find the person for a badge scan and PIN; count wrong PINs and lock at the limit.

    Throttled per client address and per badge number as typed (shopfloor.throttle, 429
    with Retry-After). Unknown badges hash a dummy PIN and count against the throttle just
    like real ones, and every failure gets the same LOGIN_REFUSED message.
    """
    badge_number = (badge_number or "").strip()
    if not badge_number or not pin:
        raise InvalidInput("Scan or type your badge number and enter your PIN.")
    if not (badge_number + pin).isprintable():
        raise InvalidInput(
            "The badge number or PIN holds a control character; scan the badge again and "
            "type the PIN with the digit keys."
        )
    keys = throttle.badge_keys(client_ip, badge_number)
    throttle.check(keys)
    person = Person.objects.select_related("user").filter(badge_number=badge_number).first()
    if person is None or not person.user.is_active:
        check_password(pin, _dummy_hash())  # same work as a real badge; result unused
    else:
        try:
            verify_pin(person, pin)
        except NotAllowed:
            pass
        else:
            throttle.clear(keys)
            return person
    throttle.record_failure(keys, actor=None, what="badge sign-in")
    raise NotAllowed(LOGIN_REFUSED)


def verify_pin(person: Person, pin: str) -> None:
    """Check a PIN (login or signature). After PIN_MAX_FAILURES wrong PINs, lock and log."""
    with transaction.atomic():
        locked = Person.objects.select_for_update(no_key=True).get(pk=person.pk)
        if locked.is_locked:
            locked.pin_matches(pin)  # the same hashing work as an unlocked badge (timing)
            raise NotAllowed(
                "This badge is locked after too many wrong PINs. A supervisor or administrator "
                "must unlock it."
            )
        if locked.pin_matches(pin):
            if locked.pin_failures:
                locked.pin_failures = 0
                locked.save(update_fields=["pin_failures"])
            return
        locked.pin_failures += 1
        fields = ["pin_failures"]
        if locked.pin_failures >= settings.PIN_MAX_FAILURES:
            locked.locked_at = timezone.now()
            fields.append("locked_at")
        locked.save(update_fields=fields)
        if locked.locked_at:
            audit.record(
                actor=locked.user,
                action="person.locked",
                object_type="person",
                object_id=locked.pk,
                after={"reason": "too many wrong PINs", "failures": locked.pin_failures},
            )
            log.warning(
                "badge %s locked after %s wrong PINs", locked.badge_number, locked.pin_failures
            )
    # Raised outside the atomic block so the failure count is kept.
    if locked.locked_at:
        raise NotAllowed("Wrong PIN. This badge is now locked; ask a supervisor to unlock it.")
    left = settings.PIN_MAX_FAILURES - locked.pin_failures
    raise NotAllowed(f"Wrong PIN. {left} more wrong attempt(s) will lock this badge.")


def unlock_person(*, by: Person, person_id: int) -> Person:
    if not access.is_supervising(by):
        raise NotAllowed("Only a supervisor or administrator can unlock a badge.")
    with transaction.atomic():
        person = Person.objects.select_for_update(no_key=True).filter(pk=person_id).first()
        if person is None:
            raise NotFound(f"No badge record {person_id}.")
        person.locked_at = None
        person.pin_failures = 0
        person.save(update_fields=["locked_at", "pin_failures"])
        audit.record(
            actor=by.user, action="person.unlocked", object_type="person", object_id=person.pk
        )
    return person


def check_qualified(person: Person, work_center_id: int, on: datetime | None = None) -> None:
    today = timezone.localdate(on) if on else timezone.localdate()
    qual = Qualification.objects.filter(person=person, work_center_id=work_center_id).first()
    if qual is None:
        raise NotAllowed(
            f"{person.printed_name} is not qualified for this work center, so cannot sign its "
            "steps. Ask a supervisor to record the qualification."
        )
    if qual.valid_until < today:
        raise NotAllowed(
            f"{person.printed_name}'s qualification for this work center expired on "
            f"{qual.valid_until:%Y-%m-%d}. Ask a supervisor to renew it."
        )


SUPERVISING = access.SUPERVISING_ROLES  # may record and sign at any work center
#: The same roles as plain group names, for the reading path's own SQL (reading_sql.py).
ANYWHERE_ROLES = tuple(sorted(str(r) for r in SUPERVISING))


def check_assigned(person: Person, work_center_id: int, *, known: bool | None = None) -> None:
    """Readings are taken by people assigned to the work center (supervisors anywhere).

    `known`: the answer when the caller already read it (the reading POST reads it with
    its other facts in one statement); otherwise one query.
    """
    if access.is_superuser(person.user):
        return  # an administrator (shopfloor.access); no query needed
    # One query: assigned to the work center, or holding a role that works anywhere.
    allowed = (
        known
        if known is not None
        else Person.objects.filter(pk=person.pk)
        .filter(Q(work_centers__pk=work_center_id) | access.holds_role_q(SUPERVISING))
        .exists()
    )
    if not allowed:
        raise NotAllowed(
            f"{person.printed_name} is not assigned to this work center, so cannot record its "
            "readings. Ask a supervisor to add the work center to your badge."
        )
