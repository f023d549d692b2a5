"""Shared test set-up: the database guard for CI, personas and a small floor.

Personas (operator, supervisor, process engineer, quality engineer, outsider) come from
tests/factories.py so every test speaks about the same people.
"""

from __future__ import annotations

import os

import pytest
from django.conf import settings

from tests import factories


def pytest_configure(config: pytest.Config) -> None:
    # Password hashing cost is a production concern; tests create many users. The PIN
    # hasher stays the real one so stored PINs verify the same way in worker processes.
    settings.PASSWORD_HASHERS = [
        "django.contrib.auth.hashers.MD5PasswordHasher",
        "shopfloor.plant.hashers.PinHasher",
        "django.contrib.auth.hashers.PBKDF2PasswordHasher",
    ]
    if os.environ.get("CI", "").lower() == "true":
        engine = settings.DATABASES["default"]["ENGINE"]
        if "postgresql" not in engine:
            raise pytest.UsageError(
                f"CI=true but DATABASE_URL points at {engine}; CI must run on PostgreSQL"
            )
        if settings.CELERY_TASK_ALWAYS_EAGER:
            raise pytest.UsageError("CI=true but REDIS_URL is not set; CI must run with Redis")


@pytest.fixture
def floor(db):
    """A small shop: work centers from the library, one released 4-layer ENIG routing,
    one job and one lot, plus the five personas qualified where they work."""
    return factories.make_floor()


@pytest.fixture
def personas(floor):
    return floor.personas
