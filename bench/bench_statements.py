"""Round trips and Python time of one reading POST, measured in-process.

Run by the harness after seeding (`python bench/bench_statements.py TOKEN`): posts
readings through the real API view (DRF test client, instrument token) on the bench
lots and counts, per reading, every statement Django sends plus the BEGIN and COMMIT of
each transaction (psycopg sends BEGIN before the first statement of a transaction and
COMMIT at its end, neither passes Django's execute hook, so they are counted from the
commits). Python time is the request's wall time less the time spent waiting on
PostgreSQL. Prints one JSON line.
"""

from __future__ import annotations

import json
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")

import django

django.setup()

from django.db import connection  # noqa: E402
from rest_framework.test import APIClient  # noqa: E402

READINGS = 200
FIRST_SAMPLE = 990  # above what the load phases use


class Counter:
    def __init__(self) -> None:
        self.statements = 0
        self.db_seconds = 0.0

    def __call__(self, execute, sql, params, many, context):  # type: ignore[no-untyped-def]
        start = time.perf_counter()
        try:
            return execute(sql, params, many, context)
        finally:
            self.db_seconds += time.perf_counter() - start
            self.statements += 1


def main(token: str) -> None:
    client = APIClient(HTTP_HOST="127.0.0.1")  # a host ALLOWED_HOSTS lists
    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    commits = {"n": 0, "seconds": 0.0}
    original_commit = connection.commit

    def counting_commit() -> None:
        start = time.perf_counter()
        try:
            original_commit()
        finally:
            commits["n"] += 1
            commits["seconds"] += time.perf_counter() - start

    original_rollback = connection.rollback

    def counting_rollback() -> None:  # a refused reading ends its transaction this way
        start = time.perf_counter()
        try:
            original_rollback()
        finally:
            commits["n"] += 1
            commits["seconds"] += time.perf_counter() - start

    connection.commit = counting_commit  # type: ignore[method-assign]
    connection.rollback = counting_rollback  # type: ignore[method-assign]
    # Warm up: connection, token cache, URL resolver.
    for k in range(5):
        client.post(
            "/api/v1/readings/",
            {
                "lot": f"BENCH-{k:04d}",
                "quantity": "hole_wall_copper",
                "value": 25,
                "unit": "um",
                "sample_index": FIRST_SAMPLE - 1,
            },
            format="json",
        )
    counter = Counter()
    commits.update(n=0, seconds=0.0)
    statuses: dict[int, int] = {}
    wall = 0.0
    with connection.execute_wrapper(counter):
        for i in range(READINGS):
            body = {
                "lot": f"BENCH-{i % 400:04d}",
                "quantity": "hole_wall_copper",
                "value": 24.5,
                "unit": "um",
                "sample_index": FIRST_SAMPLE + i // 400,
            }
            start = time.perf_counter()
            reply = client.post(
                "/api/v1/readings/", body, format="json", HTTP_IDEMPOTENCY_KEY=f"stmt-{i}"
            )
            wall += time.perf_counter() - start
            statuses[reply.status_code] = statuses.get(reply.status_code, 0) + 1
    # Each transaction costs a BEGIN and a COMMIT (or ROLLBACK) round trip besides its
    # statements (tests/api/test_reading_round_trips.py counts the same way).
    round_trips = counter.statements + 2 * commits["n"]
    db = counter.db_seconds + commits["seconds"]
    print(
        "BENCHJSON "
        + json.dumps(
            {
                "ingest_statements_per_reading": round(round_trips / READINGS, 2),
                "ingest_python_ms_per_reading": round(1000 * (wall - db) / READINGS, 2),
                "ingest_db_wait_ms_per_reading": round(1000 * db / READINGS, 2),
                "ingest_statements_statuses": {str(k): v for k, v in statuses.items()},
            }
        )
    )


if __name__ == "__main__":
    main(sys.argv[1])
