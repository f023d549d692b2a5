"""Hand committed outbox events to Celery: the services' one door to the workers.

Services write an OutboxEvent inside their transaction and call `enqueue(event)`.
Publishing happens only after commit; if the broker is down the event simply stays
unpublished and the relay task (Celery beat) publishes it later, so nothing is lost.

Services never import a tasks module (tasks import services, so that would be a circle):
they queue a task by its registered name with `queue_task`. One task, `process_event`,
acts on every event: it looks the event's kind up among the handlers each app registers
in its AppConfig.ready() (`register`).
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Sequence
from typing import Any

from celery import Task
from django.db import transaction
from django.utils import timezone

from shopfloor.celery import app as celery_app
from shopfloor.quality.models import OutboxEvent

log = logging.getLogger("shopfloor.outbox")

# Task names (Celery registers each task under its module path; settings' beat schedule
# uses the same names).
PROCESS_EVENT = "shopfloor.quality.tasks.process_event"
PROCESS_EVENTS = "shopfloor.quality.tasks.process_events"
NOTIFY_ALERT = "shopfloor.quality.tasks.notify_alert"
DELIVER_WEBHOOK = "shopfloor.quality.tasks.deliver_webhook"

#: What an event handler returns: the alerts it raised (notified after commit).
Handler = Callable[[OutboxEvent], Sequence[Any]]
_HANDLERS: dict[str, Handler] = {}


def register(kind: str, handler: Handler) -> None:
    """Route events of `kind` to `handler` (called from an AppConfig.ready())."""
    existing = _HANDLERS.get(kind)
    if existing is not None and existing is not handler:
        raise ValueError(f"outbox event kind {kind!r} already has a handler: {existing!r}")
    _HANDLERS[kind] = handler


def handler_for(kind: str) -> Handler | None:
    return _HANDLERS.get(kind)


def queue_task(
    name: str,
    *,
    args: Sequence[Any] = (),
    kwargs: dict[str, Any] | None = None,
    countdown: float | None = None,
    retry_policy: dict[str, Any] | None = None,
) -> None:
    """Send the task registered as `name` to the broker (or run it now in eager mode).

    Raises what the broker client raises when it is unreachable; callers decide whether
    the relay picks the work up later.
    """
    options: dict[str, Any] = {}
    if countdown is not None:
        options["countdown"] = countdown
    if retry_policy is not None:
        options["retry_policy"] = retry_policy
    _task(name).apply_async(args=list(args), kwargs=kwargs or {}, **options)


def _task(name: str) -> Task:
    """The registered task; the first call in a web process loads every app's tasks.py
    (Celery's autodiscovery, which a worker runs when it starts)."""
    if name not in celery_app.tasks:
        celery_app.loader.import_default_modules()
    return celery_app.tasks[name]


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
    try:
        queue_task(PROCESS_EVENT, args=[event_id], retry_policy=RETRY_POLICY)
    except Exception as exc:  # broker unreachable: the relay will retry
        log.warning("outbox event %s left for the relay: %s", event_id, exc)
        return False
    if republish:
        OutboxEvent.objects.filter(pk=event_id).update(published_at=timezone.now())
    return True


def urgent(payload: dict[str, Any]) -> bool:
    """An event that may raise an alert at once: a reading out of its window, or one
    whose sample set failed. The rest (in-window readings) are processed in batches."""
    set_info = payload.get("set")
    set_failed = isinstance(set_info, dict) and set_info.get("in_window") is False
    return payload.get("in_window") is not True or set_failed


def enqueue(event: OutboxEvent) -> None:
    """After commit, hand the event to the worker: an urgent one as its own task (the
    alert's fast path), an in-window reading's as a batch task, which also takes the
    other in-window events waiting by then (one SPC update per series per batch)."""
    event_id = event.pk
    if event.kind == "reading.recorded" and not urgent(event.payload or {}):
        transaction.on_commit(lambda: publish_batch([event_id]))
    else:
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
    try:
        queue_task(PROCESS_EVENTS, args=[event_ids], retry_policy=RETRY_POLICY)
    except Exception as exc:  # broker unreachable: the relay will retry
        log.warning("outbox events %s.. left for the relay: %s", event_ids[:3], exc)
        return False
    return True  # nothing written: the relay finds unprocessed events by age
