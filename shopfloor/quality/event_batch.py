"""In-window reading events, processed in batches on the worker (issue 13).

An in-window reading raises no alert of its own; its event only adds the reading to its
SPC series (which may signal drift). Doing that one event at a time cost a transaction,
a reading look-up, a series lock and a series UPDATE per reading. A batch instead:

1. claims, in one statement (`FOR NO KEY UPDATE SKIP LOCKED`, so events another worker
   holds are left to it), the events it was handed plus any other in-window reading
   events waiting by then, oldest first, up to BATCH (their own tasks then find nothing
   to do);
2. loads their readings with steps, work centers and gauges in one query;
3. steps each series once per batch: one row lock and one UPDATE per series, whatever
   the number of its readings (`series.add_points`), in a savepoint per series; if a
   series fails, its readings are retried one by one, each in its own savepoint, so a
   failing event keeps its error and stays unprocessed for the relay while the others
   go through;
4. raises the drift alerts the series signalled (each in its own savepoint);
5. stamps every processed event with one UPDATE.

An event whose handling writes rows of its own (an out-of-window or failed-set event that
reached a batch, a held lot's remaining samples or a correction, which are cited on the
open NCR) runs the full single-event handler in its own savepoint. An event whose only
database effect is its share of the series update needs no savepoint of its own: until
the series step nothing of it is written, and a failure there is isolated per series and
then per event as above. Out-of-window events never wait for a batch: they are sent one
task each (`outbox.enqueue`) and handled by `handle_event`, the alert's fast path.
"""

from __future__ import annotations

import logging
from typing import Any

from django.db import InterfaceError, OperationalError, connection, transaction
from django.db.models import F
from django.utils import timezone

from shopfloor.floor.models import Reading
from shopfloor.quality import outbox
from shopfloor.quality import series as series_core
from shopfloor.quality.models import Alert, OutboxEvent
from shopfloor.quality.services import alerts as quality

log = logging.getLogger("shopfloor.events")

BATCH = 500  # events per batch transaction

_CLAIM = (
    "SELECT * FROM quality_outboxevent WHERE processed_at IS NULL AND (id = ANY(%s) OR "
    "(kind = 'reading.recorded' AND payload->>'in_window' = 'true' "
    "AND COALESCE(payload->'set'->>'in_window', '') <> 'false')) "
    "ORDER BY id LIMIT %s FOR NO KEY UPDATE SKIP LOCKED"
)
_DB_ERRORS = (OperationalError, InterfaceError)


def handle_batch(event_ids: list[int], *, sweep: bool = True) -> dict[str, int]:
    """Process the given events (and, with `sweep`, other waiting in-window reading
    events) in one transaction, each exactly once; counts of what happened."""
    ids = sorted({int(i) for i in event_ids})
    if ids:  # count the attempt outside the transaction: it survives a crash
        OutboxEvent.objects.filter(pk__in=ids, processed_at__isnull=True).update(
            attempts=F("attempts") + 1
        )
    done: list[int] = []
    failed: dict[int, str] = {}
    alerts: list[Alert] = []
    with transaction.atomic():
        events = _claim(ids, sweep)
        readings = _readings(events)
        points: list[tuple[OutboxEvent, Reading]] = []
        for event in events:
            payload = event.payload if isinstance(event.payload, dict) else {}
            reading = readings.get(payload.get("reading"))  # type: ignore[arg-type]
            if _plain(event, payload, reading):
                try:
                    points.append((event, _point(event, reading)))  # type: ignore[arg-type]
                except Exception as exc:
                    _failed(failed, event, exc)
                continue
            try:  # the full handler: it writes rows of its own
                with transaction.atomic():
                    alerts += quality._dispatch(event)
            except _DB_ERRORS:
                raise  # database trouble: the task retries with backoff
            except Exception as exc:
                _failed(failed, event, exc)
                continue
            done.append(event.pk)
        drift = _step_series(points, failed)
        for event, reading in points:
            if event.pk in failed:
                continue
            for signal in drift.get(reading.pk, []):
                try:
                    with transaction.atomic():
                        alert = quality._drift_alert(reading, signal)
                except _DB_ERRORS:
                    raise
                except Exception:
                    log.exception("drift alert for reading %s failed", reading.pk)
                    continue
                if alert is not None:
                    alerts.append(alert)
            done.append(event.pk)
        if done:
            OutboxEvent.objects.filter(pk__in=done).update(
                processed_at=timezone.now(), last_error=""
            )
        for pk, error in failed.items():
            OutboxEvent.objects.filter(pk=pk).update(last_error=error)
        for alert in alerts:
            quality.notify_after_commit(alert.pk)
    return {"claimed": len(events), "processed": len(done), "failed": len(failed)}


def _claim(ids: list[int], sweep: bool) -> list[OutboxEvent]:
    # The sweep is PostgreSQL SQL (ANY, jsonb, SKIP LOCKED); the embedded SQLite demo runs
    # tasks eagerly in one process, so it claims only the events it was handed.
    if sweep and connection.vendor == "postgresql":
        return list(OutboxEvent.objects.raw(_CLAIM, [ids, BATCH]))
    return list(
        OutboxEvent.objects.select_for_update(no_key=True, skip_locked=True)
        .filter(pk__in=ids, processed_at__isnull=True)
        .order_by("pk")
    )


def _readings(events: list[OutboxEvent]) -> dict[int, Reading]:
    wanted: list[int] = [
        int(e.payload["reading"])
        for e in events
        if isinstance(e.payload, dict) and isinstance(e.payload.get("reading"), int)
    ]
    if not wanted:
        return {}
    found = Reading.objects.select_related(
        "lot_step__work_center", "lot_step__equipment", "lot_step__lot", "equipment"
    ).filter(pk__in=wanted)
    return {r.pk: r for r in found}


def _plain(event: OutboxEvent, payload: dict[str, Any], reading: Reading | None) -> bool:
    """An in-window reading's event whose only effect is its series point."""
    return (
        event.kind == "reading.recorded"
        and reading is not None
        and reading.in_window
        and not outbox.urgent(payload)
        and not payload.get("set_so_far")
        and not payload.get("corrects")
    )


def _point(event: OutboxEvent, reading: Reading) -> Reading:
    """The reading an in-window event adds to its series (checks the event names it)."""
    if event.payload.get("lot_step") != reading.lot_step_id:
        raise ValueError(
            f"event {event.pk} names lot step {event.payload.get('lot_step')!r}, but reading "
            f"{reading.pk} is on lot step {reading.lot_step_id}"
        )
    return reading


def _step_series(
    points: list[tuple[OutboxEvent, Reading]], failed: dict[int, str]
) -> dict[int, list[series_core.DriftSignal]]:
    """One lock and one UPDATE per series; a failing series is retried event by event."""
    groups: dict[str, list[tuple[OutboxEvent, Reading]]] = {}
    for event, reading in points:
        try:
            key = series_core.key_of(reading)
        except Exception as exc:
            _failed(failed, event, exc)
            continue
        groups.setdefault(key, []).append((event, reading))
    drift: dict[int, list[series_core.DriftSignal]] = {}
    for key in sorted(groups):
        members = groups[key]
        try:
            with transaction.atomic():
                drift.update(series_core.add_points([r for _, r in members]))
            continue
        except _DB_ERRORS:
            raise
        except Exception:
            log.exception("series %s failed as a batch; retrying its events one by one", key)
        for event, reading in members:
            try:
                with transaction.atomic():
                    drift.update(series_core.add_points([reading]))
            except _DB_ERRORS:
                raise
            except Exception as exc:
                _failed(failed, event, exc)
    return drift


def _failed(failed: dict[int, str], event: OutboxEvent, exc: Exception) -> None:
    log.warning("outbox event %s failed in its batch: %r", event.pk, exc)
    failed[event.pk] = repr(exc)[:2000]
