"""Fault tests reuse the worker and private-Redis fixtures of tests/worker/procs.py."""

from tests.worker.procs import broker_at, private_redis, workers  # noqa: F401
