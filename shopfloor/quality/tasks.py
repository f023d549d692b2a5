"""Celery tasks of the quality app: thin wrappers that take ids and call one service.

All tasks are idempotent (a row claim or a unique constraint decides who wins), are
acknowledged late (a worker that dies mid-task gets the message redelivered) and retry
a bounded number of times with exponential backoff.
"""

from __future__ import annotations

import logging
import os
import time

import redis
from celery import shared_task
from django.conf import settings
from django.db import InterfaceError, OperationalError

from shopfloor.audit import services as audit
from shopfloor.chemistry import services as chemistry
from shopfloor.quality import event_batch, notify
from shopfloor.quality.services import alerts, deadlines, notifications

log = logging.getLogger("shopfloor.tasks")

# Fault-injection hook for the worker tests only: seconds to sleep after an event's
# transaction committed and before the task returns (and the message is acknowledged),
# so a test can kill the worker in exactly that gap. Unset in every real deployment.
PAUSE_ENV = "SHOPFLOOR_FAULT_PAUSE_AFTER_EVENT_S"

_DB_ERRORS = (OperationalError, InterfaceError)


@shared_task(
    acks_late=True,
    autoretry_for=_DB_ERRORS,
    max_retries=5,
    retry_backoff=True,
    retry_backoff_max=60,
    retry_jitter=True,
)
def process_event(event_id: int) -> None:
    outcome = alerts.handle_event(event_id)
    pause = os.environ.get(PAUSE_ENV)
    if pause and outcome.acted:
        time.sleep(float(pause))


@shared_task(
    acks_late=True,
    autoretry_for=_DB_ERRORS,
    max_retries=5,
    retry_backoff=True,
    retry_backoff_max=60,
    retry_jitter=True,
)
def process_events(event_ids: list[int]) -> dict[str, int]:
    """In-window reading events, processed together with any others waiting (one
    transaction, one SPC update per series: shopfloor.quality.event_batch)."""
    return event_batch.handle_batch(event_ids)


@shared_task(acks_late=True, autoretry_for=_DB_ERRORS, max_retries=3, retry_backoff=True)
def relay_outbox() -> dict[str, int]:
    return notifications.relay_outbox()


@shared_task(acks_late=True, autoretry_for=_DB_ERRORS, max_retries=3, retry_backoff=True)
def seal_audit() -> int:
    """Chain the audit entries committed since the last pass (one sealer at a time)."""

    return audit.seal().sealed


@shared_task(acks_late=True, autoretry_for=_DB_ERRORS, max_retries=3, retry_backoff=True)
def check_queue_times() -> dict[str, int]:
    return deadlines.check_queue_times()


@shared_task(acks_late=True, autoretry_for=_DB_ERRORS, max_retries=3, retry_backoff=True)
def check_due_dates() -> dict[str, int]:
    return deadlines.check_due_dates()


@shared_task(acks_late=True, autoretry_for=_DB_ERRORS, max_retries=3, retry_backoff=True)
def check_bath_analyses() -> dict[str, int]:
    """Bath analyses that fell due or overdue raise an alert (shopfloor.chemistry)."""

    return chemistry.check_analyses()


@shared_task(
    acks_late=True,
    autoretry_for=(*_DB_ERRORS, OSError),
    max_retries=5,
    retry_backoff=True,
    retry_backoff_max=300,
)
def notify_alert(alert_id: int) -> bool:
    return notifications.notify_alert(alert_id)


@shared_task(
    acks_late=True,
    autoretry_for=(notify.WebhookFailed,),
    max_retries=5,
    retry_backoff=2,
    retry_backoff_max=300,
    retry_jitter=True,
)
def deliver_webhook(alert_id: int) -> None:
    notifications.deliver_webhook(alert_id)


@shared_task(acks_late=True)
def noop(marker: str = "") -> None:
    """Writes nothing to the database; with a marker it sets a Redis key to the time it
    ran (the benchmark's reference for a bare task round trip)."""
    if marker:
        if settings.REDIS_URL:
            redis.Redis.from_url(settings.REDIS_URL).set(marker, repr(time.time()), ex=300)
