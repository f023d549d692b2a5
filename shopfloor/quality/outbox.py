"""Hand committed outbox events to Celery.

Services write an OutboxEvent inside their transaction and call `enqueue(event)`.
Publishing happens only after commit; if the broker is down the event simply stays
unpublished and the relay task (Celery beat) publishes it later, so nothing is lost.
"""

from __future__ import annotations

import logging

from django.db import transaction
from django.utils import timezone

from shopfloor.quality.models import OutboxEvent

log = logging.getLogger("shopfloor.outbox")

# Give up on a dead broker quickly: a request must not hang on it, and the relay
# publishes the event later anyway.
RETRY_POLICY = {"max_retries": 1, "interval_start": 0, "interval_step": 0.2, "interval_max": 0.2}


def publish(event_id: int, *, republish: bool = False) -> bool:
    """Send one event to the worker; True when the broker took it.

    A first publish (after the request's commit) writes nothing: stamping it would cost
    the request another round trip and race the worker's own update of the row. The
    relay finds events left unprocessed by their age and stamps `published_at` when it
    re-sends one (`republish`), so a lost message is sent again at most once per
    OUTBOX_REPUBLISH_AFTER_SECONDS.
    """
    from shopfloor.quality import tasks

    try:
        tasks.process_event.apply_async(args=[event_id], retry_policy=RETRY_POLICY)
    except Exception as exc:  # broker unreachable: the relay will retry
        log.warning("outbox event %s left for the relay: %s", event_id, exc)
        return False
    if republish:
        OutboxEvent.objects.filter(pk=event_id).update(published_at=timezone.now())
    return True


def enqueue(event: OutboxEvent) -> None:
    event_id = event.pk
    transaction.on_commit(lambda: publish(event_id))


BATCH_SIZE = 200  # in-window events handed to the worker per task


def enqueue_many(*, urgent: list[int], batched: list[int]) -> None:
    """After commit: out-of-window events one task each (their alerts must not wait);
    in-window events in tasks of BATCH_SIZE, which the worker processes together."""

    def send() -> None:
        for event_id in urgent:
            publish(event_id)
        for start in range(0, len(batched), BATCH_SIZE):
            publish_batch(batched[start : start + BATCH_SIZE])

    if urgent or batched:
        transaction.on_commit(send)


def publish_batch(event_ids: list[int]) -> bool:
    """Send in-window events to the worker as one task; True when the broker took it."""
    from shopfloor.quality import tasks

    try:
        tasks.process_events.apply_async(args=[event_ids], retry_policy=RETRY_POLICY)
    except Exception as exc:  # broker unreachable: the relay will retry
        log.warning("outbox events %s.. left for the relay: %s", event_ids[:3], exc)
        return False
    return True  # nothing written: the relay finds unprocessed events by age
