"""Deadlines: queue-time limits and due dates, checked on the beat.

A step waiting past its queue-time limit holds the lot with an NCR (the limit protects the
product); before that, a warning alert goes to the work center, which a supervisor may
release with a reason (`release_queue_warning`). A job whose finish forecast (or, without
a fresh forecast, the flow-factor rule of the pure core's schedule) passes its due date
raises an at-risk or late alert.
"""

from __future__ import annotations

import logging
from datetime import date, datetime, time, timedelta
from zoneinfo import ZoneInfo

from django.conf import settings
from django.db import transaction
from django.db.models import Sum
from django.utils import timezone

from shopfloor import access
from shopfloor.audit import services as audit
from shopfloor.core import schedule
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.planning.services import job_projections
from shopfloor.plant.models import Job, Lot, Person
from shopfloor.quality.models import Alert
from shopfloor.quality.services.alerts import (
    create_alert,
    hold_lot,
    job_of_lot,
    notify_after_commit,
    open_ncr,
)

log = logging.getLogger("shopfloor.quality")

CHECK_BATCH = 1000

ACTIVE_LOT = Lot.ACTIVE_STATUSES


# --- queue times and due dates --------------------------------------------------------


def check_queue_times(now: datetime | None = None) -> dict[str, int]:
    """Warn before a queue-time limit; once exceeded, alert, open an NCR and hold the lot.

    Only steps that are waiting in an active lot with a limit and an arrival time count.
    Each step is judged in its own short transaction; dedupe keys make reruns harmless.
    """
    now = now or timezone.now()
    ids = list(
        LotStep.objects.filter(
            queue_time_limit_minutes__isnull=False,
            arrived_at__isnull=False,
            started_at__isnull=True,
            status=LotStep.Status.WAITING,
            lot__status=Lot.Status.IN_PROCESS,
        )
        .order_by("arrived_at")
        .values_list("pk", flat=True)[:CHECK_BATCH]
    )
    counts = {"checked": len(ids), "warnings": 0, "exceeded": 0}
    for step_id in ids:
        result = _check_queue_step(step_id, now)
        if result:
            counts[result] += 1
    return counts


def _check_queue_step(step_id: int, now: datetime) -> str | None:
    with transaction.atomic():
        step = (
            LotStep.objects.select_for_update(no_key=True)
            .select_related("work_center")
            .filter(pk=step_id, status=LotStep.Status.WAITING, started_at__isnull=True)
            .first()
        )
        if step is None or step.arrived_at is None or step.queue_time_limit_minutes is None:
            return None
        state = schedule.queue_state(step.arrived_at, now, step.queue_time_limit_minutes)
        if state.exceeded:
            lot = Lot.objects.select_for_update(no_key=True).get(pk=step.lot_id)
            message = (
                f"Lot {lot.code} waited {state.minutes_waited:.0f} min for '{step.name}' at "
                f"{step.work_center.name}; the queue-time limit is {state.limit_minutes} min. "
                "The lot is on hold until quality dispositions the NCR."
            )
            alert = create_alert(
                kind=Alert.Kind.QUEUE_EXCEEDED,
                severity=Alert.Severity.CRITICAL,
                dedupe_key=f"queue_exceeded:{step.pk}",
                lot=lot,
                lot_step=step,
                job=job_of_lot(lot),
                work_center=step.work_center,
                message=message,
                audit_after={"lot": lot.code, "waited_min": round(state.minutes_waited)},
            )
            if alert is None:
                return None
            ncr = open_ncr(lot, step, alert, message)
            hold_lot(lot, step, alert, ncr, "Queue-time limit exceeded")
            notify_after_commit(alert.pk)
            return "exceeded"
        if state.warn and not step.queue_warning_released_reason:
            left = state.limit_minutes - state.minutes_waited
            alert = create_alert(
                kind=Alert.Kind.QUEUE_WARNING,
                severity=Alert.Severity.WARNING,
                dedupe_key=f"queue_warning:{step.pk}",
                lot_id=step.lot_id,
                lot_step=step,
                work_center=step.work_center,
                message=(
                    f"'{step.name}' at {step.work_center.name} must start within "
                    f"{max(left, 0):.0f} min (queue-time limit {state.limit_minutes} min); "
                    "after that the lot goes on hold."
                ),
                audit_after={"lot_step": step.pk},
            )
            if alert is None:
                return None
            notify_after_commit(alert.pk)
            return "warnings"
    return None


def release_queue_warning(person: Person, lot_step_id: int, reason: str) -> LotStep:
    """A supervisor accepts a queue-time warning (closes it and stops repeats).

    It does not lift the limit itself: if the step still has not started when the limit
    passes, the lot is held as usual, because the limit protects the product.
    """
    if not access.is_supervising(person):
        raise NotAllowed("Only a supervisor can release a queue-time warning.")
    reason = (reason or "").strip()
    if len(reason) < 3:
        raise InvalidInput(
            "Releasing a queue-time warning needs a reason (at least 3 "
            "characters) saying why waiting longer is acceptable."
        )
    if len(reason) > 300:
        raise InvalidInput("The reason may be at most 300 characters.")
    with transaction.atomic():
        step = LotStep.objects.select_for_update(no_key=True).filter(pk=lot_step_id).first()
        if step is None:
            raise NotFound(f"No lot step {lot_step_id}.")
        if step.queue_time_limit_minutes is None:
            raise Conflict(f"'{step.name}' has no queue-time limit, so there is no warning.")
        if step.queue_warning_released_reason:
            raise Conflict(
                f"The queue-time warning of '{step.name}' was already released: "
                f"{step.queue_warning_released_reason}"
            )
        step.queue_warning_released_reason = reason
        step.save(update_fields=["queue_warning_released_reason"])
        closed = Alert.objects.filter(
            dedupe_key=f"queue_warning:{step.pk}", closed_at__isnull=True
        ).update(closed_at=timezone.now())
        audit.record(
            actor=person.user,
            action="queue_warning.released",
            object_type="lot_step",
            object_id=step.pk,
            after={"reason": reason, "alerts_closed": closed},
        )
        return step


def due_at(due_date: date) -> datetime:
    """A job is due by the end of its due date in the site's time zone."""
    tz = ZoneInfo(getattr(settings, "SITE_TIME_ZONE", "UTC") or "UTC")
    return datetime.combine(due_date + timedelta(days=1), time.min, tzinfo=tz)


def job_remaining_minutes(job: Job) -> float | None:
    """Standard minutes left on the job's slowest active lot (lots run side by side);
    None when the job has no active lot."""
    lots = Lot.objects.filter(panels__jobs=job, status__in=ACTIVE_LOT).distinct()
    if not lots.exists():
        return None
    per_lot = (
        LotStep.objects.filter(lot__in=lots)
        .open()
        .values("lot")
        .annotate(total=Sum("standard_minutes"))
    )
    return float(max((row["total"] or 0 for row in per_lot), default=0))


def check_due_dates(now: datetime | None = None) -> dict[str, int]:
    """Raise one alert per job and state (at risk, late) using shopfloor.core.schedule: from the
    job's finish forecast where a fresh one exists, else from the flow-factor rule."""
    now = now or timezone.now()
    jobs = list(
        Job.objects.filter(panels__lot__status__in=ACTIVE_LOT)
        .distinct()
        .order_by("due_date", "pk")[:CHECK_BATCH]
    )
    counts = {"checked": len(jobs), "at_risk": 0, "late": 0}
    # The finish forecast decides where one exists (P90 after the due date); the flow
    # factor on the remaining standard minutes is the fallback while none does.

    forecasts = job_projections([j.pk for j in jobs], now)
    for job in jobs:
        remaining = job_remaining_minutes(job)
        if remaining is None:
            continue
        forecast = forecasts.get(job.pk)
        if forecast is not None:
            state = schedule.forecast_due_state(now, due_at(job.due_date), forecast.p90)
            why = f"its forecast P90 finish is {timezone.localtime(forecast.p90):%Y-%m-%d %H:%M}."
        else:
            state = schedule.due_state(now, due_at(job.due_date), remaining)
            why = f"{remaining:.0f} standard minutes of work remain."
        if state == schedule.DueState.ON_TIME:
            continue
        late = state == schedule.DueState.LATE
        message = (
            f"Job {job.number} is late: it was due {job.due_date:%Y-%m-%d}."
            if late
            else f"Job {job.number} is at risk of missing {job.due_date:%Y-%m-%d}: {why}"
        )
        with transaction.atomic():
            alert = create_alert(
                kind=Alert.Kind.LATE if late else Alert.Kind.DUE_RISK,
                severity=Alert.Severity.CRITICAL if late else Alert.Severity.WARNING,
                dedupe_key=f"job:{job.pk}:{state.value}",
                job=job,
                message=message,
                audit_after={"job": job.number, "remaining_min": remaining},
            )
            if alert is None:
                continue
            notify_after_commit(alert.pk)
        counts["late" if late else "at_risk"] += 1
    return counts
