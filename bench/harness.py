"""Benchmark harness: start what is needed on loopback, measure, stop what it started.

Every figure is reported beside a reference measured in the same run (these machines are
shared and noisy, so ratios are what carry over). Writes BENCHMARKS.md and
bench/results.json. Bounded: each load phase runs for a fixed number of seconds.
"""

from __future__ import annotations

import json
import os
import platform
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
PY = sys.executable
DB_NAME = os.environ.get("BENCH_DB", "shopfloor_bench")
PG = os.environ.get("BENCH_PG", "postgres://postgres@127.0.0.1:5432")
DATABASE_URL = f"{PG}/{DB_NAME}"
REDIS_URL = os.environ.get("BENCH_REDIS_URL", "redis://127.0.0.1:6379/13")
SECONDS = int(os.environ.get("BENCH_SECONDS", "8"))
CLIENTS = (1, 8, 32)
NLOTS = 400

started: list[subprocess.Popen[bytes]] = []


def env(**extra: str) -> dict[str, str]:
    e = dict(os.environ)
    e.update(
        DATABASE_URL=DATABASE_URL,
        REDIS_URL=REDIS_URL,
        DEBUG="0",
        SECRET_KEY="bench-" + "x" * 60,
        ALLOWED_HOSTS="127.0.0.1,localhost",
        SECURE_SSL_REDIRECT="0",
        BENCH_ENDPOINTS="1",
        LOG_LEVEL="WARNING",
        MAIL_BACKEND="django.core.mail.backends.locmem.EmailBackend",
    )
    e.update(extra)
    return e


def run(cmd: list[str], **kw: Any) -> str:
    out = subprocess.run(
        cmd, cwd=ROOT, env=kw.pop("env", env()), check=True, capture_output=True, text=True, **kw
    )
    return out.stdout


BATCH_LOTS = 200
BATCH_ITEMS = 500  # readings per batch request: 5 lot steps x 100 samples
BENCH_PORTS = os.environ.get("BENCH_PORTS", "")  # e.g. "18200-18299": stay inside a range


def free_port() -> int:
    if BENCH_PORTS:
        low, high = (int(x) for x in BENCH_PORTS.split("-"))
        for port in range(low, high + 1):
            with socket.socket() as s:
                try:
                    s.bind(("127.0.0.1", port))
                except OSError:
                    continue
                return port
        raise RuntimeError(f"no free port in {BENCH_PORTS}")
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def cpu_seconds(pid: int) -> float:
    """User + system CPU of a process and its waited-for children (/proc/<pid>/stat)."""
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    ticks = os.sysconf("SC_CLK_TCK")
    return sum(int(fields[i]) for i in (11, 12, 13, 14)) / ticks


def unprocessed_events() -> int:
    import psycopg

    with psycopg.connect(DATABASE_URL) as conn:
        row = conn.execute(
            "SELECT count(*) FROM quality_outboxevent WHERE processed_at IS NULL"
        ).fetchone()
        return int(row[0]) if row else 0


class Sampler:
    """A thread sampling, every `period` seconds, the worker's queue (Redis list length
    plus unprocessed outbox events) or PostgreSQL's lock waits, until stopped."""

    def __init__(self, what: str, period: float) -> None:
        import threading

        self.what, self.period = what, period
        self.samples: list[int] = []
        self.waits: dict[str, int] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def __enter__(self) -> Sampler:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join(10)

    def _run(self) -> None:
        import psycopg
        import redis

        broker = redis.Redis.from_url(REDIS_URL)
        with psycopg.connect(DATABASE_URL, autocommit=True) as conn:
            while not self._stop.is_set():
                if self.what == "queue":
                    depth = conn.execute(
                        "SELECT count(*) FROM quality_outboxevent WHERE processed_at IS NULL"
                    ).fetchone()
                    self.samples.append(int(depth[0] if depth else 0) + int(broker.llen("celery")))
                else:
                    rows = conn.execute(
                        "SELECT l.locktype, coalesce(l.relation::regclass::text, '') "
                        "FROM pg_locks l JOIN pg_stat_activity a ON a.pid = l.pid "
                        "WHERE NOT l.granted AND a.datname = current_database() "
                        "AND a.pid <> pg_backend_pid() AND a.query LIKE '%%floor_%%'"
                    ).fetchall()
                    self.samples.append(len(rows))
                    for locktype, relation in rows:
                        key = f"{locktype} {relation}".strip()
                        self.waits[key] = self.waits.get(key, 0) + 1
                time.sleep(self.period)


def start(cmd: list[str], log: str) -> subprocess.Popen[bytes]:
    fh = open(ROOT / "var" / log, "wb")
    proc = subprocess.Popen(
        cmd, cwd=ROOT, env=env(), stdout=fh, stderr=subprocess.STDOUT, start_new_session=True
    )
    started.append(proc)
    return proc


def stop_all() -> None:
    for proc in reversed(started):
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGTERM)
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=5)


def wait_http(port: int, timeout: float = 30) -> None:
    deadline = time.time() + timeout
    while time.time() < deadline:
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=1):
                return
        except OSError:
            time.sleep(0.3)
    raise RuntimeError(f"gunicorn did not open port {port}")


def warm(port: int, requests: int = 8) -> None:
    """A few requests with a long timeout first: on a loaded machine a gunicorn worker
    takes many seconds to import Django on its first request."""
    import http.client

    for _ in range(requests):
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=120)
        conn.request("POST", "/bench/bare/", b'{"n": 0}', {"Content-Type": "application/json"})
        conn.getresponse().read()
        conn.close()


def wrk(port: int, clients: int, mode: str, token: str, offset: int) -> dict[str, Any]:
    # Ingest runs on one wrk thread (plenty for ~100 req/s): every request's reading key
    # then comes from one counter. With two threads, duplicate keys showed up as
    # idempotent replays and 409s, i.e. the per-thread ids were not reliable.
    threads = "1" if mode == "ingest" else str(min(clients, 2))
    out = subprocess.run(
        [
            "wrk",
            "-t",
            threads,
            "-c",
            str(clients),
            "-d",
            f"{SECONDS}s",
            "--timeout",
            "10s",
            "-s",
            str(ROOT / "bench" / "post.lua"),
            f"http://127.0.0.1:{port}",
            "--",
            mode,
            token,
            str(offset),
            str(NLOTS),
        ],
        capture_output=True,
        text=True,
        check=True,
        timeout=SECONDS + 60,
    ).stdout
    match = re.search(r"WRKJSON (\{.*\})", out)
    if not match:
        raise RuntimeError(f"wrk printed no summary:\n{out}")
    return json.loads(match.group(1))


def setup_database() -> str:
    subprocess.run(
        ["psql", PG + "/postgres", "-qc", f"DROP DATABASE IF EXISTS {DB_NAME}"],
        check=True,
        capture_output=True,
    )
    subprocess.run(
        ["psql", PG + "/postgres", "-qc", f"CREATE DATABASE {DB_NAME}"],
        check=True,
        capture_output=True,
    )
    run([PY, "manage.py", "migrate", "--noinput", "-v0"])
    run([PY, "manage.py", "collectstatic", "--noinput", "-v0"])
    run([PY, "manage.py", "load_demo"], env=env(REDIS_URL=""))
    seeded = run([PY, "bench/seed_ingest.py", str(NLOTS), str(BATCH_LOTS)])
    return seeded.strip().splitlines()[-1]


def gunicorn(port: int, workers: int, log: str) -> subprocess.Popen[bytes]:
    return start(
        [
            str(Path(PY).parent / "gunicorn"),
            "shopfloor.wsgi:application",
            "--bind",
            f"127.0.0.1:{port}",
            "--workers",
            str(workers),
            "--log-level",
            "warning",
        ],
        log,
    )


def batch_load(port: int, token: str, results: dict[str, Any]) -> None:
    """Batch posts (500 readings over 5 lot steps each) from 4 client threads for SECONDS,
    then wait until the worker has processed every event: readings per second over the
    load alone and over load plus drain (sustained), and the worker's queue depth."""
    import http.client
    import threading

    counter = iter(range(10**9))
    lock = threading.Lock()
    created = [0]
    statuses: dict[int, int] = {}
    stop_at = time.time() + SECONDS

    def body() -> bytes:
        with lock:
            n = next(counter)
        items = []
        for j in range(BATCH_ITEMS):
            lot = (n * 5 + j // 100) % BATCH_LOTS
            sample = ((n * 5 + j // 100) // BATCH_LOTS) * 100 + j % 100 + 1
            items.append(
                {
                    "lot": f"BATCH-{lot:04d}",
                    "quantity": "hole_wall_copper",
                    "value": 24.0 + (j % 7) * 0.1,
                    "unit": "um",
                    "sample_index": sample,
                    "sample_key": f"b{n}-{j}",
                }
            )
        return json.dumps({"items": items}).encode()

    def client() -> None:
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        while time.time() < stop_at:
            conn.request(
                "POST",
                "/api/v1/readings/batch/",
                body(),
                {"Content-Type": "application/json", "Authorization": f"Token {token}"},
            )
            reply = conn.getresponse()
            data = reply.read()
            with lock:
                statuses[reply.status] = statuses.get(reply.status, 0) + 1
                if reply.status == 200:
                    created[0] += json.loads(data)["created"]
        conn.close()

    with Sampler("queue", 0.25) as depth:
        start_t = time.time()
        threads = [threading.Thread(target=client) for _ in range(4)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(SECONDS + 120)
        load_s = time.time() - start_t
        deadline = time.time() + 300
        while unprocessed_events() and time.time() < deadline:
            time.sleep(0.5)
        total_s = time.time() - start_t
    results["batch_readings"] = created[0]
    results["batch_statuses"] = {str(k): v for k, v in statuses.items()}
    results["batch_readings_per_s_load"] = round(created[0] / load_s, 1)
    results["batch_readings_per_s"] = round(created[0] / total_s, 1)  # with the worker
    results["batch_drain_s"] = round(total_s - load_s, 1)
    results["worker_queue_depth_max"] = max(depth.samples, default=0)
    results["worker_queue_depth_end"] = unprocessed_events()


def lock_waits(token: str, results: dict[str, Any]) -> None:
    """32 clients on 4 gunicorn workers while pg_locks is sampled every 10 ms: the share
    of samples in which a reading request waits on a lock another one holds."""
    port = free_port()
    gunicorn(port, 4, "bench-web4.log")
    wait_http(port)
    warm(port, 16)
    wrk(port, 4, "bare", "", 0)
    with Sampler("locks", 0.01) as locks:
        ing = wrk(port, 32, "ingest", token, 360_000)
    waiting = sum(1 for n in locks.samples if n)
    results["audit_lock_wait_share_32"] = round(waiting / max(len(locks.samples), 1), 4)
    results["lock_wait_samples_32"] = len(locks.samples)
    results["lock_waits_by_kind_32"] = dict(sorted(locks.waits.items(), key=lambda kv: -kv[1])[:5])
    results["ingest_rps_32_4workers"] = round(ing["rps"], 1)


def ingest(results: dict[str, Any]) -> None:
    results["ingest_load_average_start"] = round(os.getloadavg()[0], 2)
    token = setup_database()
    statements = subprocess.run(
        [PY, "bench/bench_statements.py", token],
        cwd=ROOT,
        env=env(),
        capture_output=True,
        text=True,
        timeout=600,
    )
    match = re.search(r"BENCHJSON (\{.*\})", statements.stdout)
    results.update(
        json.loads(match.group(1)) if match else {"statements_error": statements.stderr[-2000:]}
    )
    port = free_port()
    gunicorn(port, 2, "bench-web.log")
    worker = start(
        [
            str(Path(PY).parent / "celery"),
            "-A",
            "shopfloor",
            "worker",
            "--pool=solo",
            "--without-heartbeat",
            "--without-gossip",
            "--without-mingle",
            "-l",
            "WARNING",
        ],
        "bench-worker.log",
    )
    wait_http(port)
    warm(port)
    wrk(port, 4, "bare", "", 0)  # warm-up: both workers, connection pools
    worker_cpu_before = cpu_seconds(worker.pid)
    events_before = unprocessed_events()
    # each load phase gets its own block of (lot, sample) pairs: NLOTS lots x 1000 samples
    # shared by the phases, 120,000 readings each (far more than one phase can send)
    offset = 0
    for clients in CLIENTS:
        bare = wrk(port, clients, "bare", "", 0)
        phase = offset
        ing = wrk(port, clients, "ingest", token, phase)
        offset += 120_000
        results[f"bare_rps_{clients}"] = round(bare["rps"], 1)
        results[f"ingest_rps_{clients}"] = round(ing["rps"], 1)
        results[f"ingest_ratio_{clients}"] = round(ing["rps"] / bare["rps"], 3)
        for p in ("p50", "p95", "p99"):
            results[f"ingest_{p}_ms_{clients}"] = round(ing[f"{p}_ms"], 2)
            results[f"bare_{p}_ms_{clients}"] = round(bare[f"{p}_ms"], 2)
        results[f"ingest_statuses_{clients}"] = ing["statuses"]
        # every 201 must be a stored reading: count this phase's keys in the database
        stored = (
            "from shopfloor.floor.models import IdempotencyRecord as R;"
            f"print(sum(1 for k in R.objects.filter(key__startswith='bench-')"
            f".values_list('key', flat=True) if {phase} <= int(k[6:]) < {phase + 120_000}))"
        )
        results[f"ingest_stored_{clients}"] = int(
            run([PY, "manage.py", "shell", "-c", stored]).strip().splitlines()[-1]
        )
        results[f"ingest_errors_{clients}"] = ing["errors"]
    # wait for the worker to drain the readings' events, then verify the audit chain
    drain = (
        "from shopfloor.quality.models import OutboxEvent as E;"
        "print(E.objects.filter(processed_at__isnull=True).count())"
    )
    deadline = time.time() + 120
    while time.time() < deadline:
        left = int(run([PY, "manage.py", "shell", "-c", drain]).strip().splitlines()[-1])
        if left == 0:
            break
        time.sleep(2)
    results["outbox_unprocessed_after_load"] = left
    # The worker's own machine time per reading event, beside the request's.
    processed = sum(results.get(f"ingest_stored_{c}", 0) for c in CLIENTS)
    worker_cpu = cpu_seconds(worker.pid) - worker_cpu_before
    results["worker_cpu_ms_per_reading"] = round(1000 * worker_cpu / max(processed, 1), 2)
    results["outbox_before_load"] = events_before
    batch_load(port, token, results)
    lock_waits(token, results)
    # No beat runs here: seal as it would, then verify the whole trail.
    sealed_at = time.time()
    results["audit_seal"] = run([PY, "manage.py", "audit", "seal"]).strip()
    results["audit_seal_s"] = round(time.time() - sealed_at, 2)
    verify = subprocess.run(
        [PY, "manage.py", "audit", "verify"], cwd=ROOT, env=env(), capture_output=True, text=True
    )
    results["audit_chain_after_load"] = (
        verify.stdout.strip() if verify.returncode == 0 else verify.stderr[-2000:]
    )
    results["ingest_load_average_end"] = round(os.getloadavg()[0], 2)
    results["ingest_measured"] = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
    stop_all()
    started.clear()


def sub_bench(module: str) -> dict[str, Any]:
    """Run a bench module's run() in its own process (its own set-up and clean-up)."""
    code = f"import json, bench.{module} as m; print('BENCHJSON ' + json.dumps(m.run()))"
    out = subprocess.run(
        [PY, "-c", code], cwd=ROOT, env=env(), capture_output=True, text=True, timeout=900
    )
    match = re.search(r"BENCHJSON (\{.*\})", out.stdout)
    if out.returncode != 0 or not match:
        return {f"{module}_error": (out.stderr or out.stdout)[-2000:]}
    return json.loads(match.group(1))


def _fmt(value: Any) -> str:
    return f"{value:.3f}" if isinstance(value, float) else str(value)


def write_report(results: dict[str, Any]) -> None:
    (ROOT / "bench" / "results.json").write_text(
        json.dumps(results, indent=2, sort_keys=True) + "\n"
    )
    goals = [
        (
            "ingest ≥ 60 % of bare endpoint at 32 clients",
            results.get("ingest_ratio_32"),
            lambda v: v is not None and v >= 0.6,
        ),
        (
            "ingest ≥ 0.25 of bare endpoint at 32 clients (issue 13)",
            results.get("ingest_ratio_32"),
            lambda v: v is not None and v >= 0.25,
        ),
        (
            "round trips per reading POST ≤ 6 (BEGIN and COMMIT included)",
            results.get("ingest_statements_per_reading"),
            lambda v: v is not None and v <= 6,
        ),
        (
            "batch readings/s with the worker ≥ 5 × bare rps at 32 clients",
            (results.get("batch_readings_per_s"), results.get("bare_rps_32")),
            lambda v: v[0] is not None and v[1] is not None and v[0] >= 5 * v[1],
        ),
        (
            "share of lock-wait samples, 32 clients on 4 gunicorn workers ≤ 0.05",
            results.get("audit_lock_wait_share_32"),
            lambda v: v is not None and v <= 0.05,
        ),
        (
            "worker queue depth 0 after drain (max during the run beside it)",
            (results.get("worker_queue_depth_end"), results.get("worker_queue_depth_max")),
            lambda v: v[0] == 0,
        ),
        (
            "alert latency p95 < 1 s",
            results.get("alert_p95_s"),
            lambda v: v is not None and v < 1.0,
        ),
        (
            "board at 2,000 lots < 150 ms",
            results.get("board_ms_2000"),
            lambda v: v is not None and v < 150,
        ),
        (
            "board queries ≤ 15 and equal at 20 and 2,000 lots",
            (results.get("board_queries_20"), results.get("board_queries_2000")),
            lambda v: v[0] is not None and v[0] == v[1] and v[1] <= 15,
        ),
        (
            "lot history with 20,000 readings < 1 s",
            results.get("history_ms_20000"),
            lambda v: v is not None and v < 1000,
        ),
        (
            "24-layer routing build < 20 ms",
            results.get("routing_ms_24"),
            lambda v: v is not None and v < 20,
        ),
        (
            "IPC-2581 import of a 1.3 MB file < 1 s (ms)",
            results.get("import_ms_1mb"),
            lambda v: v is not None and v < 1000,
        ),
        (
            "IPC-2581 import of a 100 MB file < 60 s",
            results.get("import_s_100mb"),
            lambda v: v is not None and v < 60,
        ),
        (
            "IPC-2581 import peak memory on 100 MB < 200 MB",
            results.get("import_peak_mb_100mb"),
            lambda v: v is not None and v < 200,
        ),
        (
            "forecast of 2,000 WIP lots x 100 replications < 10 s",
            results.get("forecast_s_2000"),
            lambda v: v is not None and v < 10,
        ),
    ]
    lines = [
        "# Benchmarks",
        "",
        f"Measured {results['date']} on {results['machine']} by `./dev bench`.",
        "Run-to-run noise on these shared machines is 20-60 %: compare ratios measured in the",
        "same run, not absolute figures across runs.",
        "",
    ]
    if results.get("ingest_measured") and results.get("ingest_measured") != results.get("date"):
        lines += [
            f"The ingest, batch and lock-wait figures were re-measured {results['ingest_measured']}"
            f" and the alert figures {results.get('alert_measured', '-')} by `python "
            "bench/harness.py --only ingest bench_alerts`, each beside its reference from the "
            "same run (the bare endpoint, the no-op task); 1-minute load average "
            f"{results.get('ingest_load_average_start')} -> "
            f"{results.get('ingest_load_average_end')} during ingest, "
            f"{results.get('alert_load_average_start')} -> "
            f"{results.get('alert_load_average_end')} during the alert passes, on "
            f"{os.cpu_count()} cores shared with other work.",
            "",
        ]
    lines += [
        "## Goals",
        "",
        "| goal | measured | met |",
        "|---|---|---|",
    ]
    for name, value, ok in goals:
        lines.append(f"| {name} | {value} | {'yes' if ok(value) else 'NO'} |")
    lines += [
        "",
        "## Reading ingest (wrk, gunicorn 2 sync workers, PostgreSQL, Redis, 1 worker)",
        "",
        "| clients | bare rps | ingest rps | ratio | ingest p50 / p95 / p99 ms |",
        "|---|---|---|---|---|",
    ]
    for c in CLIENTS:
        lines.append(
            f"| {c} | {results.get(f'bare_rps_{c}')} | {results.get(f'ingest_rps_{c}')} | "
            f"{results.get(f'ingest_ratio_{c}')} | {results.get(f'ingest_p50_ms_{c}')} / "
            f"{results.get(f'ingest_p95_ms_{c}')} / {results.get(f'ingest_p99_ms_{c}')} |"
        )
    cores = os.cpu_count() or 1
    bare32, ing32 = results.get("bare_rps_32"), results.get("ingest_rps_32")
    if bare32 and ing32:
        lines += [
            "",
            f"Machine time per request at 32 clients ({cores} cores busy): bare "
            f"{1000 * cores / bare32:.1f} ms, reading {1000 * cores / ing32:.1f} ms. A reading",
            "pays for its request (token, lot and step look-ups, row locks, idempotency, the",
            "hash-chained audit append, the outbox event and its publish) and for its event on",
            "the worker (SPC series update), all on the same cores; 60 % of the bare endpoint",
            f"would leave {1000 * cores / (0.6 * bare32):.1f} ms for all of that.",
        ]
    lines += [
        "",
        "## Write path (issue 13)",
        "",
        f"- One reading POST, in-process: {results.get('ingest_statements_per_reading')} round "
        f"trips (statements plus BEGIN/COMMIT), {results.get('ingest_python_ms_per_reading')} ms "
        f"of Python, {results.get('ingest_db_wait_ms_per_reading')} ms waiting on PostgreSQL.",
        f"- The worker's own CPU per reading event: {results.get('worker_cpu_ms_per_reading')} ms "
        "(one solo worker process).",
        f"- Batch posts ({BATCH_ITEMS} readings over 5 lot steps per request, 4 client "
        f"threads, {SECONDS} s): {results.get('batch_readings_per_s_load')} readings/s during "
        f"the load, {results.get('batch_readings_per_s')} readings/s counting the "
        f"{results.get('batch_drain_s')} s the worker needed afterwards to process every "
        f"event; queue depth max {results.get('worker_queue_depth_max')}, at the end "
        f"{results.get('worker_queue_depth_end')}.",
        f"- Lock waits with 4 gunicorn workers at 32 clients: "
        f"{results.get('audit_lock_wait_share_32')} of {results.get('lock_wait_samples_32')} "
        f"samples (by kind: {results.get('lock_waits_by_kind_32')}); ingest there "
        f"{results.get('ingest_rps_32_4workers')} req/s.",
        f"- Load average (1 min) on this shared machine: {results.get('ingest_load_average_start')}"
        f" when the ingest phases started, {results.get('ingest_load_average_end')} when they "
        f"ended (measured {results.get('ingest_measured', results.get('date'))}); alert phase "
        f"{results.get('alert_load_average_start')} -> {results.get('alert_load_average_end')}.",
        f"- Audit after the load: sealed in {results.get('audit_seal_s')} s "
        f"({results.get('audit_seal')}); verify: {results.get('audit_chain_after_load')}.",
    ]
    lines += [
        "",
        "## Alert latency (reading commit -> alert row; 20 clients, one Celery worker)",
        "",
        "| pass | alert p50 / p95 s | no-op task p50 / p95 s |",
        "|---|---|---|",
    ]
    for label, suffix in (
        ("worker as deployed (2 processes), 3 s pause", ""),
        ("worker with 1 process, 3 s pause", "_solo"),
        ("worker as deployed, 0.5 s pause (overload)", "_stress"),
    ):
        lines.append(
            f"| {label} | {_fmt(results.get(f'alert_p50_s{suffix}'))} / "
            f"{_fmt(results.get(f'alert_p95_s{suffix}'))} | "
            f"{_fmt(results.get(f'noop_task_p50_s{suffix}'))} / "
            f"{_fmt(results.get(f'noop_task_p95_s{suffix}'))} |"
        )
    if results.get("import_s_100mb") is not None:
        lines += [
            "",
            "## IPC-2581 design import (synthetic 6-layer files made at bench time)",
            "",
            "Each import runs in a fresh process; wall time on this shared machine is several",
            "times its CPU time when other work runs. The reference is a bare lxml iterparse",
            "pass over the same file in the same run; peak memory is the process's maximum",
            "resident size, beside the same process's size before reading the file.",
            "",
            "| file | import wall / CPU | bare parse wall / CPU | peak MB (before reading) |",
            "|---|---|---|---|",
            f"| {results.get('import_file_bytes_1mb')} bytes | "
            f"{results.get('import_ms_1mb')} / {results.get('import_cpu_ms_1mb')} ms | "
            f"{results.get('import_bare_parse_ms_1mb')} ms / - | - |",
            f"| {results.get('import_file_bytes_100mb')} bytes | "
            f"{results.get('import_s_100mb')} / {results.get('import_cpu_s_100mb')} s | "
            f"{results.get('import_bare_parse_s_100mb')} / "
            f"{results.get('import_bare_parse_cpu_s_100mb')} s | "
            f"{results.get('import_peak_mb_100mb')} ({results.get('import_base_mb')}) |",
        ]
        if results.get("import_measured"):
            lines.append(
                f"\nMeasured {results['import_measured']} by "
                "`python bench/harness.py --only bench_design_import`."
            )
    if results.get("forecast_s_2000") is not None:
        lines += [
            "",
            "## Finish forecast (2,000 WIP lots, 100 replications; bench/bench_forecast.py)",
            "",
            "The whole periodic run: read the floor, simulate, store the lot and job rows.",
            "CPU counts this process and its forked replication processes; on a shared",
            "machine the wall clock also counts other people's work (load average shown).",
            "",
            "| processes | wall s | simulation wall s | CPU s | open steps | load average |",
            "|---|---|---|---|---|---|",
            f"| {results.get('forecast_processes')} | {results.get('forecast_s_2000')} | "
            f"{results.get('forecast_sim_s_2000')} | {results.get('forecast_cpu_s_2000')} | "
            f"{results.get('forecast_open_steps_2000')} | "
            f"{results.get('forecast_load_average')} |",
            f"| 1 | {results.get('forecast_s_2000_one_process')} | "
            f"{results.get('forecast_sim_s_2000_one_process')} | "
            f"{results.get('forecast_cpu_s_2000_one_process')} | "
            f"{results.get('forecast_open_steps_2000')} | "
            f"{results.get('forecast_load_average')} |",
        ]
        if results.get("forecast_measured"):
            lines.append(
                f"\nMeasured {results['forecast_measured']} by "
                "`python bench/harness.py --only bench_forecast`."
            )
    lines += ["", "## All figures", "", "| key | value |", "|---|---|"]
    for key in sorted(results):
        lines.append(f"| `{key}` | {results[key]} |")
    (ROOT / "BENCHMARKS.md").write_text("\n".join(lines) + "\n")


def only(modules: list[str]) -> None:
    """Re-run some bench modules and merge their figures into the last full report."""
    path = ROOT / "bench" / "results.json"
    results: dict[str, Any] = json.loads(path.read_text()) if path.exists() else {}
    results.setdefault("date", datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC"))
    results.setdefault(
        "machine",
        f"{platform.node()} {platform.machine()} {os.cpu_count()} cores, "
        f"Python {platform.python_version()}",
    )
    for module in modules:
        if module == "ingest":  # the ingest, batch and lock-wait phases (wrk, gunicorn)
            if not shutil.which("wrk"):
                sys.exit("bench needs wrk (apt-get install -y wrk)")
            try:
                ingest(results)
            finally:
                stop_all()
            continue
        if module == "bench_alerts":
            results["alert_load_average_start"] = round(os.getloadavg()[0], 2)
        results.update(sub_bench(module))
        if module == "bench_alerts":
            results["alert_load_average_end"] = round(os.getloadavg()[0], 2)
            results["alert_measured"] = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
        if module == "bench_design_import":
            results["import_measured"] = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
        if module == "bench_forecast":
            results["forecast_measured"] = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
    write_report(results)
    print(json.dumps(results, indent=2, sort_keys=True))


def main() -> None:
    if len(sys.argv) > 2 and sys.argv[1] == "--only":
        only(sys.argv[2:])
        return
    if not shutil.which("wrk"):
        sys.exit("bench needs wrk (apt-get install -y wrk)")
    results: dict[str, Any] = {
        "date": datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "machine": f"{platform.node()} {platform.machine()} {os.cpu_count()} cores, "
        f"Python {platform.python_version()}",
    }
    try:
        ingest(results)
        for module in (
            "bench_routing",
            "bench_spc",
            "bench_alerts",
            "bench_board",
            "bench_design_import",
            "bench_forecast",
        ):
            if (ROOT / "bench" / f"{module}.py").exists():
                results.update(sub_bench(module))
    finally:
        stop_all()
    write_report(results)
    print(json.dumps(results, indent=2, sort_keys=True))


if __name__ == "__main__":
    main()
