"""Benchmark: how fast an out-of-window reading becomes an alert row, under load.

One real Celery worker, 20 client threads recording readings through the floor service
like tablets do: mostly in-window readings (each updates its SPC series through the same
event path) and, as the last reading on each lot, one out of window (it holds the lot,
so each lot gets one). Each client pauses THINK_SECONDS (3 s) between readings, a busy
tablet (an operator takes a reading every few seconds), and starts at its own moment
within the first pause (operators do not press save in step with each other).

Passes, each on a fresh worker:
- the worker as deployed (docker-compose.yml: one worker, prefork pool, 2 processes):
  the headline `alert_p95_s`;
- the same worker with one process (keys ending _solo);
- the deployed worker at a 0.5 s pause (keys ending _stress): 20 clients then offer
  more than the worker, sharing 2 cores with PostgreSQL and the clients, can absorb;
  the queue grows and both the alert and the no-op round trip wait in it.

For every out-of-window reading the latency is reading.recorded_at -> alert.created_at
(both stamped by this machine's clock). Beside it, in the same run and under the same
load, each client also sends a no-op Celery task whose round trip (send -> the task
setting a Redis key) is the reference: the alert path's cost is reported as a ratio.

Needs DATABASE_URL (PostgreSQL) and REDIS_URL; uses a throwaway test_<name> database
that it creates and drops.

    DATABASE_URL=postgres://... REDIS_URL=redis://127.0.0.1:6379/5 python bench/bench_alerts.py
"""

from __future__ import annotations

import json
import os
import random
import statistics
import sys
import threading
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")
os.environ.setdefault("DEBUG", "1")

CLIENTS = 20
READINGS_PER_CLIENT = 3  # lots per client, each ending in one out-of-window reading
IN_WINDOW_PER_LOT = 4  # hole-wall copper samples 1-4, in window (SPC path)
THINK_SECONDS = float(os.environ.get("BENCH_THINK_SECONDS", "3.0"))
STRESS_THINK_SECONDS = 0.5
WAIT_SECONDS = 120.0


def _p95(values: list[float]) -> float:
    if len(values) < 2:
        return values[0] if values else float("nan")
    return statistics.quantiles(values, n=20, method="inclusive")[18]


def _measure(think: float, pool: str, concurrency: int) -> dict[str, float]:
    import django

    django.setup()
    import redis
    from django.conf import settings
    from django.db import connection, connections

    if (
        settings.CELERY_TASK_ALWAYS_EAGER
        or "postgresql" not in connection.vendor + settings.DATABASES["default"]["ENGINE"]
    ):
        raise SystemExit("bench_alerts needs REDIS_URL and a PostgreSQL DATABASE_URL")
    original_name = connection.settings_dict["NAME"]
    connection.creation.create_test_db(verbosity=0, autoclobber=True, keepdb=False)
    factory = None
    try:
        import tempfile

        from shopfloor.quality import tasks
        from shopfloor.quality.models import Alert
        from tests import factories, helpers
        from tests.worker.procs import WorkerFactory, purge, wait_for

        purge(settings.REDIS_URL)
        tmp = tempfile.TemporaryDirectory(prefix="sf-bench-")
        factory = WorkerFactory(settings.REDIS_URL, Path(tmp.name))
        factory.start(pool=pool, concurrency=concurrency)
        floor = factories.make_floor()
        run_id = uuid.uuid4().hex[:6]
        steps = [
            [
                helpers.start_at(floor, factories.new_lot(floor, code=f"B{run_id}-{c}-{r}"))
                for r in range(READINGS_PER_CLIENT)
            ]
            for c in range(CLIENTS)
        ]
        readings: list[int] = []
        noops: list[tuple[str, float]] = []
        lock = threading.Lock()
        errors: list[str] = []

        def client(my_steps: list, phase: float) -> None:
            try:
                time.sleep(phase)
                for step in my_steps:
                    for sample in range(1, IN_WINDOW_PER_LOT + 1):
                        helpers.record(
                            floor, step, "hole_wall_copper", 24.0 + sample * 0.3, sample=sample
                        )
                        time.sleep(think)
                    r = helpers.record(floor, step, "surface_copper", 70.0)
                    key = f"bench:noop:{uuid.uuid4().hex}"
                    sent = time.time()
                    tasks.noop.delay(key)
                    with lock:
                        readings.append(r.pk)
                        noops.append((key, sent))
            except Exception as exc:  # reported, not hidden
                errors.append(repr(exc))
            finally:
                connections.close_all()

        # Operators work independently: each client starts at its own moment within
        # the first pause, so readings arrive spread out instead of in lock-step bursts.
        phases = random.Random(7).sample(range(1000), CLIENTS)
        threads = [
            threading.Thread(target=client, args=(s, think * p / 1000))
            for s, p in zip(steps, phases, strict=True)
        ]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=WAIT_SECONDS)
        if errors:
            raise RuntimeError(f"{len(errors)} client error(s): {errors[:3]}")
        total = CLIENTS * READINGS_PER_CLIENT
        if not wait_for(
            lambda: Alert.objects.filter(reading_id__in=readings).count() == total,
            WAIT_SECONDS,
            0.25,
        ):
            raise RuntimeError("not every reading became an alert in time")
        client_redis = redis.Redis.from_url(settings.REDIS_URL)
        wait_for(lambda: all(client_redis.exists(k) for k, _ in noops), 30, 0.25)
        alert_lat = [
            (created - recorded).total_seconds()
            for created, recorded in Alert.objects.filter(reading_id__in=readings).values_list(
                "created_at", "reading__recorded_at"
            )
        ]
        noop_lat = [
            float(client_redis.get(k)) - sent
            for k, sent in noops
            if client_redis.get(k) is not None
        ]
        client_redis.close()
        alert_p95, noop_p95 = _p95(alert_lat), _p95(noop_lat)
        return {
            "readings": float(total),
            "clients": float(CLIENTS),
            "think_seconds": think,
            "in_window_readings": float(CLIENTS * READINGS_PER_CLIENT * IN_WINDOW_PER_LOT),
            "alert_p50_s": statistics.median(alert_lat),
            "alert_p95_s": alert_p95,
            "noop_task_p50_s": statistics.median(noop_lat),
            "noop_task_p95_s": noop_p95,
            "alert_to_noop_p95_ratio": alert_p95 / noop_p95 if noop_p95 > 0 else float("nan"),
        }
    finally:
        if factory is not None:
            factory.stop_all()
        connections.close_all()
        connection.creation.destroy_test_db(original_name, verbosity=0)


def run() -> dict[str, float]:
    # The worker as deployed (docker-compose.yml): one worker, two pool processes.
    results = _measure(THINK_SECONDS, "prefork", 2)
    results["worker_processes"] = 2.0
    # The same worker with a single process, for comparison.
    solo = _measure(THINK_SECONDS, "solo", 1)
    results.update({f"{key}_solo": value for key, value in solo.items()})
    stress = _measure(STRESS_THINK_SECONDS, "prefork", 2)
    results.update({f"{key}_stress": value for key, value in stress.items()})
    return results


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
