"""In-window reading events processed in batches (issue 13): one SPC series update per
series per batch, the same series state as one event at a time, out-of-window events
left to their own fast path, and a failing event that does not block its batch.

The series arithmetic itself (limits, run rules) is checked against published tables in
tests/core/test_spc_*.py; here the check is that batching changes nothing about it: the
batch's series rows must equal those the one-event path produces from the same readings.
"""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from shopfloor.floor import services
from shopfloor.floor.models import Reading
from shopfloor.quality import event_batch, outbox
from shopfloor.quality.models import OutboxEvent, SeriesState
from shopfloor.quality.services import alerts as quality_services
from tests.helpers import advance_to, gauge_at

pytestmark = pytest.mark.django_db


@pytest.fixture
def plating(floor):
    return advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)


def _record(floor, step, gauge, sample: int, value: float) -> Reading:
    return services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=step.pk,
        data=services.ReadingInput(
            quantity="hole_wall_copper",
            value=value,
            unit="um",
            sample_index=sample,
            equipment_id=gauge.pk,
        ),
    )


def _state() -> list[tuple]:
    return sorted(
        (s.key, s.points, s.baseline, s.limits, s.rule_state) for s in SeriesState.objects.all()
    )


def test_one_series_update_per_series_and_the_same_state_as_one_by_one(floor, plating):
    gauges = [gauge_at(plating, "XRF-T1"), gauge_at(plating, "XRF-T2")]
    # five samples, in window (class 2 hole copper: each >= 18 um, mean >= 20 um; IPC-6012,
    # from memory), alternating between two gauges: two series
    values = [24.1, 25.3, 23.8, 26.0, 24.9]
    for i, value in enumerate(values, start=1):
        _record(floor, plating, gauges[i % 2], i, value)
    events = list(OutboxEvent.objects.order_by("pk"))
    assert len(events) == 5 and not any(outbox.urgent(e.payload) for e in events)

    with CaptureQueriesContext(connection) as ctx:
        outcome = event_batch.handle_batch([events[0].pk])  # the sweep takes the rest
    assert outcome == {"claimed": 5, "processed": 5, "failed": 0}
    series_updates = [
        q["sql"] for q in ctx.captured_queries if 'UPDATE "quality_seriesstate"' in q["sql"]
    ]
    assert len(series_updates) == 2, series_updates  # one per series, not one per event
    assert SeriesState.objects.count() == 2
    assert sorted(SeriesState.objects.values_list("points", flat=True)) == [2, 3]
    batched = _state()

    # the same readings, one event at a time
    SeriesState.objects.all().delete()
    OutboxEvent.objects.update(processed_at=None)
    for event in events:
        assert quality_services.handle_event(event.pk).acted
    assert _state() == batched


def test_out_of_window_events_are_not_swept_into_a_batch(floor, plating):
    gauge = gauge_at(plating)
    _record(floor, plating, gauge, 1, 24.5)
    low = services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=plating.pk,
        data=services.ReadingInput(
            quantity="hole_wall_copper",
            value=15.0,  # below the 18 um each-reading minimum
            unit="um",
            sample_index=2,
            equipment_id=gauge.pk,
            confirm_out_of_window=True,
        ),
    )
    assert not low.in_window
    in_event, out_event = OutboxEvent.objects.order_by("pk")
    assert outbox.urgent(out_event.payload) and not outbox.urgent(in_event.payload)
    assert event_batch.handle_batch([in_event.pk]) == {"claimed": 1, "processed": 1, "failed": 0}
    out_event.refresh_from_db()
    assert out_event.processed_at is None  # left to handle_event, its own fast path
    assert quality_services.handle_event(out_event.pk).alert_ids


def test_a_series_failure_is_isolated_to_its_event(floor, plating, monkeypatch):
    gauge = gauge_at(plating)
    readings = [_record(floor, plating, gauge, i, 24.0 + i / 10) for i in (1, 2, 3)]
    real = event_batch.series_core.add_points

    def fails_on_second(batch):
        if any(r.pk == readings[1].pk for r in batch):
            raise RuntimeError("series step broke")
        return real(batch)

    monkeypatch.setattr(event_batch.series_core, "add_points", fails_on_second)
    outcome = event_batch.handle_batch([e.pk for e in OutboxEvent.objects.all()])
    assert outcome == {"claimed": 3, "processed": 2, "failed": 1}
    left = OutboxEvent.objects.get(processed_at__isnull=True)
    assert left.payload["reading"] == readings[1].pk and "series step broke" in left.last_error
    assert SeriesState.objects.get().points == 2  # the other two, once each
