"""PostgreSQL restarted while instruments post readings through gunicorn.

What must hold (DESIGN.md invariant 6, "a retried request never records twice"):
- while the database is down the API answers 503 with {"error": "database_unavailable"}
  (and Retry-After), never a 500, so an instrument knows the reading did not land;
- every client retries the SAME request with the SAME Idempotency-Key until it gets 201,
  and afterwards each reading exists exactly once (none lost, none doubled), counted by a
  direct query to the throwaway database, not through the app;
- the hash-chained audit trail still verifies (`manage.py audit verify` exits 0).

Bounded on purpose: 8 client threads x 20 readings, each request retried for at most
RETRY_SECONDS, one outage of OUTAGE_SECONDS; loopback addresses only.
"""

from __future__ import annotations

import contextlib
import glob
import http.client
import http.cookiejar
import json
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.parse
import urllib.request
import uuid
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import psycopg
import pytest

pytestmark = [pytest.mark.fault, pytest.mark.timeout(120)]

CLIENTS = 8
READINGS_PER_CLIENT = 20
OUTAGE_SECONDS = 2.0
RETRY_SECONDS = 25.0
STEP_CODE = "pattern_plate_copper"


REPO = Path(__file__).resolve().parents[2]
VENV_BIN = REPO / "var" / "venv" / "bin"


# --- a throwaway cluster and a gunicorn in front of it --------------------------------
# Everything listens on 127.0.0.1, on ports picked free at run time; every process
# started here is stopped by its own PID in a finally block (never by name).


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def pg_bin(name: str) -> str:
    found = sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}"))
    if not found:
        pytest.skip(f"{name} not found under /usr/lib/postgresql/*/bin")
    return found[-1]


def as_server_user(command: list[str]) -> list[str]:
    """initdb and pg_ctl refuse to run as root; run them as the postgres account then."""
    if os.geteuid() != 0:
        return command
    if shutil.which("runuser") is None:
        pytest.skip("running as root and runuser is missing, so initdb cannot run")
    return ["runuser", "-u", "postgres", "--", *command]


@dataclass
class ThrowawayCluster:
    """A PostgreSQL cluster in a temporary directory, trust auth, loopback only."""

    directory: Path
    port: int
    database: str = "sf_fault_throwaway"

    @property
    def url(self) -> str:
        return f"postgres://postgres@127.0.0.1:{self.port}/{self.database}"

    @property
    def dsn(self) -> str:
        return f"host=127.0.0.1 port={self.port} user=postgres dbname={self.database}"

    def _ctl(self, *args: str) -> None:
        subprocess.run(
            as_server_user([pg_bin("pg_ctl"), "-D", str(self.directory / "data"), *args]),
            check=True,
            timeout=30,
            capture_output=True,
        )

    def start(self) -> None:
        opts = f"-p {self.port} -k {self.directory} -c listen_addresses=127.0.0.1"
        self._ctl("-o", opts, "-l", str(self.directory / "server.log"), "-w", "start")

    def stop(self) -> None:
        self._ctl("-m", "fast", "-w", "stop")

    def psql(self, sql: str, database: str = "postgres") -> str:
        done = subprocess.run(
            [
                pg_bin("psql"),
                "-h",
                "127.0.0.1",
                "-p",
                str(self.port),
                "-U",
                "postgres",
                "-d",
                database,
                "-v",
                "ON_ERROR_STOP=1",
                "-At",
                "-c",
                sql,
            ],
            check=True,
            timeout=30,
            capture_output=True,
            text=True,
        )
        return done.stdout

    def postmaster_pid(self) -> int | None:
        with contextlib.suppress(OSError, ValueError, IndexError):
            return int((self.directory / "data" / "postmaster.pid").read_text().splitlines()[0])
        return None


@pytest.fixture
def pg_cluster() -> Iterator[ThrowawayCluster]:
    directory = Path(tempfile.mkdtemp(prefix="sf-fault-pg-"))
    cluster = ThrowawayCluster(directory=directory, port=free_port())
    try:
        if os.geteuid() == 0:
            shutil.chown(directory, "postgres", "postgres")
        subprocess.run(
            as_server_user(
                [
                    pg_bin("initdb"),
                    "-D",
                    str(directory / "data"),
                    "-A",
                    "trust",
                    "--no-sync",
                    "-U",
                    "postgres",
                ]
            ),
            check=True,
            timeout=60,
            capture_output=True,
        )
        cluster.start()
        cluster.psql(f"CREATE DATABASE {cluster.database}")
        yield cluster
    finally:
        pid = cluster.postmaster_pid()
        with contextlib.suppress(Exception):
            cluster.stop()
        if pid is not None:
            with contextlib.suppress(ProcessLookupError, PermissionError):
                os.kill(pid, 0)  # still there after a failed stop: end it by its PID
                os.kill(pid, signal.SIGQUIT)
        shutil.rmtree(directory, ignore_errors=True)


def app_env(database_url: str) -> dict[str, str]:
    """Environment for manage.py and gunicorn: the throwaway DB, no Redis (eager tasks)."""
    env = {k: v for k, v in os.environ.items() if k not in {"REDIS_URL", "CI"}}
    env.update(
        DEBUG="1",
        DATABASE_URL=database_url,
        DJANGO_SETTINGS_MODULE="shopfloor.settings",
        LOG_LEVEL="WARNING",
        PYTHONPATH=str(REPO),
    )
    return env


def manage(env: dict[str, str], *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "manage.py", *args],
        cwd=REPO,
        env=env,
        timeout=120,
        capture_output=True,
        text=True,
    )


@dataclass
class Gunicorn:
    process: subprocess.Popen[bytes]
    port: int
    log_path: Path

    def log(self) -> str:
        with contextlib.suppress(OSError):
            return self.log_path.read_text(errors="replace")[-6000:]
        return ""


@contextlib.contextmanager
def run_gunicorn(env: dict[str, str], workdir: Path) -> Iterator[Gunicorn]:
    port = free_port()
    log_path = workdir / "gunicorn.log"
    with open(log_path, "wb") as log_file:
        process = subprocess.Popen(
            [
                str(VENV_BIN / "gunicorn"),
                "shopfloor.wsgi:application",
                "--bind",
                f"127.0.0.1:{port}",
                "--workers",
                "2",
                "--timeout",
                "30",
                "--graceful-timeout",
                "5",
            ],
            cwd=REPO,
            env=env,
            stdout=log_file,
            stderr=subprocess.STDOUT,
        )
    server = Gunicorn(process=process, port=port, log_path=log_path)
    try:
        deadline = time.monotonic() + 30
        while True:
            if process.poll() is not None:
                raise RuntimeError(f"gunicorn exited early:\n{server.log()}")
            with contextlib.suppress(OSError, ValueError):
                url = f"http://127.0.0.1:{port}/healthz"
                with urllib.request.urlopen(url, timeout=2) as reply:
                    if json.loads(reply.read()).get("status") == "ok":
                        break
            if time.monotonic() > deadline:
                raise RuntimeError(f"gunicorn did not become ready:\n{server.log()}")
            time.sleep(0.2)
        yield server
    finally:
        if process.poll() is None:
            process.send_signal(signal.SIGTERM)  # by PID: the Popen handle of our own child
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait(timeout=5)


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
    from django.test import override_settings

    # Login passwords are not used here; the PIN hasher stays the real one.
    fast = [
        "django.contrib.auth.hashers.MD5PasswordHasher",
        "shopfloor.plant.hashers.PinHasher",
        "django.contrib.auth.hashers.PBKDF2PasswordHasher",
    ]
    with override_settings(PASSWORD_HASHERS=fast):
        _seed(count)


def _seed(count: int) -> None:
    from tests import factories
    from tests.helpers import advance_to, issue_token, one_entry_per_quantity

    floor = factories.make_floor()
    operator = floor.personas["operator"]
    job = factories.make_job(floor.routing.part_revision, floor.routing, quantity=100_000)
    readings: list[dict[str, Any]] = []
    lot = floor.lot
    work_center = None
    while len(readings) < count:
        step = advance_to(lot, STEP_CODE, by=operator, start=True)
        work_center = step.work_center.code
        for m in one_entry_per_quantity(step.plan):
            if m.get("attribute"):
                continue
            for sample in range(1, int(m.get("samples") or 1) + 1):
                readings.append(
                    {
                        "lot": lot.code,
                        "quantity": m["quantity"],
                        "value": _in_window_value(m),
                        "unit": m["unit"],
                        "sample_index": sample,
                    }
                )
        lot = factories.make_lot(floor.routing, job)
    assert work_center is not None
    token = issue_token("fault-gauge", work_center)
    print(
        json.dumps(
            {
                "token": token,
                "readings": readings[:count],
                "badge": operator.badge_number,
                "pin": factories.PIN,
            }
        )
    )


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
        conn.request(
            "POST",
            "/api/v1/readings/",
            body=body,
            headers={
                "Content-Type": "application/json",
                "Authorization": f"Token {token}",
                "Idempotency-Key": key,
            },
        )
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


def _badge_session(port: int, badge: str, pin: str) -> urllib.request.OpenerDirector:
    """A browser-like session logged in on the badge page (cookie jar, CSRF token)."""
    base = f"http://127.0.0.1:{port}"
    opener = urllib.request.build_opener(
        urllib.request.HTTPCookieProcessor(http.cookiejar.CookieJar())
    )
    page = opener.open(f"{base}/floor/login/", timeout=10).read().decode()
    found = re.search(r'name="csrfmiddlewaretoken" value="([^"]+)"', page)
    assert found, "the badge login page has no CSRF token"
    form = urllib.parse.urlencode(
        {"badge": badge, "pin": pin, "csrfmiddlewaretoken": found.group(1)}
    ).encode()
    reply = opener.open(urllib.request.Request(f"{base}/floor/login/", data=form), timeout=10)
    assert urllib.parse.urlsplit(reply.url).path == "/floor/", reply.url
    return opener


def _status_of(opener: urllib.request.OpenerDirector, url: str) -> tuple[int, bytes, str]:
    try:
        with opener.open(url, timeout=10) as reply:
            return reply.status, reply.read(), reply.headers.get("Content-Type", "")
    except urllib.error.HTTPError as exc:
        return exc.code, exc.read(), exc.headers.get("Content-Type", "")


# --- the test --------------------------------------------------------------------------


def test_readings_survive_a_postgres_restart_exactly_once(pg_cluster: ThrowawayCluster):
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
        tablet = _badge_session(server.port, seeded["badge"], seeded["pin"])
        threads = [
            threading.Thread(target=_client, args=(server.port, token, jobs, tally), daemon=True)
            for jobs in per_client
        ]
        for t in threads:
            t.start()
        # Restart once a quarter of the readings are in, so most land around the outage.
        wait_until = time.monotonic() + 20
        while tally.done < total // 4 and time.monotonic() < wait_until:
            time.sleep(0.02)
        done_before_outage = tally.done
        pg_cluster.stop()
        # A tablet with a badge session asks for a page while the database is away.
        page_status, page_body, _page_type = _status_of(
            tablet, f"http://127.0.0.1:{server.port}/floor/"
        )
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
    with psycopg.connect(pg_cluster.dsn) as db:
        per_key = dict(
            db.execute(
                "SELECT key, count(*) FROM floor_idempotencyrecord WHERE key LIKE %s GROUP BY key",
                [f"fault-{run_id}-%"],
            ).fetchall()
        )
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

    # The badge session's page: the lookup that fails is in the idle-timeout middleware,
    # outside the view, so this needs DatabaseUnavailableMiddleware first in MIDDLEWARE.
    assert page_status == 503, (
        f"a logged-in tablet page got {page_status} during the outage instead of 503; put "
        "shopfloor.middleware.DatabaseUnavailableMiddleware first in settings.MIDDLEWARE",
        page_body[:300],
    )
    assert b"database is not reachable" in page_body


def manage_seed(env: dict[str, str], count: int) -> dict[str, Any]:
    code = (
        "import django; django.setup(); "
        f"from tests.fault.test_postgres_restart import seed; seed({count})"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], cwd=REPO, env=env, timeout=120, capture_output=True, text=True
    )
    assert done.returncode == 0, done.stderr[-4000:]
    return json.loads(done.stdout.strip().splitlines()[-1])
