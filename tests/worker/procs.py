"""Real processes for the worker and fault tests: a Celery worker and a private Redis.

Every process here is started by the test, remembered by PID, and stopped by that PID
(never by name). Waits are bounded polls of the database or the process log.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import tempfile
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from django.conf import settings
from django.db import connection

ROOT = Path(__file__).resolve().parents[2]
CELERY = ROOT / "var" / "venv" / "bin" / "celery"
READY_TIMEOUT = 30.0


def wait_for(check: Callable[[], bool], timeout: float = 20.0, every: float = 0.1) -> bool:
    """Poll `check` until it is true or `timeout` seconds pass; returns the last result."""
    deadline = time.monotonic() + timeout
    while True:
        if check():
            return True
        if time.monotonic() > deadline:
            return False
        time.sleep(every)


def free_port(candidates: range = range(6390, 6400)) -> int:
    for port in candidates:
        with socket.socket() as s:
            try:
                s.bind(("127.0.0.1", port))
            except OSError:
                continue
            return port
    raise RuntimeError(f"no free port in {candidates.start}-{candidates.stop - 1}")


@dataclass
class WorkerProcess:
    proc: subprocess.Popen[bytes]
    log_path: Path
    stopped: bool = False

    @property
    def pid(self) -> int:
        return self.proc.pid

    def log(self) -> str:
        return self.log_path.read_text(errors="replace")

    def count(self, text: str) -> int:
        return self.log().count(text)

    def kill(self) -> None:
        """SIGKILL: no chance to acknowledge or clean up (a crashed host)."""
        if self.proc.poll() is None:
            os.kill(self.pid, signal.SIGKILL)
        self.proc.wait(timeout=10)
        self.stopped = True

    def stop(self) -> None:
        if self.stopped or self.proc.poll() is not None:
            self.stopped = True
            return
        os.kill(self.pid, signal.SIGTERM)
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            os.kill(self.pid, signal.SIGKILL)
            self.proc.wait(timeout=10)
        self.stopped = True


@dataclass
class WorkerFactory:
    redis_url: str
    tmp: Path
    started: list[WorkerProcess] = field(default_factory=list)

    def start(
        self,
        *,
        redis_url: str | None = None,
        pool: str = "solo",
        concurrency: int = 1,
        **env: str,
    ) -> WorkerProcess:
        db = settings.DATABASES["default"]
        name = connection.settings_dict["NAME"]  # the pytest test database
        host, port = db.get("HOST") or "127.0.0.1", db.get("PORT") or "5432"
        user = db.get("USER") or "postgres"
        full_env = {
            **os.environ,
            "DEBUG": "1",
            "DATABASE_URL": f"postgres://{user}@{host}:{port}/{name}",
            "REDIS_URL": redis_url or self.redis_url,
            "LOG_LEVEL": "INFO",
            **env,
        }
        log_path = self.tmp / f"worker-{len(self.started) + 1}.log"
        with log_path.open("wb") as out:
            proc = subprocess.Popen(
                [
                    str(CELERY),
                    "-A",
                    "shopfloor",
                    "worker",
                    f"--pool={pool}",
                    f"--concurrency={concurrency}",
                    "-Q",
                    "celery",
                    "--without-heartbeat",
                    "--without-gossip",
                    "--without-mingle",
                    "--loglevel=INFO",
                ],
                cwd=ROOT,
                env=full_env,
                stdout=out,
                stderr=subprocess.STDOUT,
                start_new_session=True,
            )
        worker = WorkerProcess(proc, log_path)
        self.started.append(worker)
        if (
            not wait_for(
                lambda: " ready." in worker.log() or proc.poll() is not None, READY_TIMEOUT, 0.2
            )
            or proc.poll() is not None
        ):
            worker.stop()
            raise RuntimeError(f"Celery worker did not start:\n{worker.log()[-3000:]}")
        return worker

    def stop_all(self) -> None:
        for worker in self.started:
            worker.stop()


def purge(redis_url: str) -> None:
    """Empty this test's broker db so stale messages from other runs are not replayed."""
    import redis

    client = redis.Redis.from_url(redis_url)
    client.delete("celery", "unacked", "unacked_index", "unacked_mutex")
    client.close()


@pytest.fixture
def workers(transactional_db) -> Iterator[WorkerFactory]:
    """Start real Celery workers against the test database; all stopped by PID after."""
    if settings.CELERY_TASK_ALWAYS_EAGER or not settings.DATABASES["default"]["ENGINE"].endswith(
        "postgresql"
    ):
        pytest.skip("worker tests need REDIS_URL and a PostgreSQL DATABASE_URL")
    purge(settings.REDIS_URL)
    with tempfile.TemporaryDirectory(prefix="sf-worker-") as tmp:
        factory = WorkerFactory(settings.REDIS_URL, Path(tmp))
        try:
            yield factory
        finally:
            factory.stop_all()


@dataclass
class PrivateRedis:
    """A redis-server of this test's own on a free loopback port."""

    port: int
    proc: subprocess.Popen[bytes] | None = None

    @property
    def url(self) -> str:
        return f"redis://127.0.0.1:{self.port}/0"

    def start(self) -> None:
        self.proc = subprocess.Popen(
            [
                "redis-server",
                "--port",
                str(self.port),
                "--bind",
                "127.0.0.1",
                "--save",
                "",
                "--appendonly",
                "no",
            ],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            start_new_session=True,
        )
        import redis

        def up() -> bool:
            try:
                return bool(redis.Redis(host="127.0.0.1", port=self.port).ping())
            except redis.ConnectionError:
                return False

        if not wait_for(up, 10):
            raise RuntimeError(f"redis-server did not start on port {self.port}")

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                os.kill(self.proc.pid, signal.SIGKILL)
                self.proc.wait(timeout=10)
        self.proc = None


@pytest.fixture
def private_redis() -> Iterator[PrivateRedis]:
    server = PrivateRedis(free_port())
    server.start()
    try:
        yield server
    finally:
        server.stop()


@pytest.fixture
def broker_at(private_redis: PrivateRedis) -> Iterator[PrivateRedis]:
    """Point this test process's Celery publisher at the private Redis, then restore."""
    from shopfloor.celery import app

    old = app.conf.broker_url
    app.conf.broker_url = private_redis.url
    app._pool = None
    app.amqp._producer_pool = None
    try:
        yield private_redis
    finally:
        app.conf.broker_url = old
        app._pool = None
        app.amqp._producer_pool = None
