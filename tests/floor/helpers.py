"""Helpers for the floor tests: walk a lot along its route through the real services."""

from __future__ import annotations

from shopfloor.core import judging
from shopfloor.floor import services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, Person
from tests.factories import PIN


def finish_step(person: Person, step: LotStep) -> None:
    """Start and sign one step, recording in-window readings (each window's middle)."""
    if step.status != LotStep.Status.IN_PROGRESS:
        services.start_step(person=person, lot_step_id=step.pk)
    for group in judging.group_plan(step.plan):
        m = group.window()
        for sample in range(1, group.samples + 1):
            services.record_reading(
                person=person,
                lot_step_id=step.pk,
                data=services.ReadingInput(
                    quantity=m["quantity"],
                    value=in_window_value(m),
                    unit=m["unit"],
                    sample_index=sample,
                ),
            )
    supply_materials(person, step)
    if services.is_final_inspection(step):
        accept_all(person, step)
    services.complete_step(person=person, lot_step_id=step.pk, pin=PIN)


def supply_materials(person: Person, step: LotStep) -> None:
    """Record a fresh material lot of every kind the step consumes (made on the fly)."""
    import datetime as dt

    from django.utils import timezone

    from shopfloor.plant.models import MaterialLot

    for kind in step.materials or []:
        material, _ = MaterialLot.objects.get_or_create(
            code=f"TEST-{kind.upper()}",
            defaults={
                "kind": kind,
                "description": f"test {kind}",
                "received_on": timezone.localdate() - dt.timedelta(days=1),
            },
        )
        services.record_material(person=person, lot_step_id=step.pk, code=material.code)


def accept_all(person: Person, step: LotStep) -> None:
    """Final inspection accepts every good board on the lot."""
    from shopfloor.plant.models import Job

    good = services.lot_good_boards(step.lot)
    numbers = dict(Job.objects.filter(pk__in=list(good)).values_list("pk", "number"))
    services.record_acceptance(
        person=person,
        lot_step_id=step.pk,
        accepted={numbers[job_id]: n for job_id, n in good.items()},
    )


def _tightest(m: dict) -> tuple:
    """The narrowest limits over every criterion of a window (mean, each reading, ...)."""
    entries = [e for e in (m.get("criteria") or [m]) if e.get("applies_to") != "range"]
    lows = [e["min"] for e in entries if e.get("min") is not None]
    highs = [e["max"] for e in entries if e.get("max") is not None]
    return (max(lows) if lows else None), (min(highs) if highs else None)


def in_window_value(m: dict) -> float:
    """A value inside every criterion of the window (a plan entry or a reading window)."""
    (lo, hi), target = _tightest(m), m.get("target")
    if target is not None:
        return float(target)
    if lo is not None and hi is not None:
        return (lo + hi) / 2
    if lo is not None:
        return float(lo) * 1.1 + 1
    if hi is not None:
        return float(hi) / 2 if hi > 0 else 0.0
    return 1.0


def out_of_window_value(m: dict) -> float:
    lo, hi = m.get("min"), m.get("max")
    if lo is not None and lo > 0:
        return float(lo) / 2
    if hi is not None:
        return float(hi) + 1 + abs(float(hi))
    raise AssertionError(f"window {m} has no limit to fall outside")


def advance_to(lot: Lot, person: Person, want) -> LotStep:
    """Complete steps in routing order until `want(step)` holds for the current step."""
    for _ in range(200):  # bounded: a route is far shorter than this
        step = LotStep.objects.current_for(lot)
        assert step is not None, "route ended before a matching step"
        if want(step):
            return step
        finish_step(person, step)
    raise AssertionError("no matching step within 200 steps")


def advance_to_measured_step(lot: Lot, person: Person, *, attribute: bool = False) -> LotStep:
    """The first step with a measurement plan: variable windows by default, or (with
    attribute=True) one with an attribute count."""

    def want(step: LotStep) -> bool:
        return any(
            bool(m.get("attribute")) == attribute
            and (m.get("min") is not None or m.get("max") is not None)
            for m in step.plan
        )

    return advance_to(lot, person, want)


def advance_to_code(lot: Lot, person: Person, code: str) -> LotStep:
    return advance_to(lot, person, lambda step: step.code == code)


def park_outbox(monkeypatch) -> list[int]:
    """Leave outbox events unpublished, as if the broker were down (the relay sends them
    later). The alert worker has its own tests; here only the floor's side is checked."""
    from shopfloor.quality import outbox

    parked: list[int] = []

    def publish(event_id: int) -> bool:
        parked.append(event_id)
        return False

    def publish_batch(event_ids: list[int]) -> bool:
        parked.extend(event_ids)
        return False

    monkeypatch.setattr(outbox, "publish", publish)
    monkeypatch.setattr(outbox, "publish_batch", publish_batch)
    return parked


def skip_to_measured_step(lot: Lot, *, attribute: bool = False) -> LotStep:
    """Set-up shortcut: mark the steps before the first measured one done (no services)."""
    from django.utils import timezone

    for step in lot.steps.order_by("position"):
        if any(
            bool(m.get("attribute")) == attribute
            and (m.get("min") is not None or m.get("max") is not None)
            for m in step.plan
        ):
            lot.steps.filter(position__lt=step.position).update(status=LotStep.Status.DONE)
            step.arrived_at = timezone.now()
            step.save(update_fields=["arrived_at"])
            return step
    raise AssertionError("no measured step on this route")


def one_entry_per_quantity(plan: list[dict]) -> list[dict]:
    """A plan's entries, one per quantity: a quantity judged several ways (the set's mean
    and each reading) is still sampled once per sample number."""
    seen: dict[str, dict] = {}
    for m in plan:
        seen.setdefault(m["quantity"], m)
    return list(seen.values())
