"""Through a real Celery worker: one out-of-window reading -> one alert, hold and NCR.

Invariant 5 of the design (DESIGN.md): a reading outside its window always ends in
exactly one alert and one hold. The window is the library's pattern-plate surface
copper 33.75-57.5 um (shop practice, derived from IPC-6012 class 2 hole plating).
"""

from __future__ import annotations

import time

import pytest
from django.db import transaction

from shopfloor.plant.models import Lot
from shopfloor.quality import tasks
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent
from tests import factories, helpers
from tests.worker.procs import wait_for

pytestmark = [pytest.mark.worker, pytest.mark.django_db(transaction=True), pytest.mark.timeout(90)]

TASK = "shopfloor.quality.tasks.process_event"
# in-window readings' events go to the batch task (outbox.enqueue)
BATCH_TASK = "shopfloor.quality.tasks.process_events"


def _counts() -> tuple[int, int, int]:
    return Alert.objects.count(), Hold.objects.count(), Nonconformance.objects.count()


def test_reading_to_alert_hold_ncr_and_duplicate_delivery(workers):
    worker = workers.start()
    floor = factories.make_floor()
    step = helpers.start_at(floor, floor.lot)

    reading = helpers.record(floor, step, "surface_copper", 61.0)

    assert wait_for(lambda: _counts() == (1, 1, 1), timeout=20), worker.log()[-2000:]
    event = helpers.event_for(reading)
    assert wait_for(lambda: worker.count(f"{TASK}[") >= 2, timeout=10)  # received+succeeded
    # The same event delivered twice more (a relay repeat, a redelivery): still one.
    tasks.process_event.delay(event.pk)
    tasks.process_event.delay(event.pk)
    assert wait_for(lambda: worker.count("succeeded") >= 3, timeout=15), worker.log()[-2000:]
    assert _counts() == (1, 1, 1)
    assert Lot.objects.get(pk=floor.lot.pk).on_hold
    alert = Alert.objects.get()
    assert alert.event_id == event.pk and alert.severity == "critical"  # 3.5 > 2.375 um
    assert wait_for(lambda: Alert.objects.filter(notified_at__isnull=False).exists(), 10)


def test_rolled_back_reading_never_reaches_the_worker(workers):
    worker = workers.start()
    floor = factories.make_floor()
    step = helpers.start_at(floor, floor.lot)
    with pytest.raises(RuntimeError), transaction.atomic():
        helpers.record(floor, step, "surface_copper", 70.0)
        raise RuntimeError("operator cancelled; the transaction rolls back")
    # A later good reading proves the worker is consuming; the rolled-back one left nothing.
    helpers.record(floor, step, "surface_copper", 41.0, sample=2)
    assert wait_for(lambda: worker.count("succeeded") >= 1, timeout=20), worker.log()[-2000:]
    time.sleep(0.5)
    assert OutboxEvent.objects.count() == 1
    assert OutboxEvent.objects.get().processed_at is not None
    assert _counts() == (0, 0, 0)
    # one task, the in-window reading's batch task: received + succeeded lines
    assert worker.count(f"{BATCH_TASK}[") == 2
    assert worker.count(f"{TASK}[") == 0
