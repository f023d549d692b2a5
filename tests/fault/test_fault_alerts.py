"""Faults: a worker killed before it acknowledges, and Redis down while readings arrive.

Both check invariant 5 (DESIGN.md): every out-of-window reading ends in exactly one
alert and one hold, and each alert is delivered (webhook) once. Acknowledge-late and
redelivery after the visibility timeout are Celery/kombu's documented behaviour for
the Redis transport (acks_late + visibility_timeout, Celery "Using Redis" guide).
"""

# ruff: noqa: F811 - pytest fixtures imported from tests/worker/procs.py are arguments here
from __future__ import annotations

import json
import threading
import time
from collections import Counter
from http.server import BaseHTTPRequestHandler, HTTPServer

import pytest
import redis

from shopfloor.quality import tasks
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent
from shopfloor.quality.services import notifications
from tests import factories, helpers
from tests.worker.procs import broker_at, private_redis, wait_for, workers  # noqa: F401

pytestmark = [pytest.mark.fault, pytest.mark.django_db(transaction=True), pytest.mark.timeout(120)]

VISIBILITY = 5


def test_worker_killed_after_commit_before_ack(workers, settings):
    first = workers.start(CELERY_VISIBILITY_TIMEOUT=str(VISIBILITY), **{tasks.PAUSE_ENV: "60"})
    floor = factories.make_floor()
    step = helpers.start_at(floor, floor.lot)
    helpers.record(floor, step, "surface_copper", 70.0)

    # The side effect is committed while the task sleeps before acknowledging.
    assert wait_for(lambda: Alert.objects.count() == 1, timeout=20), first.log()[-2000:]
    broker = redis.Redis.from_url(settings.REDIS_URL)
    assert broker.hlen("unacked") == 1  # delivered, not acknowledged
    killed_at = time.monotonic()
    first.kill()

    # Let the message become visible again, then a fresh worker picks it up.
    time.sleep(max(0.0, VISIBILITY + 1 - (time.monotonic() - killed_at)))
    second = workers.start(CELERY_VISIBILITY_TIMEOUT=str(VISIBILITY))
    assert wait_for(lambda: second.count("succeeded") >= 1, timeout=25), second.log()[-2000:]
    assert wait_for(lambda: broker.hlen("unacked") == 0, timeout=5)
    assert Alert.objects.count() == 1 and Hold.objects.count() == 1
    assert Nonconformance.objects.count() == 1
    broker.close()


@pytest.fixture
def receiver():
    got: list[int] = []

    class Handler(BaseHTTPRequestHandler):
        def do_POST(self):
            body = self.rfile.read(int(self.headers["Content-Length"]))
            got.append(json.loads(body)["id"])
            self.send_response(204)
            self.end_headers()

        def log_message(self, *args):
            pass

    server = HTTPServer(("127.0.0.1", 0), Handler)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    yield f"http://127.0.0.1:{server.server_port}/alerts", got
    server.shutdown()
    server.server_close()


def test_redis_down_then_relay_delivers_every_alert_once(workers, broker_at, receiver):
    url, webhook_hits = receiver
    worker = workers.start(
        redis_url=broker_at.url, ALERT_WEBHOOK_URL=url, ALERT_WEBHOOK_SECRET="fault-test"
    )
    floor = factories.make_floor()
    lots = [floor.lot, factories.new_lot(floor), factories.new_lot(floor)]
    steps = [helpers.start_at(floor, lot) for lot in lots]

    broker_at.stop()
    readings = [helpers.record(floor, s, "surface_copper", 20.0 + i) for i, s in enumerate(steps)]

    events = OutboxEvent.objects.filter(payload__reading__in=[r.pk for r in readings])
    assert events.count() == 3 and not events.filter(published_at__isnull=False).exists()
    assert Alert.objects.count() == 0

    broker_at.start()  # an empty Redis: everything in flight was lost with the old one
    result = notifications.relay_outbox()
    assert result["published"] == 3

    def all_done() -> bool:
        return (
            Alert.objects.filter(notified_at__isnull=False).count() == 3 and len(webhook_hits) >= 3
        )

    assert wait_for(all_done, timeout=40, every=0.25), worker.log()[-3000:]
    time.sleep(1.0)  # room for a duplicate to show up
    assert Alert.objects.count() == 3 and Hold.objects.count() == 3
    assert Nonconformance.objects.count() == 3  # one per lot
    assert {a.reading_id for a in Alert.objects.all()} == {r.pk for r in readings}
    assert Counter(webhook_hits) == Counter(Alert.objects.values_list("pk", flat=True))
