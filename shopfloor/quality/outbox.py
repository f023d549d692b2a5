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


def publish(event_id: int) -> bool:
    """Send one event to the worker; True when the broker took it."""
    try:
        from shopfloor.quality import tasks

        tasks.process_event.delay(event_id)
    except Exception as exc:  # broker unreachable (or task error in eager mode): relay retries
        log.warning("outbox event %s left for the relay: %s", event_id, exc)
        return False
    OutboxEvent.objects.filter(pk=event_id, published_at__isnull=True).update(
        published_at=timezone.now()
    )
    return True


def enqueue(event: OutboxEvent) -> None:
    event_id = event.pk
    transaction.on_commit(lambda: publish(event_id))
