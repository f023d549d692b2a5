"""Batch posts of readings: a gauge's file of results, or one lot step's sample set.

The batch use case of the floor app (kept beside services.py, which it builds on: the
same step lock, the same checks, the same parsing and judging as `record_reading`).
One transaction per lot step, so a refused item, or a lot that cannot be worked, never
blocks the items of another lot step. Inside a lot step every item is checked before
anything is written, then the readings, their audit entries and their outbox events are
each written with one multi-row INSERT. Each item carries the instrument's sample key:
a repeat of a key on the same lot step returns the stored reading as a duplicate.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from django.db import transaction
from django.db.models import Q

from shopfloor.audit import services as audit
from shopfloor.core import judging
from shopfloor.errors import Conflict, DomainError, InvalidInput
from shopfloor.floor import readings, services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant import people
from shopfloor.plant.models import Equipment, Person
from shopfloor.quality import outbox
from shopfloor.quality.models import OutboxEvent

MAX_ITEMS = 1000


@dataclass(frozen=True)
class BatchItem:
    """One reading of a batch, as parsed from the request (types already checked)."""

    index: int
    lot: str
    step: int | None
    sample_key: str
    reading: services.ReadingInput


@dataclass
class ItemResult:
    """What happened to one item: created, duplicate (the stored reading), or refused."""

    index: int
    sample_key: str
    status: str
    reason: str = ""
    problems: list[dict[str, Any]] = field(default_factory=list)
    reading: dict[str, Any] | None = None
    pending: Reading | None = field(default=None, repr=False)  # written at the end

    def as_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "index": self.index,
            "sample_key": self.sample_key,
            "status": self.status,
        }
        if self.reading is not None:
            out["reading"] = self.reading
        if self.status == "refused":
            out["reason"] = self.reason
            if self.problems:
                out["problems"] = self.problems
        return out


def summary(results: list[ItemResult]) -> dict[str, Any]:
    """The reply: counts per status, then every item in request order."""
    counts = {"created": 0, "duplicate": 0, "refused": 0}
    for r in results:
        counts[r.status] += 1
    return {**counts, "items": [r.as_dict() for r in results]}


def refused(index: int, key: str, reason: str, problems: Any = None) -> ItemResult:
    return ItemResult(index, key, "refused", reason, list(problems or []))


def record_batch(
    *,
    person: Person,
    items: list[BatchItem],
    via: str,
    check_access: Callable[[LotStep], None],
) -> list[ItemResult]:
    """Record a batch; one result per item, in the items' order.

    `check_access` is the caller's work-center rule (an instrument token is scoped to
    its own work center); it raises NotAllowed for a step the caller may not post to.
    """
    results: dict[int, ItemResult] = {}
    by_step: dict[int, list[BatchItem]] = defaultdict(list)
    steps: dict[int, LotStep] = {}
    resolved: dict[tuple[str, int | None], LotStep | DomainError] = {}
    for item in items:
        where = (item.lot.strip().upper(), item.step)
        if where not in resolved:
            resolved[where] = _resolve(item.lot, item.step, check_access)
        found = resolved[where]
        if isinstance(found, DomainError):
            results[item.index] = refused(item.index, item.sample_key, found.detail)
            continue
        steps[found.pk] = found
        by_step[found.pk].append(item)
    for step_id, group in by_step.items():
        for result in _record_step(person, steps[step_id], group, via):
            results[result.index] = result
    return [results[item.index] for item in items]


def _resolve(
    lot_code: str, step_id: int | None, check_access: Callable[[LotStep], None]
) -> LotStep | DomainError:
    try:
        if step_id is None:
            step = services.find_current_step(lot_code)
        else:
            lot = services.find_lot(lot_code)
            found = LotStep.objects.select_related("work_center").filter(pk=step_id, lot=lot)
            named = found.first()
            if named is None:
                return InvalidInput(f"Lot {lot.code} has no step with id {step_id}.")
            step = named
        check_access(step)
    except DomainError as exc:
        return exc
    return step


def _record_step(
    person: Person, target: LotStep, items: list[BatchItem], via: str
) -> list[ItemResult]:
    """One lot step's items in one transaction: check all, then three INSERTs."""
    try:
        with transaction.atomic():
            step, lot = services.lock_step(target.pk)
            people.check_assigned(person, step.work_center_id)
            services.require_workable(step, lot)
            if step.status != LotStep.Status.IN_PROGRESS:
                raise Conflict(f"Start '{step.name}' before recording readings.")
            results, new = _check_items(person, step, items, via)
            if new:
                _write(person, step, lot, new)
            for result in results:
                if result.pending is not None:
                    result.reading = _reading_reply(result.pending, lot.code)
            return results
    except DomainError as exc:
        return [refused(i.index, i.sample_key, exc.detail, exc.problems) for i in items]


def _check_items(
    person: Person, step: LotStep, items: list[BatchItem], via: str
) -> tuple[list[ItemResult], list[Reading]]:
    keys = [i.sample_key for i in items]
    quantities = {i.reading.quantity for i in items}
    stored_by_key: dict[str, Reading] = {}
    taken: dict[tuple[str, int], Reading] = {}
    for r in Reading.objects.filter(lot_step=step).filter(
        Q(sample_key__in=keys) | Q(quantity__in=quantities, superseded_by__isnull=True)
    ):
        if r.sample_key:
            stored_by_key[r.sample_key] = r
        if r.superseded_by_id is None:
            taken[(r.quantity, r.sample_index)] = r
    equipment: dict[int, Equipment | DomainError] = {}
    results: list[ItemResult] = []
    new: list[Reading] = []
    for item in items:
        data = item.reading
        stored = stored_by_key.get(item.sample_key)
        if stored is not None:
            results.append(_duplicate(item, stored, step))
            continue
        try:
            group, value, captured, confirmation = services.parse_reading(step, data)
            gauge = None
            if data.equipment_id is not None:
                if data.equipment_id not in equipment:
                    try:
                        equipment[data.equipment_id] = services.usable_equipment(
                            data.equipment_id, step.work_center_id
                        )
                    except DomainError as exc:
                        equipment[data.equipment_id] = exc
                found = equipment[data.equipment_id]
                if isinstance(found, DomainError):
                    raise found
                gauge = found
        except DomainError as exc:
            results.append(refused(item.index, item.sample_key, exc.detail, exc.problems))
            continue
        existing = taken.get((data.quantity, data.sample_index))
        if existing is not None:
            results.append(
                refused(
                    item.index,
                    item.sample_key,
                    f"Sample {data.sample_index} of {data.quantity} already has a reading "
                    f"({existing.value:g} {existing.unit}). To change it, record a correction "
                    "with a reason.",
                )
            )
            continue
        reading, message = readings.build_reading(
            step=step,
            person=person,
            data=data,
            group=group,
            value=value,
            captured=captured,
            equipment=gauge,
            via=via,
            confirmation=confirmation,
            sample_key=item.sample_key,
        )
        reading._judgement_message = message  # type: ignore[attr-defined]
        taken[(data.quantity, data.sample_index)] = reading
        stored_by_key[item.sample_key] = reading
        new.append(reading)
        results.append(ItemResult(item.index, item.sample_key, "created", pending=reading))
    _judge_sets(step, taken, new)
    return results, new


def _judge_sets(step: LotStep, taken: dict[tuple[str, int], Reading], new: list[Reading]) -> None:
    """A set completed by this batch is judged against its set criteria (mean, ...), the
    verdict stored on the set's newest reading, as `record_reading` does one by one."""
    for quantity in dict.fromkeys(r.quantity for r in new):
        group = services.quantity_plan(step, quantity)
        if not group.set_entries:
            continue
        members = {i: r for (q, i), r in taken.items() if q == quantity}
        values = {i: r.value for i, r in members.items()}
        verdict = judging.judge_set(values, group.set_entries, group.samples)
        if not verdict.complete:
            continue
        last = [r for r in new if r.quantity == quantity][-1]
        last.set_verdict = readings.set_verdict_record(verdict, values)
        last._set_members = [members[i] for i in sorted(members)]  # type: ignore[attr-defined]


def _duplicate(item: BatchItem, stored: Reading, step: LotStep) -> ItemResult:
    data = item.reading
    same = (
        stored.quantity == data.quantity
        and stored.sample_index == data.sample_index
        and stored.entered_value == str(data.value)[:40]
        and stored.entered_unit == data.unit[:20]
    )
    if not same:
        return refused(
            item.index,
            item.sample_key,
            f"Sample key {item.sample_key!r} was already used on this lot step for another "
            f"reading ({stored.quantity} sample {stored.sample_index}, {stored.entered_value} "
            f"{stored.entered_unit}). Give each measurement its own key.",
        )
    if stored._state.adding:  # a repeat inside this very batch (not saved yet): created once
        return ItemResult(item.index, item.sample_key, "duplicate", pending=stored)
    return ItemResult(
        item.index, item.sample_key, "duplicate", reading=_reading_reply(stored, step.lot.code)
    )


def _write(person: Person, step: LotStep, lot: Any, new: list[Reading]) -> None:
    Reading.objects.bulk_create(new)
    audit.record_many(
        person.user,
        [
            audit.Change(
                action="reading.recorded",
                object_type="reading",
                object_id=r.pk,
                after={
                    "lot": lot.code,
                    "step": step.code,
                    "quantity": r.quantity,
                    "value": r.value,
                    "unit": r.unit,
                    "sample": r.sample_index,
                    "in_window": r.in_window,
                    "source": r.window.get("source"),
                    "sample_key": r.sample_key,
                },
            )
            for r in new
        ],
    )
    events = OutboxEvent.objects.bulk_create(
        [
            OutboxEvent(
                kind="reading.recorded",
                payload={
                    "reading": r.pk,
                    "lot": lot.pk,
                    "lot_step": step.pk,
                    "in_window": r.in_window,
                    "message": r._judgement_message,  # type: ignore[attr-defined]
                    **_set_payload(r),
                },
            )
            for r in new
        ]
    )
    outbox.enqueue_many(
        urgent=[e.pk for e, r in zip(events, new, strict=True) if not _passes(r)],
        batched=[e.pk for e, r in zip(events, new, strict=True) if _passes(r)],
    )


def _passes(r: Reading) -> bool:
    return not outbox.urgent({"in_window": r.in_window, "set": r.set_verdict})


def _set_payload(r: Reading) -> dict[str, Any]:
    if r.set_verdict is None:
        return {}
    members = getattr(r, "_set_members", [])
    return {"set": {**r.set_verdict, "readings": sorted(m.pk for m in members)}}


def _reading_reply(reading: Reading, lot_code: str) -> dict[str, Any]:
    return {
        "id": reading.pk,
        "lot": lot_code,
        "step": reading.lot_step_id,
        "quantity": reading.quantity,
        "value": reading.value,
        "unit": reading.unit,
        "entered_value": reading.entered_value,
        "entered_unit": reading.entered_unit,
        "sample_index": reading.sample_index,
        "in_window": reading.in_window,
        "captured_at": reading.captured_at,
    }
