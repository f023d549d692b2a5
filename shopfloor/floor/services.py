"""Use cases of the floor: badge login, PIN checks, starting, recording and completing steps.

Each public function is one use case, owns its transaction, locks the rows that a
concurrent request could change, writes its audit entry and (for readings) its outbox
event in the same transaction. The tablet views and the API call these functions only.
"""

from __future__ import annotations

import datetime as dt
import logging
import math
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from django.conf import settings
from django.contrib.auth.hashers import check_password, make_password
from django.contrib.auth.models import AbstractBaseUser
from django.db import transaction
from django.db.models import Exists, OuterRef, Q
from django.utils import timezone

from shopfloor import throttle, units
from shopfloor.audit import services as audit
from shopfloor.core import judging
from shopfloor.core import materials as materials_core
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import (
    AcceptedQuantity,
    LotStep,
    MaterialUse,
    Reading,
    ScrapReason,
    ScrapRecord,
    ShelfLife,
)
from shopfloor.plant.models import (
    Equipment,
    Job,
    Lot,
    MaterialLot,
    Panel,
    PanelImage,
    Person,
    Qualification,
)
from shopfloor.quality import outbox
from shopfloor.quality.models import Hold, OutboxEvent

log = logging.getLogger("shopfloor.floor")

# A reading's capture time may lag its recording (offline tablet) but not by days,
# and may not be in the future beyond clock skew.
MAX_CAPTURE_AGE = timedelta(hours=24)
MAX_CLOCK_SKEW = timedelta(minutes=5)


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
    if not by.roles() & {"supervisor", "admin"}:
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


ANYWHERE_ROLES = ("supervisor", "admin")  # may record and sign at any work center


def check_assigned(person: Person, work_center_id: int) -> None:
    """Readings are taken by people assigned to the work center (supervisors anywhere)."""
    if person.user.is_superuser:
        return  # an administrator (shopfloor.access.is_admin); the group is in ANYWHERE_ROLES
    # One query: assigned to the work center, or holding a role that works anywhere.
    allowed = (
        Person.objects.filter(pk=person.pk)
        .filter(Q(work_centers__pk=work_center_id) | Q(user__groups__name__in=ANYWHERE_ROLES))
        .exists()
    )
    if not allowed:
        raise NotAllowed(
            f"{person.printed_name} is not assigned to this work center, so cannot record its "
            "readings. Ask a supervisor to add the work center to your badge."
        )


# --- lookups ------------------------------------------------------------------------


def find_lot(code: str) -> Lot:
    code = (code or "").strip()
    if not code:
        raise InvalidInput("Scan or type a lot code.")
    lot = Lot.objects.select_related("routing_revision").filter(code__iexact=code).first()
    if lot is None:
        raise NotFound(f"No lot with code {code!r}. Check the traveller label and scan again.")
    return lot


def find_current_step(code: str) -> LotStep:
    """The current step of the lot with this code, with its lot and work center (one query).

    Raises NotFound for an unknown lot and Conflict for a lot with no open step.
    """
    code = (code or "").strip()
    step = (
        LotStep.objects.filter(lot__code__iexact=code)
        .exclude(status__in=[LotStep.Status.DONE, LotStep.Status.SKIPPED])
        .order_by("position")
        .select_related("lot", "work_center")
        .first()
        if code
        else None
    )
    if step is None:
        lot = find_lot(code)  # says why: no code, no such lot, or nothing left to do
        raise Conflict(f"Lot {lot.code} has no open step (it is {lot.get_status_display()}).")
    return step


def current_step(lot: Lot) -> LotStep | None:
    """The first step of the lot's route that is not done (or skipped)."""
    return (
        LotStep.objects.filter(lot=lot)
        .exclude(status__in=[LotStep.Status.DONE, LotStep.Status.SKIPPED])
        .order_by("position")
        .select_related("work_center")
        .first()
    )


def _lock_step(lot_step_id: int) -> tuple[LotStep, Lot]:
    """Lock the step and its lot (one query) and note whether an earlier step is open."""
    earlier_open = LotStep.objects.filter(
        lot_id=OuterRef("lot_id"), position__lt=OuterRef("position")
    ).exclude(status__in=[LotStep.Status.DONE, LotStep.Status.SKIPPED])
    step = (
        LotStep.objects.select_related("lot")
        .select_for_update(no_key=True, of=("self", "lot"))
        .annotate(earlier_step_open=Exists(earlier_open))
        .filter(pk=lot_step_id)
        .first()
    )
    if step is None:
        raise NotFound(f"No lot step {lot_step_id}.")
    return step, step.lot


def _require_workable(step: LotStep, lot: Lot, *, held_step_readings: bool = False) -> None:
    """Refuse work on a held, finished or not-current step.

    `held_step_readings`: a held lot still takes readings and corrections at the step
    whose reading put it on hold (the rest of the sample set, so quality sees the whole
    set, and corrections of typing slips); the hold itself stays until a disposition.
    Costs one query, and only when the lot is on hold.
    """
    if lot.on_hold and not (
        held_step_readings
        and Hold.objects.filter(lot=lot, lot_step=step, released_at__isnull=True).exists()
    ):
        raise Conflict(
            f"Lot {lot.code} is on hold. It cannot be worked until quality dispositions the "
            "nonconformance."
        )
    if lot.status in {Lot.Status.COMPLETE, Lot.Status.SCRAPPED}:
        raise Conflict(f"Lot {lot.code} is {lot.get_status_display().lower()}; nothing to do.")
    if step.status in {LotStep.Status.DONE, LotStep.Status.SKIPPED} or getattr(
        step, "earlier_step_open", True
    ):
        current = current_step(lot)  # only to say where the lot is
        where = f"'{current.name}' at {current.work_center.name}" if current else "none"
        raise Conflict(
            f"'{step.name}' is not the lot's current step. The lot is at {where}; steps run "
            "in routing order."
        )


def _step_state(step: LotStep) -> dict[str, Any]:
    return {
        "status": step.status,
        "started_at": step.started_at,
        "completed_at": step.completed_at,
        "equipment": step.equipment_id,
    }


# --- steps --------------------------------------------------------------------------


def start_step(
    *,
    person: Person,
    lot_step_id: int,
    equipment_id: int | None = None,
    material_lot_ids: list[int] | None = None,
) -> LotStep:
    """Begin (or resume) work on the lot's current step."""
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        _require_workable(step, lot)
        check_qualified(person, step.work_center_id)
        if step.status == LotStep.Status.IN_PROGRESS:
            raise Conflict(f"'{step.name}' is already in progress.")
        before = _step_state(step)
        if equipment_id is not None:
            step.equipment = _usable_equipment(equipment_id, step.work_center_id)
        now = timezone.now()
        if step.started_at is None:
            step.started_at = now
            step.started_by = person
        step.status = LotStep.Status.IN_PROGRESS
        step.save()
        # Which tank(s) a wet step ran in, so an out-of-window bath analysis can list it.
        from shopfloor.chemistry.services import record_tank_use

        record_tank_use(step, step.started_at)
        if material_lot_ids:
            found = {m.pk: m for m in MaterialLot.objects.filter(pk__in=material_lot_ids)}
            unknown = sorted(set(material_lot_ids) - set(found))
            if unknown:
                raise InvalidInput(
                    f"Material lot id(s) {unknown} are not on record.",
                    problems=[{"field": "material_lots", "value": unknown}],
                )
            for material_id in dict.fromkeys(material_lot_ids):
                _use_material(step, found[material_id], person, "api")
        if lot.status == Lot.Status.NOT_STARTED:
            lot.status = Lot.Status.IN_PROCESS
            lot.started_at = now
            lot.save(update_fields=["status", "started_at"])
        audit.record(
            actor=person.user,
            action="step.started",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after=_step_state(step),
        )
        return step


def pause_step(*, person: Person, lot_step_id: int, reason: str = "") -> LotStep:
    with transaction.atomic():
        step, _lot = _lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"'{step.name}' is not in progress, so it cannot be paused.")
        before = _step_state(step)
        step.status = LotStep.Status.PAUSED
        step.save(update_fields=["status"])
        audit.record(
            actor=person.user,
            action="step.paused",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after={**_step_state(step), "reason": reason},
        )
        return step


def _usable_equipment(equipment_id: int, work_center_id: int) -> Equipment:
    equipment = Equipment.objects.filter(pk=equipment_id).first()
    if equipment is None:
        raise InvalidInput(f"No equipment with id {equipment_id}.")
    if equipment.work_center_id != work_center_id:
        raise InvalidInput(f"{equipment.code} belongs to another work center.")
    if not equipment.calibration_current():
        due = equipment.calibration_due
        raise NotAllowed(
            f"{equipment.code} is past its calibration due date"
            f"{f' ({due:%Y-%m-%d})' if due else ''} and cannot be used for readings. "
            "Use a calibrated gauge or ask the metrology lab."
        )
    return equipment


def missing_readings(step: LotStep) -> list[str]:
    """Plain-English list of the readings the plan still needs."""
    have: dict[str, set[int]] = {}
    for quantity, sample in Reading.objects.filter(
        lot_step=step, superseded_by__isnull=True
    ).values_list("quantity", "sample_index"):
        have.setdefault(quantity, set()).add(sample)
    missing: list[str] = []
    for group in judging.group_plan(step.plan):
        need = group.samples
        got = len({s for s in have.get(group.quantity, set()) if 1 <= s <= need})
        if got < need:
            missing.append(f"{group.quantity}: {got} of {need} samples")
    return missing


def quantity_plan(step: LotStep, quantity: str) -> judging.QuantityPlan:
    """Every plan entry of `quantity` at this step (several when a quantity carries a set
    criterion and an each-reading one), or InvalidInput naming what is measured here."""
    for group in judging.group_plan(step.plan):
        if group.quantity == quantity:
            return group
    allowed = ", ".join(g.quantity for g in judging.group_plan(step.plan))
    allowed = allowed or "none (this step has no readings)"
    raise InvalidInput(
        f"'{quantity}' is not measured at '{step.name}'. Allowed here: {allowed}.",
        problems=[{"field": "quantity", "value": quantity, "allowed": allowed}],
    )


def window_for(step: LotStep, quantity: str) -> dict[str, Any]:
    """The window snapshot a reading of `quantity` stores (each-reading limits plus every
    criterion of the quantity and its plain words)."""
    return quantity_plan(step, quantity).window()


class ConfirmationNeeded(Conflict):
    """A value outside its window (or implausibly far from it) that was not confirmed."""

    code = "confirm_out_of_window"


@dataclass(frozen=True)
class ReadingInput:
    quantity: str
    value: Any
    unit: str
    sample_index: int = 1
    position: str = ""
    equipment_id: int | None = None
    captured_at: datetime | None = None
    # The operator saw the typo guard's question and confirmed the value as entered.
    confirm_out_of_window: bool = False


# Units offered by the typo guard's "did you mean ...?", per canonical unit.
_GUARD_UNITS: dict[str, tuple[str, ...]] = {
    "um": ("µm", "mil", "µin", "mm"),
    "mm": ("mm", "mil", "in", "µm"),
}


def _alternatives(quantity: str, number: Any, canonical: str) -> dict[str, float]:
    """What the typed number would be under each other unit of the same dimension."""
    out: dict[str, float] = {}
    for unit in _GUARD_UNITS.get(canonical, ()):
        try:
            out[unit] = units.to_canonical(quantity, number, unit)
        except (units.UnitError, ValueError):
            continue
    return out


def _guard(group: judging.QuantityPlan, data: ReadingInput, value: float) -> str:
    """The confirmation the typo guard needs for this value ('' when none); raises
    ConfirmationNeeded (409) when it needs one and the input did not confirm."""
    guard = judging.guard_value(
        value,
        str(data.value).strip(),
        data.unit,
        group.entries,
        _alternatives(data.quantity, data.value, group.unit),
    )
    if guard is None:
        return ""
    if not data.confirm_out_of_window:
        raise ConfirmationNeeded(
            f"{data.quantity} sample {data.sample_index}: {guard.message} Nothing was saved; "
            'send it again with "confirm_out_of_window": true to store it as entered.',
            problems=[
                {
                    "field": "confirm_out_of_window",
                    "value": str(data.value),
                    "unit": data.unit,
                    "problem": guard.message,
                    "suggested_unit": guard.suggested_unit,
                    "implausible": guard.implausible,
                }
            ],
        )
    return guard.message[:400]


def _parse_reading(
    step: LotStep, data: ReadingInput
) -> tuple[judging.QuantityPlan, float, datetime, str]:
    group = quantity_plan(step, data.quantity)
    try:
        value = units.to_canonical(data.quantity, data.value, data.unit)
    except (units.UnitError, ValueError) as exc:
        raise InvalidInput(
            str(exc),
            problems=[
                {
                    "field": "value",
                    "value": str(data.value),
                    "unit": data.unit,
                    "problem": str(exc),
                    "allowed": units.allowed_units(data.quantity),
                }
            ],
        ) from exc
    samples = group.samples
    if not isinstance(data.sample_index, int) or not 1 <= data.sample_index <= max(samples, 1):
        raise InvalidInput(
            f"Sample {data.sample_index} is outside the plan: this step takes samples 1 to "
            f"{samples} of {data.quantity}.",
            problems=[
                {"field": "sample_index", "value": data.sample_index, "allowed": f"1..{samples}"}
            ],
        )
    now = timezone.now()
    captured = data.captured_at or now
    if timezone.is_naive(captured):
        raise InvalidInput("captured_at must include a time zone (ISO 8601 with offset or Z).")
    if captured > now + MAX_CLOCK_SKEW:
        raise InvalidInput("captured_at is in the future; check the device clock.")
    if captured < now - MAX_CAPTURE_AGE:
        raise InvalidInput("captured_at is more than 24 hours old; enter it as a correction.")
    if not math.isfinite(value):
        raise InvalidInput("The value must be a finite number.")
    confirmation = _guard(group, data, value)
    return group, value, captured, confirmation


def _current_set(step: LotStep, quantity: str) -> dict[int, tuple[int, float]]:
    """sample index -> (reading id, value) of the current readings of one quantity."""
    return {
        sample: (pk, value)
        for sample, pk, value in Reading.objects.filter(
            lot_step=step, quantity=quantity, superseded_by__isnull=True
        ).values_list("sample_index", "pk", "value")
    }


def record_reading(
    *, person: Person, lot_step_id: int, data: ReadingInput, via: str = "tablet"
) -> Reading:
    """Record one reading on the lot's current step, judge it, and queue the event.

    Each-reading criteria judge it at once; when it completes the sample set, the set's
    criteria (mean, smallest, largest, range) judge the set and the event carries the
    verdict. A held lot takes the rest of the set at the held step.
    """
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        _require_workable(step, lot, held_step_readings=True)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording readings.")
        group, value, captured, confirmation = _parse_reading(step, data)
        equipment = None
        if data.equipment_id is not None:
            equipment = _usable_equipment(data.equipment_id, step.work_center_id)
        current = _current_set(step, data.quantity)  # also the duplicate-sample check
        existing = current.get(data.sample_index)
        if existing is not None:
            # A second value for the same sample is a correction, which needs a reason.
            old_value = units.format_value(data.quantity, existing[1])
            raise Conflict(
                f"Sample {data.sample_index} of {data.quantity} already has a reading "
                f"({old_value}). To change it, record a correction with a reason."
            )
        reading = _store_reading(
            step, lot, person, data, group, value, captured, equipment, via, confirmation, current
        )
        return reading


def _store_reading(
    step: LotStep,
    lot: Lot,
    person: Person,
    data: ReadingInput,
    group: judging.QuantityPlan,
    value: float,
    captured: datetime,
    equipment: Equipment | None,
    via: str,
    confirmation: str,
    current: dict[int, tuple[int, float]],
    corrected: int | None = None,
) -> Reading:
    judgement = judging.judge_each(value, group.entries)
    window = group.window()
    members = {i: v for i, (_, v) in current.items()}
    members[data.sample_index] = value
    set_info: dict[str, Any] | None = None
    if group.set_entries:
        verdict = judging.judge_set(members, group.set_entries, group.samples)
        if verdict.complete:
            set_info = {
                "in_window": verdict.in_window,
                "message": verdict.message,
                "figures": [
                    {"applies_to": v.applies_to, "figure": v.figure, "in_window": v.in_window}
                    for v in verdict.verdicts
                ],
                "values": {str(i): members[i] for i in sorted(members)},
            }
    reading = Reading.objects.create(
        lot_step=step,
        quantity=data.quantity,
        entered_value=str(data.value)[:40],
        entered_unit=data.unit[:20],
        value=value,
        unit=units.canonical_unit(data.quantity),
        sample_index=data.sample_index,
        position=(data.position or "")[:60],
        equipment=equipment,
        operator=person,
        captured_at=captured,
        window=window,
        in_window=judgement.in_window,
        via=via,
        confirmation=confirmation,
        set_verdict=set_info,
        spec_key=judging.spec_key(group.entries),
    )
    payload: dict[str, Any] = {
        "reading": reading.pk,
        "lot": lot.pk,
        "lot_step": step.pk,
        "in_window": judgement.in_window,
        "message": judgement.message,
    }
    if set_info is not None:
        payload["set"] = {
            **set_info,
            "readings": sorted([*(pk for pk, _ in current.values()), reading.pk]),
        }
    if corrected is not None or lot.on_hold:
        # what the handler needs to cite the set on the NCR and to see whether a
        # correction brought it back inside
        payload["set_so_far"] = sorted([*(pk for pk, _ in current.values()), reading.pk])
        payload["each_in_window"] = all(
            judging.judge_each(v, group.entries).in_window for v in members.values()
        )
    if corrected is not None:
        payload["corrects"] = corrected
    audit.record(
        actor=person.user,
        action="reading.recorded",
        object_type="reading",
        object_id=reading.pk,
        after={
            "lot": lot.code,
            "step": step.code,
            "quantity": reading.quantity,
            "value": value,
            "unit": reading.unit,
            "sample": reading.sample_index,
            "in_window": reading.in_window,
            "source": window.get("source"),
            **({"confirmed": confirmation} if confirmation else {}),
            **({"set_in_window": payload["set"]["in_window"]} if "set" in payload else {}),
        },
    )
    event = OutboxEvent.objects.create(kind="reading.recorded", payload=payload)
    outbox.enqueue(event)
    return reading


def correct_reading(
    *,
    person: Person,
    reading_id: int,
    value: Any,
    unit: str,
    reason: str,
    captured_at: datetime | None = None,
    confirm_out_of_window: bool = False,
    lot_code: str | None = None,
) -> Reading:
    """Supersede a reading with a new one; both stay in history with the reason.

    Allowed on a held lot at the held step (a typing slip found after the hold). When
    the correction brings the set back inside, the event handler notes it on the NCR so
    quality can close it as a recording error. `lot_code`, when given, must be the
    reading's lot (a correction sent for the wrong lot is refused, nothing saved).
    """
    reason = (reason or "").strip()
    if len(reason) < 3:
        raise InvalidInput("A correction needs a reason (what was wrong with the first reading).")
    with transaction.atomic():
        old = (
            Reading.objects.select_for_update(no_key=True, of=("self",))
            .select_related("lot_step__lot")
            .filter(pk=reading_id)
            .first()
        )
        if old is None:
            raise NotFound(f"No reading {reading_id}.")
        if lot_code is not None and old.lot_step.lot.code.upper() != lot_code.strip().upper():
            raise Conflict(
                f"Reading {reading_id} belongs to lot {old.lot_step.lot.code}, not {lot_code}; "
                "nothing was changed. Correct a reading of the lot in front of you."
            )
        if old.superseded_by_id is not None:
            raise Conflict("That reading was already corrected; correct the newest one instead.")
        step, lot = _lock_step(old.lot_step_id)
        check_assigned(person, step.work_center_id)
        _require_workable(step, lot, held_step_readings=True)
        data = ReadingInput(
            quantity=old.quantity,
            value=value,
            unit=unit,
            sample_index=old.sample_index,
            position=old.position,
            equipment_id=old.equipment_id,
            captured_at=captured_at,
            confirm_out_of_window=confirm_out_of_window,
        )
        group, canonical, captured, confirmation = _parse_reading(step, data)
        equipment = old.equipment
        current = _current_set(step, old.quantity)
        current.pop(old.sample_index, None)
        # Supersede first so the new reading is the only current one of its sample.
        new = _store_reading(
            step,
            lot,
            person,
            data,
            group,
            canonical,
            captured,
            equipment,
            "correction",
            confirmation,
            current,
            corrected=old.pk,
        )
        old.superseded_by = new
        old.correction_reason = reason[:300]
        old.save(update_fields=["superseded_by", "correction_reason"])
        audit.record(
            actor=person.user,
            action="reading.superseded",
            object_type="reading",
            object_id=old.pk,
            before={"value": old.value},
            after={"superseded_by": new.pk, "value": new.value, "reason": reason},
        )
        return new


def _step_content(step: LotStep) -> dict[str, Any]:
    readings = list(
        Reading.objects.filter(lot_step=step, superseded_by__isnull=True)
        .order_by("pk")
        .values_list("pk", "quantity", "sample_index", "value")
    )
    return {
        "lot": step.lot_id,
        "position": step.position,
        "code": step.code,
        "started_at": step.started_at,
        "completed_at": step.completed_at,
        "completed_by": step.completed_by_id,
        "equipment": step.equipment_id,
        "readings": [list(r) for r in readings],
    }


def step_content(step: LotStep) -> dict[str, Any]:
    """The signed content of a step (used to verify its signature later)."""
    return _step_content(step)


def complete_step(
    *, person: Person, lot_step_id: int, pin: str, meaning: str = "performed_by"
) -> LotStep:
    """Sign off the current step (PIN re-entry) and move the lot to its next step."""
    from shopfloor.audit.models import Signature

    if meaning not in {Signature.Meaning.PERFORMED, Signature.Meaning.VERIFIED}:
        raise InvalidInput("A step is signed as 'performed_by' or 'verified_by'.")
    verify_pin(person, pin)
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        if step.status == LotStep.Status.DONE:
            raise Conflict(f"'{step.name}' was already signed off by someone else.")
        _require_workable(step, lot)
        check_qualified(person, step.work_center_id)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before signing it off.")
        missing = missing_readings(step)
        if missing:
            raise Conflict(
                "This step cannot be completed yet; readings missing: " + "; ".join(missing),
                problems=[{"field": "readings", "missing": missing}],
            )
        lacking = missing_materials(step)
        if lacking:
            raise Conflict(
                "This step cannot be completed yet; scan the material lot used for: "
                + ", ".join(lacking)
                + ".",
                problems=[{"field": "materials", "missing": lacking}],
            )
        _require_acceptance(step)
        before = _step_state(step)
        now = timezone.now()
        step.status = LotStep.Status.DONE
        step.completed_at = now
        step.completed_by = person
        sig = audit.sign(
            person=person,
            meaning=meaning,
            record_type="lot_step",
            record_id=step.pk,
            content=_step_content(step),
        )
        step.signature = sig
        step.save()
        nxt = current_step(lot)
        if nxt is None:
            lot.status = Lot.Status.COMPLETE
            lot.completed_at = now
            lot.save(update_fields=["status", "completed_at"])
        else:
            nxt.arrived_at = now
            nxt.save(update_fields=["arrived_at"])
        audit.record(
            actor=person.user,
            action="step.completed",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after={**_step_state(step), "signature": sig.pk, "next": nxt.code if nxt else None},
        )
        return step


# --- materials ----------------------------------------------------------------------


def material_label(kind: str) -> str:
    return str(dict(MaterialLot.Kind.choices).get(kind, kind.replace("_", " ")))


def material_usability(
    material: MaterialLot, shelf_lives: dict[str, int] | None = None
) -> materials_core.Usability:
    """Shelf life and expiry of a material lot today (site shelf lives from the admin;
    pass `shelf_lives` when checking many lots, to read them once)."""
    if shelf_lives is None:
        shelf = ShelfLife.objects.filter(kind=material.kind).values_list("days", flat=True).first()
    else:
        shelf = shelf_lives.get(material.kind)
    facts = materials_core.MaterialFacts(
        code=material.code,
        kind=material.kind,
        kind_label=material_label(material.kind),
        received_on=material.received_on,
        expires_on=material.expires_on,
    )
    return materials_core.usability(facts, timezone.localdate(), shelf)


def missing_materials(step: LotStep) -> list[str]:
    """The material kinds the step consumes that have no material lot recorded yet."""
    if not step.materials:
        return []
    have = set(MaterialUse.objects.filter(lot_step=step).values_list("kind", flat=True))
    return [material_label(k) for k in step.materials if k not in have]


def _use_material(step: LotStep, material: MaterialLot, person: Person, via: str) -> MaterialUse:
    """Check and record one material lot at a step (the caller holds the step's lock)."""
    wanted = list(step.materials or [])
    if material.kind not in wanted and material.kind != MaterialLot.Kind.OTHER:
        allowed = ", ".join(material_label(k) for k in wanted) or "none (it consumes no material)"
        raise InvalidInput(
            f"{material.code} is {material_label(material.kind).lower()}, which '{step.name}' "
            f"does not use. This step takes: {allowed}.",
            problems=[{"field": "material_lot", "value": material.code, "allowed": allowed}],
        )
    check = material_usability(material)
    if not check.usable:
        raise Conflict(check.reason, problems=[{"field": "material_lot", "value": material.code}])
    use = MaterialUse.objects.filter(lot_step=step, material_lot=material).first()
    if use is not None:
        return use
    use = MaterialUse.objects.create(
        lot_step=step, material_lot=material, kind=material.kind, recorded_by=person, via=via
    )
    step.material_lots.add(material)  # the recall and genealogy pages read this link
    audit.record(
        actor=person.user,
        action="material.used",
        object_type="lot_step",
        object_id=step.pk,
        after={
            "lot": step.lot.code,
            "step": step.code,
            "material_lot": material.code,
            "kind": material.kind,
            "expires_on": check.expires_on,
        },
    )
    return use


def record_material(
    *, person: Person, lot_step_id: int, code: str, via: str = "tablet"
) -> MaterialUse:
    """An operator scans (or picks) the material lot a step consumes.

    Refused with the reason: an unknown code, a kind the step does not use, a lot past
    its expiry or shelf life (or whose age cannot be checked). The use is recorded per
    lot step, so a recall (material lot -> lots -> jobs -> customers) is complete.
    """
    code = (code or "").strip()
    if not code:
        raise InvalidInput("Scan or type the material lot code from its label.")
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        _require_workable(step, lot)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording the material used.")
        material = MaterialLot.objects.filter(code__iexact=code).first()
        if material is None:
            raise InvalidInput(
                f"No material lot {code!r} is on record. Check the label; a lot stores has "
                "not received cannot be used.",
                problems=[{"field": "material_lot", "value": code}],
            )
        return _use_material(step, material, person, via)


def usable_material_lots(step: LotStep) -> dict[str, list[tuple[MaterialLot, str]]]:
    """Per material kind the step consumes: the lots on record that may be used today,
    soonest expiry first (first expired, first out: common practice for shelf-life
    materials), each with its expiry text (for the tablet's pick list)."""
    out: dict[str, list[tuple[MaterialLot, str, Any]]] = {k: [] for k in step.materials or []}
    if not out:
        return {}
    shelf_lives = dict(ShelfLife.objects.values_list("kind", "days"))
    for m in MaterialLot.objects.filter(kind__in=list(out)).order_by("code")[:500]:
        check = material_usability(m, shelf_lives)
        if check.usable:
            when = f"use by {check.expires_on:%Y-%m-%d}" if check.expires_on else "no expiry"
            out[m.kind].append((m, when, check.expires_on))
    return {
        kind: [
            (m, when)
            for m, when, _ in sorted(rows, key=lambda r: (r[2] is None, r[2] or dt.date.max))
        ]
        for kind, rows in out.items()
    }


# --- quantities: scrap and acceptance ---------------------------------------------------

FINAL_INSPECTION = "final_inspection"


def is_final_inspection(step: LotStep) -> bool:
    """The step that records the accepted quantity (the library's final inspection)."""
    from routing.builder.library import base_code

    return base_code(step.code) == FINAL_INSPECTION and not step.is_rework


def panel_good_boards(panels: list[Panel]) -> dict[tuple[int, int], int]:
    """(panel id, job id) -> boards still good: images less boards crossed out."""
    ids = [p.pk for p in panels if not p.scrapped]
    good: dict[tuple[int, int], int] = {}
    for panel_id, job_id, count in PanelImage.objects.filter(panel_id__in=ids).values_list(
        "panel_id", "job_id", "count"
    ):
        good[(panel_id, job_id)] = good.get((panel_id, job_id), 0) + count
    for panel_id, job_id, boards in ScrapRecord.objects.filter(
        panel_id__in=ids, panel_scrapped=False
    ).values_list("panel_id", "job_id", "boards"):
        key = (panel_id, job_id)
        if key in good:
            good[key] = max(good[key] - boards, 0)
    return good


def lot_good_boards(lot: Lot) -> dict[int, int]:
    """Job id -> good boards on the lot's live panels now."""
    out: dict[int, int] = {}
    for (_, job_id), n in panel_good_boards(list(lot.panels.all())).items():
        out[job_id] = out.get(job_id, 0) + n
    return out


def scrap_reason(code: str) -> ScrapReason:
    reason = ScrapReason.objects.filter(code=(code or "").strip(), active=True).first()
    if reason is None:
        allowed = ", ".join(ScrapReason.objects.filter(active=True).values_list("code", flat=True))
        raise InvalidInput(
            f"Scrap reason {code!r} is not on the site's list. Allowed: {allowed}.",
            problems=[{"field": "reason", "value": code, "allowed": allowed}],
        )
    return reason


def scrap_panel_boards(
    *,
    step: LotStep,
    lot: Lot,
    panel: Panel,
    boards: int | None,
    job: Job | None,
    reason: ScrapReason,
    note: str,
    person: Person,
    source: str,
    ncr: Any = None,
) -> list[ScrapRecord]:
    """Cross out boards on a panel, or scrap the whole panel (boards=None); the caller
    holds the lot's lock. Shared by the operator's scrap and the NCR disposition."""
    good = {
        job_id: n
        for (panel_id, job_id), n in panel_good_boards([panel]).items()
        if panel_id == panel.pk
    }
    records: list[ScrapRecord] = []
    if boards is None or (sum(good.values()) == (boards or 0) and job is None):
        for job_id, n in sorted(good.items()):
            records.append(
                ScrapRecord(
                    lot_step=step,
                    panel=panel,
                    job_id=job_id,
                    boards=n,
                    panel_scrapped=True,
                    reason=reason,
                    note=note,
                    source=source,
                    ncr=ncr,
                    recorded_by=person,
                )
            )
        if not records:  # a panel with no images: still a panel lost
            records.append(
                ScrapRecord(
                    lot_step=step,
                    panel=panel,
                    boards=0,
                    panel_scrapped=True,
                    reason=reason,
                    note=note,
                    source=source,
                    ncr=ncr,
                    recorded_by=person,
                )
            )
        panel.scrapped = True
        panel.save(update_fields=["scrapped"])
        lot.panel_count = max(lot.panel_count - 1, 0)
        lot.save(update_fields=["panel_count"])
    else:
        if job is None:
            if len(good) != 1:
                raise InvalidInput(
                    f"Panel {panel.serial} carries boards of several jobs; say which job's "
                    "boards are crossed out."
                )
            job_id = next(iter(good))
        else:
            job_id = job.pk
        left = good.get(job_id)
        if left is None:
            raise InvalidInput(f"Panel {panel.serial} carries no boards of that job.")
        if not 1 <= boards <= left:
            raise InvalidInput(
                f"Panel {panel.serial} has {left} good board(s) of that job; cross out 1 to "
                f"{left}, or scrap the whole panel.",
                problems=[{"field": "boards", "value": boards, "allowed": f"1..{left}"}],
            )
        records.append(
            ScrapRecord(
                lot_step=step,
                panel=panel,
                job_id=job_id,
                boards=boards,
                reason=reason,
                note=note,
                source=source,
                ncr=ncr,
                recorded_by=person,
            )
        )
    ScrapRecord.objects.bulk_create(records)
    if not lot.panels.filter(scrapped=False).exists():
        lot.status = Lot.Status.SCRAPPED
        lot.save(update_fields=["status"])
    return records


def record_scrap(
    *,
    person: Person,
    lot_step_id: int,
    panel_serial: str,
    reason_code: str,
    boards: int | None = None,
    job_number: str | None = None,
    note: str = "",
) -> list[ScrapRecord]:
    """An operator scraps at the current step: boards crossed out on a panel, or the
    whole panel (leave `boards` out). The reason comes from the site's list."""
    reason = scrap_reason(reason_code)
    note = (note or "").strip()[:300]
    if reason.code == "other" and len(note) < 3:
        raise InvalidInput("Scrap reason 'other' needs a note saying what was wrong.")
    if boards is not None and (isinstance(boards, bool) or not isinstance(boards, int)):
        raise InvalidInput("boards must be a whole number (leave it out to scrap the panel).")
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        _require_workable(step, lot)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording scrap.")
        panel = (
            Panel.objects.select_for_update(no_key=True)
            .filter(lot=lot, serial__iexact=(panel_serial or "").strip())
            .first()
        )
        if panel is None:
            serials = ", ".join(lot.panels.filter(scrapped=False).values_list("serial", flat=True))
            raise InvalidInput(
                f"Panel {panel_serial!r} is not in lot {lot.code}. Its live panels: {serials}.",
                problems=[{"field": "panel", "value": panel_serial, "allowed": serials}],
            )
        if panel.scrapped:
            raise Conflict(f"Panel {panel.serial} is already scrapped.")
        job = None
        if job_number:
            job = Job.objects.filter(number=job_number.strip()).first()
            if job is None:
                raise InvalidInput(f"No job {job_number!r}.")
        records = scrap_panel_boards(
            step=step,
            lot=lot,
            panel=panel,
            boards=boards,
            job=job,
            reason=reason,
            note=note,
            person=person,
            source=ScrapRecord.Source.OPERATOR,
        )
        audit.record(
            actor=person.user,
            action="scrap.recorded",
            object_type="lot_step",
            object_id=step.pk,
            after={
                "lot": lot.code,
                "step": step.code,
                "panel": panel.serial,
                "boards": sum(r.boards for r in records),
                "panel_scrapped": records[0].panel_scrapped,
                "reason": reason.code,
                "note": note,
            },
        )
        return records


def record_acceptance(
    *, person: Person, lot_step_id: int, accepted: dict[str, int], reason_code: str = ""
) -> list[AcceptedQuantity]:
    """Final inspection records the boards accepted per job (job number -> boards).

    Accepted may not exceed the good boards on the lot's live panels; boards inspected
    but not accepted are scrapped at this step with a reason from the site's list.
    Recording again before sign-off replaces the figures (audited before and after).
    """
    with transaction.atomic():
        step, lot = _lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        _require_workable(step, lot)
        if not is_final_inspection(step):
            raise Conflict(
                f"Accepted quantities are recorded at final inspection, not at '{step.name}'."
            )
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording the accepted quantity.")
        good = lot_good_boards(lot)
        jobs = {j.number: j for j in Job.objects.filter(pk__in=list(good))}
        problems: list[dict[str, Any]] = []
        for number in sorted(set(jobs) - set(accepted)):
            problems.append({"field": f"accepted.{number}", "problem": "missing"})
        for number, n in accepted.items():
            job = jobs.get(number)
            if job is None:
                problems.append(
                    {
                        "field": f"accepted.{number}",
                        "problem": "this lot carries no boards of that job",
                        "allowed": sorted(jobs),
                    }
                )
            elif isinstance(n, bool) or not isinstance(n, int) or not 0 <= n <= good[job.pk]:
                problems.append(
                    {
                        "field": f"accepted.{number}",
                        "value": n,
                        "problem": f"{good[job.pk]} good board(s) of job {number} are on the lot",
                        "allowed": f"0..{good[job.pk]}",
                    }
                )
        if problems:
            raise InvalidInput(
                f"The accepted quantities have {len(problems)} problem(s); nothing was saved.",
                problems=problems,
            )
        rejected = {number: good[jobs[number].pk] - n for number, n in accepted.items()}
        reason = None
        if any(rejected.values()):
            if not reason_code:
                raise InvalidInput(
                    "Some good boards were not accepted: give the scrap reason for them."
                )
            reason = scrap_reason(reason_code)
        before = {
            a.job.number: a.boards
            for a in AcceptedQuantity.objects.filter(lot_step=step).select_related("job")
        }
        ScrapRecord.objects.filter(lot_step=step, source=ScrapRecord.Source.INSPECTION).delete()
        AcceptedQuantity.objects.filter(lot_step=step).delete()
        rows = [
            AcceptedQuantity(lot_step=step, job=jobs[number], boards=n, recorded_by=person)
            for number, n in sorted(accepted.items())
        ]
        AcceptedQuantity.objects.bulk_create(rows)
        for number, n in rejected.items():
            if n and reason is not None:
                ScrapRecord.objects.create(
                    lot_step=step,
                    job=jobs[number],
                    boards=n,
                    reason=reason,
                    note="not accepted at final inspection",
                    source=ScrapRecord.Source.INSPECTION,
                    recorded_by=person,
                )
        audit.record(
            actor=person.user,
            action="acceptance.recorded",
            object_type="lot_step",
            object_id=step.pk,
            before=before or None,
            after={"lot": lot.code, "accepted": accepted, "rejected": rejected},
        )
        return rows


def _require_acceptance(step: LotStep) -> None:
    if is_final_inspection(step) and not AcceptedQuantity.objects.filter(lot_step=step).exists():
        raise Conflict(
            "Record the accepted quantity before signing off final inspection.",
            problems=[{"field": "accepted", "missing": ["accepted quantity"]}],
        )


def lot_yields(lot: Lot) -> list[Any]:
    """Boards in, scrapped and out at every step of the lot (shopfloor.core.yields)."""
    from django.db.models import Count, Sum

    from shopfloor.core import yields

    steps = list(lot.steps.order_by("position").values_list("pk", "name", "position"))
    totals: dict[int, dict[str, Any]] = {
        row["lot_step_id"]: dict(row)
        for row in ScrapRecord.objects.filter(lot_step__lot=lot)
        .values("lot_step_id")
        .annotate(
            boards=Sum("boards"),
            panels=Count("panel", distinct=True, filter=Q(panel_scrapped=True)),
        )
    }
    good_now = sum(lot_good_boards(lot).values())
    return yields.step_yields(
        good_now,
        [
            yields.StepScrap(
                key=position,
                name=name,
                boards_scrapped=int(totals.get(pk, {}).get("boards") or 0),
                panels_scrapped=int(totals.get(pk, {}).get("panels") or 0),
            )
            for pk, name, position in steps
        ],
    )


def boards_scrapped_on_live_panels(job_ids: Any) -> dict[int, int]:
    """Boards of each job scrapped while their panel runs on: crossed out at a step, or
    not accepted at final inspection (whole scrapped panels are counted by the panel)."""
    from django.db.models import Sum

    rows = (
        ScrapRecord.objects.filter(job_id__in=list(job_ids), panel_scrapped=False)
        .filter(Q(panel__isnull=True) | Q(panel__scrapped=False))
        .values("job_id")
        .annotate(n=Sum("boards"))
        .values_list("job_id", "n")
    )
    return {job_id: int(n or 0) for job_id, n in rows}
