"""The one set of test helpers: walk a lot along its route, record readings, pick values
inside or outside a window, hold the outbox, issue instrument tokens. People, lots and the
small floor come from tests/factories.py.

`advance_to` is the one way to bring a lot to a step: by a set-up shortcut (the steps
before it marked done in the database: fast, for tests of what happens at the step) or,
with `walk=True`, through the real services step by step (for tests of the route).
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Callable
from typing import Any

from django.core.management import call_command
from django.utils import timezone

from shopfloor.core import judging
from shopfloor.floor import services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Equipment, Lot, Person
from shopfloor.quality.models import OutboxEvent
from tests.factories import PIN

# --- walking a lot along its route ----------------------------------------------


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


StepWanted = str | Callable[[LotStep], bool]


def measured(*, attribute: bool = False) -> Callable[[LotStep], bool]:
    """A step with a measurement plan: variable windows by default, or (attribute=True)
    one with an attribute count."""

    def want(step: LotStep) -> bool:
        return any(
            bool(m.get("attribute")) == attribute
            and (m.get("min") is not None or m.get("max") is not None)
            for m in step.plan
        )

    return want


def advance_to(
    lot: Lot,
    step: StepWanted,
    *,
    by: Person | None = None,
    walk: bool = False,
    start: bool = False,
) -> LotStep:
    """Bring `lot` to its first step matching `step` (a step code, or a test on the step)
    and return that step.

    By default a set-up shortcut: the steps before it are marked done straight in the
    database, the step has arrived and the lot is in process (the floor services have
    their own tests). With `walk=True` every earlier step is started, measured and signed
    through the real services by `by`. With `start=True` the step is then started through
    the service by `by`.
    """
    want = (lambda s: s.code == step) if isinstance(step, str) else step
    if walk:
        assert by is not None, "walking a route needs the person who signs each step"
        for _ in range(200):  # bounded: a route is far shorter than this
            current = LotStep.objects.current_for(lot)
            assert current is not None, "route ended before a matching step"
            if want(current):
                target = current
                break
            finish_step(by, current)
        else:
            raise AssertionError("no matching step within 200 steps")
    else:
        target = next((s for s in lot.steps.order_by("position") if want(s)), None)
        assert target is not None, f"no step {step!r} on this lot's route"
        now = timezone.now()
        LotStep.objects.filter(lot=lot, position__lt=target.position).update(
            status=LotStep.Status.DONE, started_at=now, completed_at=now
        )
        LotStep.objects.filter(pk=target.pk).update(arrived_at=now)
        Lot.objects.filter(pk=lot.pk).update(status=Lot.Status.IN_PROCESS, started_at=now)
    if start:
        assert by is not None, "starting a step needs the person who starts it"
        services.start_step(person=by, lot_step_id=target.pk)
    lot.refresh_from_db()
    target.refresh_from_db()
    return target


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


def one_entry_per_quantity(plan: list[dict]) -> list[dict]:
    """A plan's entries, one per quantity: a quantity judged several ways (the set's mean
    and each reading) is still sampled once per sample number."""
    seen: dict[str, dict] = {}
    for m in plan:
        seen.setdefault(m["quantity"], m)
    return list(seen.values())


# --- instruments and gauges -----------------------------------------------------


def gauge_at(step: LotStep, code: str = "XRF-T1") -> Equipment:
    return Equipment.objects.create(
        work_center=step.work_center,
        code=code,
        name="Test thickness gauge",
        is_gauge=True,
        calibration_due=timezone.localdate() + dt.timedelta(days=60),
    )


def issue_token(name: str, work_center_code: str) -> str:
    out = io.StringIO()
    call_command("issue_instrument_token", name, work_center_code, stdout=out)
    return out.getvalue().strip().splitlines()[-1]


# --- readings and their outbox events (alert, disposition, series, worker tests) ---

PLATING = "pattern_plate_copper"  # surface_copper 33.75-57.5 um, hole_wall_copper >= 20 um


def start_at(floor: Any, lot: Lot, code: str = PLATING) -> LotStep:
    """The lot at step `code`, started by the small floor's operator."""
    return advance_to(lot, code, by=floor.personas["operator"], start=True)


def record(
    floor: Any, step: LotStep, quantity: str, value: float, unit: str = "um", sample: int = 1
) -> Reading:
    return services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=step.pk,
        # out-of-window values here are deliberate (the typo guard has its own tests)
        data=services.ReadingInput(
            quantity=quantity,
            value=value,
            unit=unit,
            sample_index=sample,
            confirm_out_of_window=True,
        ),
    )


def event_for(reading: Reading) -> OutboxEvent:
    return OutboxEvent.objects.get(kind="reading.recorded", payload__reading=reading.pk)
