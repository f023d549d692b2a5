"""PostgreSQL restarted while instruments post readings through gunicorn.

What must hold (DESIGN.md invariant 6, "a retried request never records twice"):
- while the database is down the API answers 503 with {"error": "database_unavailable"}
  (and Retry-After), never a 500, so an instrument knows the reading did not land;
- every client retries the SAME request with the SAME Idempotency-Key until it gets 201,
  and afterwards each reading exists exactly once (none lost, none doubled), counted by a
  direct query to the throwaway database, not through the app;
- the hash-chained audit trail still verifies (`manage.py audit verify` exits 0).

Bounded on purpose: 8 client threads x 30 readings, each request retried for at most
RETRY_SECONDS, one outage of OUTAGE_SECONDS; loopback addresses only.
"""

from __future__ import annotations

import http.client
import json
import sys
import threading
import time
import uuid
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

import psycopg
import pytest

from tests.fault.conftest import REPO, ThrowawayCluster, app_env, manage, run_gunicorn

pytestmark = [pytest.mark.fault, pytest.mark.timeout(120)]

CLIENTS = 8
READINGS_PER_CLIENT = 30
OUTAGE_SECONDS = 2.0
RETRY_SECONDS = 25.0
STEP_CODE = "pattern_plate_copper"


# --- seed (runs in a subprocess against the throwaway database) ----------------------


def _in_window_value(m: dict[str, Any]) -> float:
    """A value well inside the window, so no reading puts its lot on hold mid-test."""
    lo, hi, target = m.get("min"), m.get("max"), m.get("target")
    if target is not None:
        return float(target)
    if lo is not None and hi is not None:
        return (float(lo) + float(hi)) / 2
    if lo is not None:
        return float(lo) * 1.25 + 1
    if hi is not None:
        return float(hi) * 0.75
    return 1.0


def seed(count: int) -> None:
    """A released routing, enough lots started at pattern plating for `count` distinct
    samples, and an instrument token at that work center; print them as JSON."""
    from tests import factories
    from tests.api.helpers import advance_to, issue_token

    floor = factories.make_floor()
    operator = floor.personas["operator"]
    job = factories.make_job(floor.routing.part_revision, floor.routing, quantity=100_000)
    readings: list[dict[str, Any]] = []
    lot = floor.lot
    work_center = None
    while len(readings) < count:
        step = advance_to(lot, STEP_CODE, operator)
        work_center = step.work_center.code
        for m in step.plan:
            if m.get("attribute"):
                continue
            for sample in range(1, int(m.get("samples") or 1) + 1):
                readings.append({"lot": lot.code, "quantity": m["quantity"],
                                 "value": _in_window_value(m), "unit": m["unit"],
                                 "sample_index": sample})
        lot = factories.make_lot(floor.routing, job)
    assert work_center is not None
    token = issue_token("fault-gauge", work_center)
    print(json.dumps({"token": token, "readings": readings[:count]}))


# --- clients ---------------------------------------------------------------------------


@dataclass
class Tally:
    lock: threading.Lock = field(default_factory=threading.Lock)
    statuses: Counter = field(default_factory=Counter)
    errors_503: list[dict[str, Any]] = field(default_factory=list)
    unexpected: list[str] = field(default_factory=list)
    connection_errors: int = 0
    done: int = 0
    final: dict[str, int] = field(default_factory=dict)


def _post(port: int, token: str, key: str, body: bytes) -> tuple[int, bytes, dict[str, str]]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
    try:
        conn.request("POST", "/api/v1/readings/", body=body, headers={
            "Content-Type": "application/json", "Authorization": f"Token {token}",
            "Idempotency-Key": key,
        })
        reply = conn.getresponse()
        return reply.status, reply.read(), {k.lower(): v for k, v in reply.getheaders()}
    finally:
        conn.close()


def _client(port: int, token: str, jobs: list[tuple[str, dict[str, Any]]], tally: Tally) -> None:
    for key, payload in jobs:
        body = json.dumps(payload).encode()
        deadline = time.monotonic() + RETRY_SECONDS
        attempt = 0
        status = 0
        while time.monotonic() < deadline:
            attempt += 1
            try:
                status, raw, headers = _post(port, token, key, body)
            except (OSError, http.client.HTTPException):
                with tally.lock:
                    tally.connection_errors += 1
                time.sleep(min(0.05 * 2**attempt, 0.5))
                continue
            with tally.lock:
                tally.statuses[status] += 1
                if status == 503:
                    tally.errors_503.append({"body": raw[:300], "headers": headers})
                elif status not in (201, 409):
                    tally.unexpected.append(f"{status} for {key}: {raw[:500]!r}")
            # 503: the database was away; 409: the first try of this key is still running.
            if status in (503, 409):
                time.sleep(min(0.05 * 2**attempt, 0.5))
                continue
            break
        with tally.lock:
            tally.final[key] = status
            tally.done += 1


# --- the test --------------------------------------------------------------------------


def test_readings_survive_a_postgres_restart_exactly_once(pg_cluster: ThrowawayCluster):
    started = time.monotonic()
    env = app_env(pg_cluster.url)
    migrated = manage(env, "migrate", "--noinput")
    assert migrated.returncode == 0, migrated.stderr[-3000:]

    total = CLIENTS * READINGS_PER_CLIENT
    seeded = manage_seed(env, total)
    token, readings = seeded["token"], seeded["readings"]
    assert len(readings) == total

    run_id = uuid.uuid4().hex[:8]
    keyed = [(f"fault-{run_id}-{i}", r) for i, r in enumerate(readings)]
    per_client = [keyed[i::CLIENTS] for i in range(CLIENTS)]
    tally = Tally()

    with run_gunicorn(env, pg_cluster.directory) as server:
        threads = [threading.Thread(target=_client, args=(server.port, token, jobs, tally),
                                    daemon=True) for jobs in per_client]
        for t in threads:
            t.start()
        # Restart once a quarter of the readings are in, so most land around the outage.
        wait_until = time.monotonic() + 20
        while tally.done < total // 4 and time.monotonic() < wait_until:
            time.sleep(0.02)
        done_before_outage = tally.done
        pg_cluster.stop()
        time.sleep(OUTAGE_SECONDS)
        pg_cluster.start()
        for t in threads:
            t.join(timeout=RETRY_SECONDS + 15)
        assert not any(t.is_alive() for t in threads), "a client thread did not finish"
        server_log = server.log()

    assert done_before_outage < total, "every reading landed before the outage; nothing tested"
    assert not tally.unexpected, (tally.unexpected[:5], server_log)
    assert tally.statuses[500] == 0
    # The outage was seen, and it was answered as a clear, retryable 503.
    assert tally.errors_503, f"no 503 during the outage: {dict(tally.statuses)}"
    for seen in tally.errors_503:
        assert json.loads(seen["body"])["error"] == "database_unavailable", seen
        assert seen["headers"].get("retry-after"), seen
        assert seen["headers"].get("content-type", "").startswith("application/json")
    failed = {k: s for k, s in tally.final.items() if s != 201}
    assert not failed, (dict(list(failed.items())[:5]), dict(tally.statuses), server_log)

    # Straight to the database: each key once, each sample once, nothing extra.
    with psycopg.connect(f"host=127.0.0.1 port={pg_cluster.port} user=postgres "
                         f"dbname={pg_cluster.database}") as db:
        per_key = dict(db.execute(
            "SELECT key, count(*) FROM floor_idempotencyrecord WHERE key LIKE %s GROUP BY key",
            [f"fault-{run_id}-%"],
        ).fetchall())
        per_sample = db.execute(
            "SELECT l.code, r.quantity, r.sample_index, count(*) FROM floor_reading r "
            "JOIN floor_lotstep s ON s.id = r.lot_step_id JOIN plant_lot l ON l.id = s.lot_id "
            "GROUP BY l.code, r.quantity, r.sample_index"
        ).fetchall()
    assert per_key == {key: 1 for key, _ in keyed}
    counts = {(code, q, s): n for code, q, s, n in per_sample}
    expected = {(r["lot"], r["quantity"], r["sample_index"]) for r in readings}
    assert set(counts) == expected, "a reading was lost or an unexpected one was recorded"
    assert all(n == 1 for n in counts.values()), "a reading was recorded twice"

    verified = manage(env, "audit", "verify")
    assert verified.returncode == 0, verified.stdout + verified.stderr
    assert "intact" in verified.stdout
    assert time.monotonic() - started < 90, "the fault test should stay well under a minute"


def manage_seed(env: dict[str, str], count: int) -> dict[str, Any]:
    import subprocess

    code = (
        "import django; django.setup(); "
        f"from tests.fault.test_postgres_restart import seed; seed({count})"
    )
    done = subprocess.run([sys.executable, "-c", code], cwd=REPO, env=env, timeout=120,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr[-4000:]
    return json.loads(done.stdout.strip().splitlines()[-1])
