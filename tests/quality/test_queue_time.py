"""Queue-time limits and due dates through the beat checks, with time travel.

The bond-treatment step of the library routing has a 480 min queue-time limit before
lamination (oxide/bond film ages; shop practice). Warning at 80 % of the limit and the
3x flow factor for due dates are the planning rules of shopfloor.core.schedule (common
practice: plan with a queue allowance on top of run time).
"""

from __future__ import annotations

import datetime as dt

import pytest
import time_machine
from django.utils import timezone

from shopfloor.errors import Conflict, InvalidInput, NotAllowed
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot
from shopfloor.quality.models import Alert, Hold, Nonconformance
from shopfloor.quality.services import deadlines
from tests import helpers

pytestmark = pytest.mark.django_db

T0 = dt.datetime(2026, 3, 2, 6, 0, tzinfo=dt.UTC)
BOND = "bond_treatment_c1"


def test_queue_time_warns_then_holds_once(floor):
    with time_machine.travel(T0, tick=False) as clock:
        step = helpers.advance_to(floor.lot, BOND)
        assert step.queue_time_limit_minutes == 480
        clock.shift(dt.timedelta(minutes=380))  # 79 % of 480: nothing yet
        assert deadlines.check_queue_times()["warnings"] == 0
        clock.shift(dt.timedelta(minutes=5))  # 385 min >= 384 (80 %)
        assert deadlines.check_queue_times()["warnings"] == 1
        deadlines.check_queue_times()
        warning = Alert.objects.get(kind="queue_time_warning")
        assert warning.severity == "warning" and warning.lot_step_id == step.pk
        assert not Lot.objects.get(pk=floor.lot.pk).on_hold
        clock.shift(dt.timedelta(minutes=96))  # 481 min > 480
        assert deadlines.check_queue_times()["exceeded"] == 1
        deadlines.check_queue_times()
        exceeded = Alert.objects.get(kind="queue_time_exceeded")
        assert exceeded.severity == "critical"
        assert Lot.objects.get(pk=floor.lot.pk).on_hold
        assert Hold.objects.get().alert_id == exceeded.pk
        assert Nonconformance.objects.get().lot_step_id == step.pk


def test_started_step_is_not_checked(floor):
    with time_machine.travel(T0, tick=False) as clock:
        step = helpers.advance_to(floor.lot, BOND)
        LotStep.objects.filter(pk=step.pk).update(status="in_progress", started_at=timezone.now())
        clock.shift(dt.timedelta(hours=10))
        assert deadlines.check_queue_times()["checked"] == 0
        assert Alert.objects.count() == 0


def test_supervisor_releases_warning_with_reason(floor):
    supervisor = floor.personas["supervisor"]
    with time_machine.travel(T0, tick=False) as clock:
        step = helpers.advance_to(floor.lot, BOND)
        clock.shift(dt.timedelta(minutes=400))
        deadlines.check_queue_times()
        with pytest.raises(NotAllowed):
            deadlines.release_queue_warning(floor.personas["operator"], step.pk, "fine")
        with pytest.raises(InvalidInput):
            deadlines.release_queue_warning(supervisor, step.pk, "  ")
        deadlines.release_queue_warning(supervisor, step.pk, "Press loads in 30 min")
        step.refresh_from_db()
        assert step.queue_warning_released_reason == "Press loads in 30 min"
        assert Alert.objects.get(kind="queue_time_warning").closed_at is not None
        with pytest.raises(Conflict):
            deadlines.release_queue_warning(supervisor, step.pk, "again")
        # The limit itself still protects the product.
        clock.shift(dt.timedelta(minutes=100))
        assert deadlines.check_queue_times()["exceeded"] == 1


def test_due_dates_at_risk_then_late(floor):
    job = floor.job
    Job.objects.filter(pk=job.pk).update(due_date=dt.date(2026, 3, 12))
    with time_machine.travel(T0, tick=False) as clock:
        helpers.advance_to(floor.lot, "pattern_plate_copper")
        remaining = deadlines.job_remaining_minutes(job)
        expected = sum(
            LotStep.objects.filter(lot=floor.lot, position__gte=200).values_list(
                "standard_minutes", flat=True
            )
        )
        assert remaining == expected
        # due end of 12 March (UTC site); at risk once now + 3 x remaining passes it
        due = dt.datetime(2026, 3, 13, tzinfo=dt.UTC)
        assert deadlines.check_due_dates()["at_risk"] == 0
        clock.move_to(due - dt.timedelta(minutes=3 * remaining - 1))
        assert deadlines.check_due_dates()["at_risk"] == 1
        deadlines.check_due_dates()
        assert Alert.objects.filter(kind="due_date_risk", job=job).count() == 1
        clock.move_to(due + dt.timedelta(minutes=1))
        assert deadlines.check_due_dates()["late"] == 1
        deadlines.check_due_dates()
        assert Alert.objects.get(kind="late").severity == "critical"
