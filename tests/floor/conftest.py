"""Fixtures for the tablet tests: the small floor, a gauge where readings are taken."""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor.plant.models import Equipment
from tests import helpers


@pytest.fixture
def parked_outbox(monkeypatch):
    return helpers.park_outbox(monkeypatch)


@pytest.fixture
def operator(floor):
    return floor.personas["operator"]


@pytest.fixture
def measured_step(floor, operator, parked_outbox):
    """The lot at its first step with a variable window (pattern plating). Earlier steps
    are marked done directly (a set-up shortcut; test_floor_rules walks the real route)."""
    return helpers.advance_to(floor.lot, helpers.measured())


@pytest.fixture
def gauge_at(db):
    def make(work_center, *, due_in_days: int = 90, code: str | None = None) -> Equipment:
        return Equipment.objects.create(
            work_center=work_center,
            code=code or f"GA-{work_center.code}-{due_in_days}",
            name="Thickness gauge",
            is_gauge=True,
            calibration_due=timezone.localdate() + dt.timedelta(days=due_in_days),
        )

    return make
