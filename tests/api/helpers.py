"""Shared set-up for API tests: move a lot to a measured step through the real services."""

from __future__ import annotations

import datetime as dt
import io

from django.core.management import call_command
from django.utils import timezone

from shopfloor.floor import services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Equipment, Lot, Person


def advance_to(lot: Lot, code: str, person: Person) -> LotStep:
    """Mark the steps before `code` done (test set-up only) and start `code` via the service.

    Walking every earlier step through the services is covered by the floor tests; here it
    would only make each API test slower.
    """
    target = LotStep.objects.get(lot=lot, code=code)
    LotStep.objects.filter(lot=lot, position__lt=target.position).update(
        status=LotStep.Status.DONE, completed_at=timezone.now()
    )
    services.start_step(person=person, lot_step_id=target.pk)
    lot.refresh_from_db()
    return LotStep.objects.get(pk=target.pk)


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
