"""Shared set-up for API tests: move a lot to a measured step through the real services."""

from __future__ import annotations

import datetime as dt
import io

from django.core.management import call_command
from django.utils import timezone

from shopfloor.floor import services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Equipment, Lot, Person
from tests.factories import PIN


def advance_to(lot: Lot, code: str, person: Person) -> LotStep:
    """Start and sign off every step before `code` (attribute checks read 0), start `code`."""
    while True:
        step = services.current_step(lot)
        assert step is not None, f"lot finished before reaching {code}"
        services.start_step(person=person, lot_step_id=step.pk)
        if step.code == code:
            return LotStep.objects.get(pk=step.pk)
        for m in step.plan:
            for sample in range(1, int(m.get("samples") or 1) + 1):
                services.record_reading(
                    person=person, lot_step_id=step.pk,
                    data=services.ReadingInput(quantity=m["quantity"],
                                               value=m.get("target") or m.get("min") or 0,
                                               unit=m["unit"], sample_index=sample),
                )
        services.complete_step(person=person, lot_step_id=step.pk, pin=PIN)
        lot.refresh_from_db()


def gauge_at(step: LotStep, code: str = "XRF-T1") -> Equipment:
    return Equipment.objects.create(
        work_center=step.work_center, code=code, name="Test thickness gauge", is_gauge=True,
        calibration_due=timezone.localdate() + dt.timedelta(days=60),
    )


def issue_token(name: str, work_center_code: str) -> str:
    out = io.StringIO()
    call_command("issue_instrument_token", name, work_center_code, stdout=out)
    return out.getvalue().strip().splitlines()[-1]
