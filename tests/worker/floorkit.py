"""Helpers shared by the alert, disposition, series, worker and fault tests.

`advance_to` marks the steps before a target step done straight in the database (test
set-up only; the floor services are tested elsewhere), so a test can start and record
at a measured step without signing off twenty earlier steps.
"""

from __future__ import annotations

from typing import Any

from django.utils import timezone

from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Lot
from shopfloor.quality.models import OutboxEvent
from tests import factories

PLATING = "pattern_plate_copper"  # surface_copper 33.75-57.5 um, hole_wall_copper >= 20 um


def advance_to(lot: Lot, code: str) -> LotStep:
    target = lot.steps.get(code=code)
    now = timezone.now()
    LotStep.objects.filter(lot=lot, position__lt=target.position).update(
        status=LotStep.Status.DONE, started_at=now, completed_at=now
    )
    LotStep.objects.filter(pk=target.pk).update(arrived_at=now)
    Lot.objects.filter(pk=lot.pk).update(status=Lot.Status.IN_PROCESS, started_at=now)
    target.refresh_from_db()
    return target


def start_at(floor: Any, lot: Lot, code: str = PLATING) -> LotStep:
    step = advance_to(lot, code)
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)
    step.refresh_from_db()
    return step


def record(
    floor: Any, step: LotStep, quantity: str, value: float, unit: str = "um", sample: int = 1
) -> Reading:
    return floor_services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=step.pk,
        # out-of-window values here are deliberate (the typo guard has its own tests)
        data=floor_services.ReadingInput(
            quantity=quantity,
            value=value,
            unit=unit,
            sample_index=sample,
            confirm_out_of_window=True,
        ),
    )


def event_for(reading: Reading) -> OutboxEvent:
    return OutboxEvent.objects.get(kind="reading.recorded", payload__reading=reading.pk)


def new_lot(floor: Any, code: str | None = None, panels: int = 2) -> Lot:
    return factories.make_lot(floor.routing, floor.job, panels=panels, code=code)
