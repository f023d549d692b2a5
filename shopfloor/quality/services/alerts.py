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
from typing import Any

from django.db import IntegrityError, InterfaceError, OperationalError, transaction
from django.db.models import F
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.core import judging
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Job, Lot
from shopfloor.quality import outbox
from shopfloor.quality import series as series_core
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent

log = logging.getLogger("shopfloor.quality")

CHECK_BATCH = 1000
CRITICAL_FRACTION = 0.10


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
                notify_after_commit(alert.pk)
            return EventOutcome(event_id, acted=True, alert_ids=[a.pk for a in alerts])
    except (OperationalError, InterfaceError):
        raise  # database trouble: the task retries with backoff
    except Exception as exc:
        OutboxEvent.objects.filter(pk=event_id).update(last_error=repr(exc)[:2000])
        raise


def handle_events(event_ids: list[int]) -> dict[str, int]:
    """Act on a batch of events in one transaction, each exactly once: in-window readings
    with one SPC update per series (see `shopfloor.quality.event_batch`). Only the given
    events; the worker's task also sweeps up other waiting in-window events."""
    from shopfloor.quality import event_batch  # a real circle: it builds on this module

    return event_batch.handle_batch(event_ids, sweep=False)


def _dispatch(event: OutboxEvent) -> list[Alert]:
    """Hand the event to the handler its app registered (QualityConfig.ready() and others)."""
    handler = outbox.handler_for(event.kind)
    if handler is None:
        log.warning("outbox event %s has unknown kind %r; marked processed", event.pk, event.kind)
        return []
    return list(handler(event))


def handle_reading(event: OutboxEvent) -> list[Alert]:
    """A recorded reading: judge it and its set, hold and raise alerts, feed its SPC series."""
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


def job_of_lot(lot: Lot) -> Job | None:
    return Job.objects.filter(panels__lot=lot).order_by("pk").first()


def create_alert(audit_after: dict[str, Any], **fields: Any) -> Alert | None:
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


def open_ncr(lot: Lot, step: LotStep | None, alert: Alert, description: str) -> Nonconformance:
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


def hold_lot(
    lot: Lot, step: LotStep | None, alert: Alert, ncr: Nonconformance, reason: str
) -> Hold:
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
    alert = create_alert(
        kind=Alert.Kind.OUT_OF_WINDOW,
        severity=severity,
        event=event,
        dedupe_key=f"set:{step.pk}:{reading.quantity}:out_of_window"[:120],
        lot=lot,
        lot_step=step,
        job=job_of_lot(lot),
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
    ncr = open_ncr(
        lot,
        step,
        alert,
        f"{reading.quantity} out of window at '{step.name}': {detail}. Samples {samples} "
        f"(source: {source})",
    )
    ncr.readings.add(*members)
    hold_lot(lot, step, alert, ncr, f"{reading.quantity} set out of window ({detail})")
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
    alert = create_alert(
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


def notify_after_commit(alert_id: int) -> None:
    def queue() -> None:
        try:
            outbox.queue_task(
                outbox.NOTIFY_ALERT, args=[alert_id], retry_policy=outbox.RETRY_POLICY
            )
        except Exception as exc:  # broker down: relay_outbox re-queues it
            log.warning("notification of alert %s left for the relay: %s", alert_id, exc)

    transaction.on_commit(queue)


# --- for other apps (bath chemistry) --------------------------------------------------


def raise_alert(audit_after: dict[str, Any], **fields: Any) -> Alert | None:
    """Create an alert (None when its dedupe key already has one), audit it and notify the
    work center's list after commit. For alerts raised outside the reading path."""
    alert = create_alert(audit_after, **fields)
    if alert is not None:
        notify_after_commit(alert.pk)
    return alert


def hold_for_review(
    *, lot: Lot, lot_step: LotStep | None, alert: Alert, message: str, reason: str
) -> Hold:
    """Hold a lot with an NCR for quality review (only a disposition releases it), inside
    the caller's transaction; the lot row is locked first."""
    locked = Lot.objects.select_for_update(no_key=True).get(pk=lot.pk)
    ncr = open_ncr(locked, lot_step, alert, message)
    return hold_lot(locked, lot_step, alert, ncr, reason)
