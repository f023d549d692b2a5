"""Readings: parse, guard against typos, judge, store with audit and outbox event,
and correct. The API, the tablet and batch posts share these functions.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Callable
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from django.db import connection, transaction
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.core import judging, units
from shopfloor.errors import Conflict, InvalidInput, NotFound
from shopfloor.floor import idempotency
from shopfloor.floor.idempotency import Claim, Outcome
from shopfloor.floor.lookups import (
    MAX_CAPTURE_AGE,
    MAX_CLOCK_SKEW,
    find_current_step,
    find_lot,
    lock_step,
    require_workable,
    usable_equipment,
)
from shopfloor.floor.models import (
    LotStep,
    Reading,
)
from shopfloor.floor.quantities import lot_good_boards
from shopfloor.plant.models import (
    Equipment,
    Lot,
    Person,
)
from shopfloor.plant.people import check_assigned
from shopfloor.quality import outbox
from shopfloor.quality.models import OutboxEvent

log = logging.getLogger("shopfloor.floor")


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
    # Defectives out of n (units.DEFECTIVES_QUANTITIES): the items tested; the value is
    # the number that failed. None: the lot's good boards at the step.
    tested: int | None = None


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


def parse_reading(
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
    tested_count(step, data, value)  # refuses a bad "k of n" before anything is saved
    return group, value, captured, confirmation


MAX_TESTED = 1_000_000


def tested_count(step: LotStep, data: ReadingInput, failed: float) -> int | None:
    """n of a "failed k of n tested" reading: as given, or the lot's good boards now
    (100 % electrical test of bare boards is common practice). None for any other
    quantity. Refuses a count that is not whole, an n below 1, or k above n."""
    if data.quantity not in units.DEFECTIVES_QUANTITIES:
        if data.tested is not None:
            raise InvalidInput(
                f"'tested' applies only to {', '.join(sorted(units.DEFECTIVES_QUANTITIES))} "
                f"(defectives out of n), not to {data.quantity}.",
                problems=[{"field": "tested", "value": data.tested}],
            )
        return None
    if failed != int(failed):
        raise InvalidInput(
            f"{data.quantity}: count whole boards that failed, not {data.value}.",
            problems=[{"field": "value", "value": str(data.value), "allowed": "0, 1, 2, ..."}],
        )
    n = data.tested
    if n is None:
        n = sum(lot_good_boards(step.lot).values())
        if n < 1:
            raise InvalidInput(
                f"{data.quantity}: say how many boards were tested (the lot has no good "
                "boards on record).",
                problems=[{"field": "tested", "value": None, "allowed": f"1..{MAX_TESTED}"}],
            )
    elif isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= MAX_TESTED:
        raise InvalidInput(
            f"Boards tested must be a whole number from 1 to {MAX_TESTED:,}, not {n!r}.",
            problems=[{"field": "tested", "value": n, "allowed": f"1..{MAX_TESTED}"}],
        )
    if failed > n:
        raise InvalidInput(
            f"{data.quantity}: {int(failed)} failed is more than the {n} boards tested. "
            "Nothing was saved; check both numbers.",
            problems=[
                {"field": "value", "value": str(data.value), "allowed": f"0..{n}"},
                {"field": "tested", "value": n},
            ],
        )
    return n


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
    verdict. A held lot takes the rest of the set at the held step. On PostgreSQL this
    is the lean path of `reading_sql` (three statements between BEGIN and COMMIT).
    """
    if connection.vendor == "postgresql":
        from shopfloor.floor import reading_sql  # a real circle: it builds on this module

        recorded = reading_sql.record(person=person, data=data, via=via, step_id=lot_step_id)
        assert recorded.reading is not None  # no Idempotency-Key: never a replay
        return recorded.reading
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        require_workable(step, lot, held_step_readings=True)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording readings.")
        group, value, captured, confirmation = parse_reading(step, data)
        equipment = None
        if data.equipment_id is not None:
            equipment = usable_equipment(data.equipment_id, step.work_center_id)
        current = _current_set(step, data.quantity)  # also the duplicate-sample check
        refuse_taken_sample(data, current)
        reading = _store_reading(
            step, lot, person, data, group, value, captured, equipment, via, confirmation, current
        )
        return reading


def record_reading_once(
    *,
    person: Person,
    data: ReadingInput,
    via: str,
    claim: Claim | None,
    reply: Callable[[Reading], dict[str, Any]],
    lot_code: str | None = None,
    lot_step_id: int | None = None,
    check_access: Callable[[LotStep], None] | None = None,
) -> Outcome:
    """The reading POST: record a reading at most once per Idempotency-Key (`claim`).

    The step is `lot_step_id`, or the current step of `lot_code` (both: the step must be
    the lot's); `check_access` is the caller's work-center rule (instrument tokens);
    `reply` makes the reply body stored with the key. A repeat gets the stored reply.
    """
    if connection.vendor == "postgresql":
        from shopfloor.floor import reading_sql  # a real circle: it builds on this module

        return reading_sql.record(
            person=person,
            data=data,
            via=via,
            lot_code=lot_code,
            step_id=lot_step_id,
            check_access=check_access,
            claim=claim,
            reply=reply,
        ).outcome

    def action() -> tuple[int, dict[str, Any]]:
        step = resolve_step(lot_code, lot_step_id)
        if check_access is not None:
            check_access(step)
        reading = record_reading(person=person, lot_step_id=step.pk, data=data, via=via)
        return 201, reply(reading)

    if claim is None:
        status, body = action()
        return Outcome(status, body, False)
    return idempotency.run(
        user=person.user, key=claim.key, request_fingerprint=claim.fingerprint, action=action
    )


def resolve_step(lot_code: str | None, lot_step_id: int | None) -> LotStep:
    """The step a reading names: by id (of the lot, when a lot code is given too), or the
    current step of the lot code. Raises NotFound or Conflict saying what is wrong."""
    if lot_step_id is None:
        return find_current_step(lot_code or "")
    if lot_code is None:
        step = LotStep.objects.select_related("lot", "work_center").filter(pk=lot_step_id).first()
        if step is None:
            raise NotFound(f"No lot step {lot_step_id}.")
        return step
    lot = find_lot(lot_code)
    found = LotStep.objects.select_related("lot", "work_center").filter(pk=lot_step_id, lot=lot)
    step = found.first()
    if step is None:
        raise NotFound(f"Lot {lot.code} has no step with id {lot_step_id}.")
    return step


def refuse_taken_sample(data: ReadingInput, current: dict[int, tuple[int, float]]) -> None:
    """A second value for the same sample is a correction, which needs a reason."""
    existing = current.get(data.sample_index)
    if existing is not None:
        old_value = units.format_value(data.quantity, existing[1])
        raise Conflict(
            f"Sample {data.sample_index} of {data.quantity} already has a reading "
            f"({old_value}). To change it, record a correction with a reason."
        )


def build_reading(
    *,
    step: LotStep,
    person: Person,
    data: ReadingInput,
    group: judging.QuantityPlan,
    value: float,
    captured: datetime,
    equipment: Equipment | None,
    via: str,
    confirmation: str,
    sample_key: str = "",
) -> tuple[Reading, str]:
    """The Reading row of one parsed input, judged against its each-reading criteria
    (unsaved; the set verdict is the caller's), and the judgement's plain words. The one
    place the row's fields are filled: single readings, corrections and batch posts."""
    judgement = judging.judge_each(value, group.entries)
    reading = Reading(
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
        window=group.window(),
        in_window=judgement.in_window,
        via=via,
        sample_key=sample_key,
        confirmation=confirmation,
        spec_key=judging.spec_key(group.entries),
        tested=tested_count(step, data, value),
    )
    return reading, judgement.message


def set_verdict_record(
    verdict: judging.SetVerdict, values: dict[int, float]
) -> dict[str, Any] | None:
    """What a reading that completes its sample set stores as the set's verdict (None
    while the set is incomplete)."""
    if not verdict.complete:
        return None
    return {
        "in_window": verdict.in_window,
        "message": verdict.message,
        "figures": [
            {"applies_to": v.applies_to, "figure": v.figure, "in_window": v.in_window}
            for v in verdict.verdicts
        ],
        "values": {str(i): values[i] for i in sorted(values)},
    }


@dataclass
class Prepared:
    """A reading ready to write: the row (with its set verdict), the outbox event's
    payload and the audit entry's content."""

    reading: Reading
    payload: dict[str, Any]
    audit_after: dict[str, Any]


def prepare_reading(
    *,
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
    reading_id: int | None,
    corrected: int | None = None,
) -> Prepared:
    """Build the row, judge the set it completes, and make the event and audit content.

    `reading_id`: the id the row will get (the lean path takes it from the sequence
    first); None when the row is saved first and `finish_prepared` fills it in.
    """
    reading, message = build_reading(
        step=step,
        person=person,
        data=data,
        group=group,
        value=value,
        captured=captured,
        equipment=equipment,
        via=via,
        confirmation=confirmation,
    )
    reading.pk = reading_id
    members = {i: v for i, (_, v) in current.items()}
    members[data.sample_index] = value
    if group.set_entries:
        reading.set_verdict = set_verdict_record(
            judging.judge_set(members, group.set_entries, group.samples), members
        )
    payload: dict[str, Any] = {
        "reading": reading_id,
        "lot": lot.pk,
        "lot_step": step.pk,
        "in_window": reading.in_window,
        "message": message,
    }
    earlier = [pk for pk, _ in current.values()]
    if reading.set_verdict is not None:
        payload["set"] = {**reading.set_verdict, "readings": earlier}
    if corrected is not None or lot.on_hold:
        # what the handler needs to cite the set on the NCR and to see whether a
        # correction brought it back inside
        payload["set_so_far"] = earlier
        payload["each_in_window"] = all(
            judging.judge_each(v, group.entries).in_window for v in members.values()
        )
    if corrected is not None:
        payload["corrects"] = corrected
    after = {
        "lot": lot.code,
        "step": step.code,
        "quantity": reading.quantity,
        "value": value,
        "unit": reading.unit,
        "sample": reading.sample_index,
        "in_window": reading.in_window,
        "source": reading.window.get("source"),
        **({"confirmed": confirmation} if confirmation else {}),
        **({"set_in_window": payload["set"]["in_window"]} if "set" in payload else {}),
    }
    prepared = Prepared(reading, payload, after)
    if reading_id is not None:
        finish_prepared(prepared)
    return prepared


def finish_prepared(prepared: Prepared) -> None:
    """Put the reading's id into the event's lists of the set's readings."""
    pk = prepared.reading.pk
    payload = prepared.payload
    payload["reading"] = pk
    for key in ("set", "set_so_far"):
        holder = payload.get(key)
        if isinstance(holder, dict):
            holder["readings"] = sorted([*holder["readings"], pk])
        elif isinstance(holder, list):
            payload[key] = sorted([*holder, pk])


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
    """The ORM path (corrections, and databases other than PostgreSQL)."""
    prepared = prepare_reading(
        step=step,
        lot=lot,
        person=person,
        data=data,
        group=group,
        value=value,
        captured=captured,
        equipment=equipment,
        via=via,
        confirmation=confirmation,
        current=current,
        reading_id=None,
        corrected=corrected,
    )
    reading = prepared.reading
    reading.save(force_insert=True)
    finish_prepared(prepared)
    audit.record(
        actor=person.user,
        action="reading.recorded",
        object_type="reading",
        object_id=reading.pk,
        after=prepared.audit_after,
    )
    event = OutboxEvent.objects.create(kind="reading.recorded", payload=prepared.payload)
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
        step, lot = lock_step(old.lot_step_id)
        check_assigned(person, step.work_center_id)
        require_workable(step, lot, held_step_readings=True)
        data = ReadingInput(
            quantity=old.quantity,
            value=value,
            unit=unit,
            sample_index=old.sample_index,
            position=old.position,
            equipment_id=old.equipment_id,
            captured_at=captured_at,
            confirm_out_of_window=confirm_out_of_window,
            tested=old.tested,
        )
        group, canonical, captured, confirmation = parse_reading(step, data)
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
