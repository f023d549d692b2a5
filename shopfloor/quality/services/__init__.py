"""Quality use cases: turning events into alerts, holds and NCRs, and dispositioning them.

Why this module exists: a reading outside its window must *always* end in exactly one
alert and one hold, even when the worker crashes, a message is delivered twice, or
Redis was down when the reading was recorded. Three mechanisms make that true:

* the outbox row is claimed with ``select_for_update`` on ``processed_at IS NULL`` inside
  the transaction that writes the alert, so two workers never both act on one event;
* the unique constraints (``Alert.event`` one-to-one, ``Alert.dedupe_key`` unique) decide
  who wins if anything slips past the claim;
* notifications (e-mail, webhook) run after commit as a separate, idempotent step
  (``Alert.notified_at``), so a failing channel can neither undo the hold nor make a
  second alert.

Severity of an out-of-window alert (shop rule, documented in DEVELOPERS.md by the lead):
``critical`` for attribute checks (a found defect) and for values beyond the window by
more than 10 % of the window's span (for a one-sided window: 10 % of the limit's
magnitude; a one-sided limit of zero makes any excess critical); otherwise ``warning``.
Both hold the lot: severity says how urgent, not whether to stop.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from typing import Any
from zoneinfo import ZoneInfo

from django.conf import settings
from django.db import IntegrityError, InterfaceError, OperationalError, transaction
from django.db.models import F, Q, Sum
from django.utils import timezone

from shopfloor import access
from shopfloor.audit import services as audit
from shopfloor.core import schedule, spc
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Job, Lot, Person
from shopfloor.quality import outbox
from shopfloor.quality import series as series_core
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent, SeriesState

log = logging.getLogger("shopfloor.quality")

# An event whose processing failed this many times is left for a person (last_error says
# why) instead of being retried for ever.
MAX_EVENT_ATTEMPTS = 10
RELAY_BATCH = 200
# Published but still unprocessed after this long: publish again (the claim makes a
# duplicate delivery harmless).
REPUBLISH_AFTER = timedelta(seconds=getattr(settings, "OUTBOX_REPUBLISH_AFTER_SECONDS", 120))
# Alerts whose notification never ran (lost message) are re-queued after this long,
# but only for a day: an old alert is seen in the app, a late e-mail helps nobody.
RENOTIFY_AFTER = timedelta(seconds=60)
RENOTIFY_HORIZON = timedelta(days=1)
CHECK_BATCH = 1000
CRITICAL_FRACTION = 0.10

ACTIVE_LOT = Lot.ACTIVE_STATUSES


@dataclass(frozen=True)
class EventOutcome:
    """What handling one event did; ``acted`` is False when it was already handled."""

    event_id: int
    acted: bool
    alert_ids: list[int] = field(default_factory=list)


# --- severity -----------------------------------------------------------------------


def severity_for(value: float, window: dict[str, Any]) -> str:
    """Severity of an out-of-window reading (rule in the module docstring)."""
    if window.get("attribute"):
        return Alert.Severity.CRITICAL
    lo, hi = window.get("min"), window.get("max")
    if lo is not None and value < lo:
        excess, limit = lo - value, lo
    elif hi is not None and value > hi:
        excess, limit = value - hi, hi
    else:
        return Alert.Severity.WARNING
    if lo is not None and hi is not None and hi > lo:
        reference = hi - lo
    else:
        reference = abs(limit)
    if reference == 0 or excess > CRITICAL_FRACTION * reference:
        return Alert.Severity.CRITICAL
    return Alert.Severity.WARNING


# --- events -------------------------------------------------------------------------


def handle_event(event_id: int) -> EventOutcome:
    """Act on one outbox event exactly once (see module docstring for how)."""
    OutboxEvent.objects.filter(pk=event_id, processed_at__isnull=True).update(
        attempts=F("attempts") + 1
    )
    try:
        with transaction.atomic():
            event = (
                OutboxEvent.objects.select_for_update(no_key=True)
                .filter(pk=event_id, processed_at__isnull=True)
                .first()
            )
            if event is None:
                return EventOutcome(event_id, acted=False)
            alerts = _dispatch(event)
            event.processed_at = timezone.now()
            event.last_error = ""
            event.save(update_fields=["processed_at", "last_error"])
            for alert in alerts:
                _notify_after_commit(alert.pk)
            return EventOutcome(event_id, acted=True, alert_ids=[a.pk for a in alerts])
    except (OperationalError, InterfaceError):
        raise  # database trouble: the task retries with backoff
    except Exception as exc:
        OutboxEvent.objects.filter(pk=event_id).update(last_error=repr(exc)[:2000])
        raise


def handle_events(event_ids: list[int]) -> dict[str, int]:
    """Act on a batch of events in one transaction, each exactly once.

    The events are claimed with FOR UPDATE SKIP LOCKED (one another worker holds is left
    to it), each runs in its own savepoint so a failing event never blocks the others
    (it keeps its error and stays unprocessed for the relay), and the processed stamp is
    one UPDATE for the batch.
    """
    ids = sorted({int(i) for i in event_ids})
    OutboxEvent.objects.filter(pk__in=ids, processed_at__isnull=True).update(
        attempts=F("attempts") + 1
    )
    done: list[int] = []
    failed: dict[int, str] = {}
    with transaction.atomic():
        events = list(
            OutboxEvent.objects.select_for_update(no_key=True, skip_locked=True)
            .filter(pk__in=ids, processed_at__isnull=True)
            .order_by("pk")
        )
        for event in events:
            try:
                with transaction.atomic():
                    alerts = _dispatch(event)
            except (OperationalError, InterfaceError):
                raise  # database trouble: the task retries with backoff
            except Exception as exc:
                log.exception("outbox event %s failed in its batch", event.pk)
                failed[event.pk] = repr(exc)[:2000]
                continue
            done.append(event.pk)
            for alert in alerts:
                _notify_after_commit(alert.pk)
        if done:
            OutboxEvent.objects.filter(pk__in=done).update(
                processed_at=timezone.now(), last_error=""
            )
        for pk, error in failed.items():
            OutboxEvent.objects.filter(pk=pk).update(last_error=error)
    return {"claimed": len(events), "processed": len(done), "failed": len(failed)}


def _dispatch(event: OutboxEvent) -> list[Alert]:
    if event.kind == "reading.recorded":
        return _handle_reading(event)
    log.warning("outbox event %s has unknown kind %r; marked processed", event.pk, event.kind)
    return []


def _handle_reading(event: OutboxEvent) -> list[Alert]:
    reading_id = (event.payload or {}).get("reading")
    if not isinstance(reading_id, int):
        return []
    reading = (
        Reading.objects.select_related(
            "lot_step__work_center", "lot_step__equipment", "lot_step__lot", "equipment"
        )
        .filter(pk=reading_id)
        .first()
    )
    if reading is None:
        log.warning("outbox event %s names reading %r, which does not exist", event.pk, reading_id)
        return []
    payload = event.payload or {}
    set_info = payload.get("set") if isinstance(payload.get("set"), dict) else None
    set_failed = set_info is not None and set_info.get("in_window") is False
    alerts: list[Alert] = []
    if not reading.in_window or set_failed:
        _withdraw_correction_note(reading)
        alert = _out_of_window(event, reading, set_info if set_failed else None)
        if alert is not None:
            alerts.append(alert)
    elif payload.get("set_so_far"):
        # A held lot's remaining samples, or a correction: cite them on the open NCR of
        # the step, and say so when a correction brought the set back inside.
        _cite_on_open_ncr(reading, payload)
    drift = series_core.add_point(reading)
    if reading.in_window and not set_failed:  # out of window: already alerted and held
        for signal in drift:
            alert = _drift_alert(reading, signal)
            if alert is not None:
                alerts.append(alert)
    return alerts


def _set_text(step: LotStep, quantity: str) -> tuple[list[Reading], str]:
    """The current readings of a quantity's set at a step, and 'samples 1: 27.9 µm, ...'."""
    from shopfloor.core import judging

    members = list(
        Reading.objects.filter(lot_step=step, quantity=quantity, superseded_by__isnull=True)
        .order_by("sample_index")
        .only("pk", "sample_index", "value", "unit", "quantity")
    )
    text = ", ".join(
        f"{r.sample_index}: {judging.for_people(r.quantity, r.value, r.unit)}" for r in members
    )
    return members, text


def _cite_on_open_ncr(reading: Reading, payload: dict[str, Any]) -> None:
    step = reading.lot_step
    ncr = Nonconformance.objects.filter(
        lot_step=step, status=Nonconformance.Status.OPEN, readings__quantity=reading.quantity
    ).first()
    if ncr is None:
        return
    ncr.readings.add(reading)
    if not payload.get("corrects") or not payload.get("each_in_window"):
        return
    set_info = payload.get("set")
    if isinstance(set_info, dict) and set_info.get("in_window") is False:
        return
    _members, text = _set_text(step, reading.quantity)
    complete = "complete set" if isinstance(set_info, dict) else "samples recorded so far"
    old = Reading.objects.filter(pk=payload["corrects"]).first()
    was = (
        f" from {old.entered_value} {old.entered_unit}"
        + (f" ({old.correction_reason})" if old.correction_reason else "")
        if old is not None
        else ""
    )
    note = (
        f"Sample {reading.sample_index} was corrected{was} to {reading.entered_value} "
        f"{reading.entered_unit}, which brought the {reading.quantity.replace('_', ' ')} "
        f"{complete} back inside ({reading.window.get('in_words', '')}): samples {text}. "
        "Quality may close this NCR as a recording error."
    )
    ncr.correction_note = note[:2000]
    ncr.save(update_fields=["correction_note"])
    audit.record(
        actor=None,
        action="ncr.correction_noted",
        object_type="ncr",
        object_id=ncr.pk,
        after={"number": ncr.number, "reading": reading.pk, "note": note},
    )


def _withdraw_correction_note(reading: Reading) -> None:
    """A later reading took the set out again: the NCR no longer says it is back inside
    (so it can no longer be closed as a recording error)."""
    ncr = (
        Nonconformance.objects.filter(
            lot_step=reading.lot_step,
            status=Nonconformance.Status.OPEN,
            readings__quantity=reading.quantity,
        )
        .exclude(correction_note="")
        .first()
    )
    if ncr is None:
        return
    before = ncr.correction_note
    ncr.correction_note = ""
    ncr.save(update_fields=["correction_note"])
    audit.record(
        actor=None,
        action="ncr.correction_withdrawn",
        object_type="ncr",
        object_id=ncr.pk,
        before={"note": before},
        after={"number": ncr.number, "reading": reading.pk},
    )


def _lot_job(lot: Lot) -> Job | None:
    return Job.objects.filter(panels__lot=lot).order_by("pk").first()


def _create_alert(audit_after: dict[str, Any], **fields: Any) -> Alert | None:
    """Create an alert unless its dedupe key (or event) already has one, and audit it."""
    try:
        with transaction.atomic():
            alert = Alert.objects.create(**fields)
    except IntegrityError:
        return None
    audit.record(
        actor=None,
        action="alert.raised",
        object_type="alert",
        object_id=alert.pk,
        after={"kind": alert.kind, **audit_after},
    )
    return alert


def _open_ncr(lot: Lot, step: LotStep | None, alert: Alert, description: str) -> Nonconformance:
    """The open NCR of this lot step, or a new one; several bad readings share one NCR."""
    ncr = Nonconformance.objects.filter(
        lot=lot, lot_step=step, status=Nonconformance.Status.OPEN
    ).first()
    if ncr is not None:
        return ncr
    ncr = Nonconformance.objects.create(
        number=f"NCR-T{alert.pk}", lot=lot, lot_step=step, alert=alert, description=description
    )
    ncr.number = f"NCR-{ncr.pk:06d}"
    ncr.save(update_fields=["number"])
    audit.record(
        actor=None,
        action="ncr.opened",
        object_type="ncr",
        object_id=ncr.pk,
        after={
            "number": ncr.number,
            "lot": lot.code,
            "alert": alert.pk,
            "description": description,
        },
    )
    return ncr


def _hold(lot: Lot, step: LotStep | None, alert: Alert, ncr: Nonconformance, reason: str) -> Hold:
    hold = Hold.objects.create(lot=lot, lot_step=step, alert=alert, ncr=ncr, reason=reason)
    if not lot.on_hold:
        lot.on_hold = True
        lot.save(update_fields=["on_hold"])
    audit.record(
        actor=None,
        action="lot.held",
        object_type="lot",
        object_id=lot.pk,
        before=None,
        after={"hold": hold.pk, "ncr": ncr.number, "reason": reason},
    )
    return hold


def _out_of_window(
    event: OutboxEvent, reading: Reading, set_info: dict[str, Any] | None
) -> Alert | None:
    """One alert, hold and NCR per sample set, citing all its samples.

    A reading outside an each-reading window alerts at once; a complete set outside a
    set criterion (mean, smallest, largest, range) alerts when it completes. Either way
    the dedupe key is the set's (lot step and quantity), so a second bad sample of the
    same set joins the open NCR instead of raising a second alert and hold.
    """
    step = reading.lot_step
    lot = Lot.objects.select_for_update(no_key=True).get(pk=step.lot_id)
    window = reading.window or {}
    if set_info is not None:
        detail = str(set_info.get("message") or "the set is outside its window")
    else:
        detail = (event.payload or {}).get("message") or "outside its window"
        detail = f"sample {reading.sample_index}: {detail}"
    source = window.get("source") or "no source recorded"
    members, samples = _set_text(step, reading.quantity)
    criteria = window.get("in_words") or ""
    message = (
        f"Lot {lot.code} at '{step.name}' ({step.work_center.name}): {reading.quantity} "
        f"{detail}. Samples {samples}"
        f"{' (' + criteria + ')' if criteria else ''} (window source: {source}). "
        "The lot is on hold until quality dispositions the NCR; the rest of the set and "
        "corrections may still be recorded."
    )
    entry, figure = _failing_entry(window, set_info, reading.value)
    severity = Alert.Severity.CRITICAL if window.get("attribute") else severity_for(figure, entry)
    alert = _create_alert(
        kind=Alert.Kind.OUT_OF_WINDOW,
        severity=severity,
        event=event,
        dedupe_key=f"set:{step.pk}:{reading.quantity}:out_of_window"[:120],
        lot=lot,
        lot_step=step,
        job=_lot_job(lot),
        reading=reading,
        work_center=step.work_center,
        message=message,
        audit_after={
            "severity": severity,
            "lot": lot.code,
            "reading": reading.pk,
            "event": event.pk,
            "samples": [r.pk for r in members],
        },
    )
    if alert is None:
        # The set already has its alert: this sample joins that NCR (quality sees it).
        ncr = Nonconformance.objects.filter(
            lot_step=step, alert__dedupe_key=f"set:{step.pk}:{reading.quantity}:out_of_window"
        ).first()
        if ncr is not None:
            ncr.readings.add(reading)
        return None
    ncr = _open_ncr(
        lot,
        step,
        alert,
        f"{reading.quantity} out of window at '{step.name}': {detail}. Samples {samples} "
        f"(source: {source})",
    )
    ncr.readings.add(*members)
    _hold(lot, step, alert, ncr, f"{reading.quantity} set out of window ({detail})")
    return alert


def _failing_entry(
    window: dict[str, Any], set_info: dict[str, Any] | None, value: float
) -> tuple[dict[str, Any], float]:
    """The criterion and figure a severity is measured with: the failed set criterion and
    its figure (the mean, ...), or the reading's own each-reading limits and value."""
    failed = next((f for f in (set_info or {}).get("figures", []) if not f.get("in_window")), None)
    if failed is None:
        return window, value
    for entry in window.get("criteria") or []:
        if (entry.get("applies_to") or "each_reading") == failed.get("applies_to"):
            return dict(entry), float(failed["figure"])
    return window, value


def _drift_alert(reading: Reading, signal: series_core.DriftSignal) -> Alert | None:
    step = reading.lot_step
    s = signal.series
    alert = _create_alert(
        kind=Alert.Kind.DRIFT,
        severity=Alert.Severity.WARNING,
        dedupe_key=f"drift:{s.pk}:{signal.rule}:{signal.index}"[:120],
        lot_id=step.lot_id,
        lot_step=step,
        reading=reading,
        work_center=step.work_center,
        rule=signal.rule[:40],
        message=(
            f"Process drift on {s.quantity} at {step.work_center.name}"
            f"{' (' + s.key.split('|')[2] + ')' if s.equipment_id else ''}: "
            f"{signal.description} (rule {signal.rule}), point {signal.index + 1}. "
            "The readings are still in window; no hold. Review the process."
        ),
        audit_after={"rule": signal.rule, "series": s.key, "reading": reading.pk},
    )
    return alert


def _notify_after_commit(alert_id: int) -> None:
    def queue() -> None:
        from shopfloor.quality import tasks

        try:
            tasks.notify_alert.apply_async(args=[alert_id], retry_policy=outbox.RETRY_POLICY)
        except Exception as exc:  # broker down: relay_outbox re-queues it
            log.warning("notification of alert %s left for the relay: %s", alert_id, exc)

    transaction.on_commit(queue)


# --- relay --------------------------------------------------------------------------


def relay_outbox(now: datetime | None = None, batch: int = RELAY_BATCH) -> dict[str, int]:
    """Publish events the broker never got (or lost), and re-queue lost notifications.

    A request's first publish writes nothing, so an unprocessed event with no
    `published_at` may be queued or lost: the relay sends it (a queued one is then
    processed once, the second message finds it claimed) and stamps it, so it is sent
    again only after REPUBLISH_AFTER.
    """
    from shopfloor.quality import tasks

    now = now or timezone.now()
    ids = list(
        OutboxEvent.objects.filter(processed_at__isnull=True, attempts__lt=MAX_EVENT_ATTEMPTS)
        .filter(Q(published_at__isnull=True) | Q(published_at__lt=now - REPUBLISH_AFTER))
        .order_by("pk")
        .values_list("pk", flat=True)[:batch]
    )
    published = 0
    for event_id in ids:
        if not outbox.publish(event_id, republish=True):
            break  # broker still down: try again on the next beat
        published += 1
    stuck = OutboxEvent.objects.filter(
        processed_at__isnull=True, attempts__gte=MAX_EVENT_ATTEMPTS
    ).count()
    if stuck:
        log.error(
            "%s outbox event(s) failed %s times and need a person; see last_error",
            stuck,
            MAX_EVENT_ATTEMPTS,
        )
    renotified = 0
    alert_ids = list(
        Alert.objects.filter(
            notified_at__isnull=True,
            created_at__lt=now - RENOTIFY_AFTER,
            created_at__gte=now - RENOTIFY_HORIZON,
        )
        .order_by("pk")
        .values_list("pk", flat=True)[:batch]
    )
    for alert_id in alert_ids:
        try:
            tasks.notify_alert.apply_async(args=[alert_id], retry_policy=outbox.RETRY_POLICY)
        except Exception as exc:
            log.warning("relay could not queue notification of alert %s: %s", alert_id, exc)
            break
        renotified += 1
    return {
        "candidates": len(ids),
        "published": published,
        "renotified": renotified,
        "stuck": stuck,
    }


# --- notifications ------------------------------------------------------------------


def notify_alert(alert_id: int) -> bool:
    """Send an alert's e-mail and webhook once; True when this call did it.

    The alert row stays locked while sending, so two workers cannot both send; if the
    worker dies mid-send the transaction rolls back and the task is delivered again.
    A failing webhook is handed to a bounded retry task and never blocks anything.
    """
    from shopfloor.quality import notify

    with transaction.atomic():
        alert = (
            Alert.objects.select_for_update(of=("self",))
            .select_related("lot", "work_center", "job")
            .filter(pk=alert_id, notified_at__isnull=True)
            .first()
        )
        if alert is None:
            return False
        sent = notify.send_email(alert)
        webhook_ok = True
        if notify.webhook_configured():
            try:
                notify.post_webhook(alert)
            except notify.WebhookFailed as exc:
                log.warning("webhook for alert %s failed, will retry: %s", alert.pk, exc)
                webhook_ok = False
        alert.notified_at = timezone.now()
        alert.save(update_fields=["notified_at"])
        log.info(
            "alert %s notified (%s e-mail(s), webhook %s)",
            alert.pk,
            sent,
            "ok" if webhook_ok else "retrying" if notify.webhook_configured() else "off",
        )
        if not webhook_ok:

            def retry() -> None:
                from shopfloor.quality import tasks

                try:
                    tasks.deliver_webhook.apply_async(
                        args=[alert_id], countdown=2, retry_policy=outbox.RETRY_POLICY
                    )
                except Exception as exc:
                    log.warning("could not queue webhook retry for alert %s: %s", alert_id, exc)

            transaction.on_commit(retry)
    return True


def deliver_webhook(alert_id: int) -> None:
    """One more webhook attempt (raises notify.WebhookFailed so the task retries)."""
    from shopfloor.quality import notify

    alert = Alert.objects.select_related("lot", "work_center", "job").filter(pk=alert_id).first()
    if alert is None or not notify.webhook_configured():
        return
    notify.post_webhook(alert)


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
            alert = _create_alert(
                kind=Alert.Kind.QUEUE_EXCEEDED,
                severity=Alert.Severity.CRITICAL,
                dedupe_key=f"queue_exceeded:{step.pk}",
                lot=lot,
                lot_step=step,
                job=_lot_job(lot),
                work_center=step.work_center,
                message=message,
                audit_after={"lot": lot.code, "waited_min": round(state.minutes_waited)},
            )
            if alert is None:
                return None
            ncr = _open_ncr(lot, step, alert, message)
            _hold(lot, step, alert, ncr, "Queue-time limit exceeded")
            _notify_after_commit(alert.pk)
            return "exceeded"
        if state.warn and not step.queue_warning_released_reason:
            left = state.limit_minutes - state.minutes_waited
            alert = _create_alert(
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
            _notify_after_commit(alert.pk)
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
    from shopfloor.planning.services import job_projections

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
            alert = _create_alert(
                kind=Alert.Kind.LATE if late else Alert.Kind.DUE_RISK,
                severity=Alert.Severity.CRITICAL if late else Alert.Severity.WARNING,
                dedupe_key=f"job:{job.pk}:{state.value}",
                job=job,
                message=message,
                audit_after={"job": job.number, "remaining_min": remaining},
            )
            if alert is None:
                continue
            _notify_after_commit(alert.pk)
        counts["late" if late else "at_risk"] += 1
    return counts


# --- SPC: the engineer's controls -----------------------------------------------------


def _require_quality(person: Person, what: str) -> None:
    if "quality_engineer" not in person.roles():
        raise NotAllowed(f"Only a quality engineer can {what}.")


def _get_series_locked(series_id: int) -> SeriesState:
    found = SeriesState.objects.select_for_update(no_key=True).filter(pk=series_id).first()
    if found is None:
        raise NotFound(f"No SPC series {series_id}.")
    return found


def fix_limits(
    person: Person, series_id: int, centre: float, ucl: float, lcl: float
) -> SeriesState:
    """Set a series' control limits by hand (e.g. after a capability study)."""
    _require_quality(person, "fix control limits")
    try:
        limits = spc.fixed_limits(centre, ucl, lcl)
    except spc.SpcInputError as exc:
        raise InvalidInput(f"Control limits not accepted: {exc}.") from exc
    with transaction.atomic():
        s = _get_series_locked(series_id)
        source = f"fixed by {person.printed_name}"
        return _store_limits(person, s, limits, source, "spc.limits_fixed")


def _store_limits(
    person: Person, s: SeriesState, limits: spc.Limits, source: str, action: str
) -> SeriesState:
    """Keep limits an engineer set (the baseline no longer moves them), with an audit entry."""
    before = s.limits
    s.limits = series_core.limits_to_dict(limits, source=source)
    s.limits_fixed = True
    s.updated_at = timezone.now()
    s.save(update_fields=["limits", "limits_fixed", "updated_at"])
    audit.record(
        actor=person.user,
        action=action,
        object_type="spc_series",
        object_id=s.pk,
        before=before,
        after=s.limits,
    )
    return s


RULESET_NAMES = {"western_electric": "Western Electric", "nelson": "Nelson"}


def set_series_rules(person: Person, series_id: int, rules: str) -> SeriesState:
    """Choose which run rules judge a series from its next point on (audited).

    The rule state keeps the same history for every rule set, so a change takes effect at
    once; alerts already raised stay as they are.
    """
    _require_quality(person, "choose the run rules")
    if rules not in spc.RULESETS:
        allowed = ", ".join(f"{key} ({name})" for key, name in RULESET_NAMES.items())
        raise InvalidInput(f"Unknown rule set {rules!r}; allowed: {allowed}.")
    with transaction.atomic():
        s = _get_series_locked(series_id)
        before = s.rules
        if before == rules:
            return s
        s.rules = rules
        s.updated_at = timezone.now()
        s.save(update_fields=["rules", "updated_at"])
        audit.record(
            actor=person.user,
            action="spc.rules_changed",
            object_type="spc_series",
            object_id=s.pk,
            before={"rules": before},
            after={"rules": rules},
        )
        return s


def recompute_limits(person: Person, series_id: int, start: datetime, end: datetime) -> SeriesState:
    """Recompute a series' limits from the readings recorded in [start, end]."""
    _require_quality(person, "recompute control limits")
    if not isinstance(start, datetime) or not isinstance(end, datetime):
        raise InvalidInput("Give the baseline window as two date-times (from, to).")
    if timezone.is_naive(start) or timezone.is_naive(end):
        raise InvalidInput("The baseline window's date-times must include a time zone.")
    if start >= end:
        raise InvalidInput("The baseline window must start before it ends.")
    with transaction.atomic():
        s = _get_series_locked(series_id)
        rows = list(
            series_core.series_queryset(s)
            .filter(recorded_at__gte=start, recorded_at__lte=end)
            .order_by("recorded_at", "pk")
            .values_list("lot_step_id", "sample_index", "value")[: series_core.MAX_BASELINE]
        )
        data: list[Any]
        if s.chart in series_core.XBAR_CHARTS:
            data = series_core.subgroups_of(rows, s.subgroup_size)
            what = f"complete subgroup(s) of {s.subgroup_size}"
        else:
            data = [value for _, _, value in rows]
            what = "reading(s)"
        if len(data) < spc.MIN_BASELINE_POINTS:
            raise InvalidInput(
                f"The window {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} holds "
                f"{len(data)} {what} of {s.key}; at least "
                f"{spc.MIN_BASELINE_POINTS} are needed (25 or more is common practice)."
            )
        try:
            limits = spc.compute_limits(s.chart, data)  # type: ignore[arg-type]
        except spc.SpcInputError as exc:
            raise InvalidInput(f"Limits cannot be computed from that window: {exc}.") from exc
        source = f"recomputed from {len(data)} {what} {start.isoformat()} to {end.isoformat()}"
        return _store_limits(person, s, limits, source, "spc.limits_recomputed")


def series_capability(series_id: int) -> dict[str, Any]:
    """Cp, Cpk, Pp, Ppk and ppm of a series' latest readings against their window.

    The window is the one the newest reading was judged against (lots carry windows
    snapshotted from their routing). ``capability`` is None, with ``reason``, when it
    cannot be computed (fewer than 2 readings, no limits, an attribute chart).
    """
    s = SeriesState.objects.filter(pk=series_id).first()
    if s is None:
        raise NotFound(f"No SPC series {series_id}.")
    readings = series_core.series_readings(s)
    values = [r.value for r in readings]
    window = readings[-1].window if readings else {}
    lsl, usl = window.get("min"), window.get("max")
    result: dict[str, Any] = {
        "series": s.key,
        "chart": s.chart,
        "n": len(values),
        "lsl": lsl,
        "usl": usl,
        "unit": readings[-1].unit if readings else "",
        "source": window.get("source"),
        "limits": s.limits,
        "capability": None,
        "reason": "",
    }
    if s.chart == "c":
        result["reason"] = "capability applies to measured values, not attribute counts"
    elif len(values) < 2:
        result["reason"] = f"{len(values)} reading(s); at least 2 are needed"
    elif lsl is None and usl is None:
        result["reason"] = "the window has no specification limits"
    else:
        within = None
        if s.chart in series_core.XBAR_CHARTS:
            groups = series_core.subgroups_of(
                ((r.lot_step_id, r.sample_index, r.value) for r in readings), s.subgroup_size
            )
            if len(groups) >= 2:  # short-term sigma from within the lots' subgroups
                within = spc.within_sigma(s.chart, groups)  # type: ignore[arg-type]
        try:
            cap = spc.capability(values, lsl=lsl, usl=usl, within=within)
        except spc.SpcInputError as exc:
            result["reason"] = str(exc)
        else:
            result["capability"] = {
                **cap.to_dict(),
                "mean": cap.mean,
                "within_sigma": cap.within_sigma,
                "overall_sigma": cap.overall_sigma,
            }
    return result


# --- disposition --------------------------------------------------------------------
# The use case lives in shopfloor.quality.disposition (one module for the review board's
# decisions); it is re-exported here so callers keep one entry point per app.

from shopfloor.quality.disposition import disposition_ncr  # noqa: E402, F401

# --- for other apps (bath chemistry) --------------------------------------------------


def raise_alert(audit_after: dict[str, Any], **fields: Any) -> Alert | None:
    """Create an alert (None when its dedupe key already has one), audit it and notify the
    work center's list after commit. For alerts raised outside the reading path."""
    alert = _create_alert(audit_after, **fields)
    if alert is not None:
        _notify_after_commit(alert.pk)
    return alert


def hold_for_review(
    *, lot: Lot, lot_step: LotStep | None, alert: Alert, message: str, reason: str
) -> Hold:
    """Hold a lot with an NCR for quality review (only a disposition releases it), inside
    the caller's transaction; the lot row is locked first."""
    locked = Lot.objects.select_for_update(no_key=True).get(pk=lot.pk)
    ncr = _open_ncr(locked, lot_step, alert, message)
    return _hold(locked, lot_step, alert, ncr, reason)
