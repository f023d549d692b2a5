"""Benchmark: the supervisor board at 20 / 2,000 / 20,000 lots and a lot history at
200 / 2,000 / 20,000 readings, in a throwaway test database.

Run: DEBUG=1 DATABASE_URL=postgres://postgres@127.0.0.1:5432/sf_board \
     var/venv/bin/python bench/bench_board.py
Prints one JSON object; run() returns the same dict. Bounded: after one warm-up request,
board_ms_<n> is the median of BOARD_REPEATS requests (one request swings by 20-60 % on a
shared machine); the lot history is one request per size. Times are wall-clock for a full
request through the Django test client (queries + render); compare sizes within one run
rather than across machines.

DEBUG=1 is fair here: Django (4.1 on) uses the cached template loader whatever DEBUG is,
so templates are compiled once either way; what DEBUG adds is the template engine's
error annotations (no cost while rendering succeeds) and a log of SQL queries, which the
bench keeps anyway to count them. (DEBUG=0 would also need a SECRET_KEY and turns on the
HTTPS redirect.)
"""

from __future__ import annotations

import json
import os
import statistics
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")
os.environ.setdefault("DEBUG", "1")


BOARD_REPEATS = 5


def _timed_get(client: Any, url: str) -> tuple[float, int]:
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    with CaptureQueriesContext(connection) as ctx:
        start = time.perf_counter()
        response = client.get(url)
        body = b"".join(response.streaming_content) if response.streaming else response.content
        elapsed = (time.perf_counter() - start) * 1000
    assert response.status_code == 200, (url, response.status_code, body[:300])
    return round(elapsed, 1), len(ctx.captured_queries)


def run() -> dict[str, Any]:
    import django

    django.setup()
    from django.db import connection
    from django.test import Client
    from django.test.utils import setup_test_environment, teardown_test_environment

    from shopfloor.floor.models import LotStep
    from shopfloor.plant.models import Lot, WorkCenter
    from tests import factories
    from tests.factories import bulk_lots, bulk_readings

    setup_test_environment()
    old_name = connection.settings_dict["NAME"]
    # A database of its own, so a test run on the same DATABASE_URL is never clobbered.
    connection.settings_dict.setdefault("TEST", {})["NAME"] = f"{old_name}_bench_board"
    connection.creation.create_test_db(verbosity=0, autoclobber=True)
    results: dict[str, Any] = {}
    try:
        floor = factories.make_floor()
        centers = list(WorkCenter.objects.order_by("code"))
        client = Client()
        client.force_login(floor.personas["supervisor"].user)
        have = 1
        for size in (20, 2000, 20000):
            bulk_lots(floor.routing, floor.job, size - have, centers, prefix=f"S{size}")
            have = size
            assert Lot.objects.filter(status__in=["not_started", "in_process"]).count() == size
            client.get("/board/")  # warm the template and connection
            runs = [_timed_get(client, "/board/") for _ in range(BOARD_REPEATS)]
            results[f"board_ms_{size}"] = statistics.median(ms for ms, _ in runs)
            results[f"board_queries_{size}"] = max(queries for _, queries in runs)
        operator = floor.personas["operator"]
        for n in (200, 2000, 20000):
            lot = bulk_lots(floor.routing, floor.job, 1, centers[:1], prefix=f"H{n}")[0]
            step = LotStep.objects.get(lot=lot, position=20)
            bulk_readings(step, operator, n)
            ms, queries = _timed_get(client, f"/quality/lots/{lot.code}/")
            results[f"history_ms_{n}"] = ms
            results[f"history_queries_{n}"] = queries
    finally:
        connection.creation.destroy_test_db(old_name, verbosity=0)
        teardown_test_environment()
    return results


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
