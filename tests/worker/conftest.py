"""Fixtures for tests that run a real Celery worker process (see procs.py)."""

from tests.worker.procs import broker_at, private_redis, workers  # noqa: F401
