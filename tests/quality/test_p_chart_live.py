"""The live p / np chart: electrical test records "failed k of n tested" per lot, the
series charts it with the shared computation (shopfloor.core.spc.proportion), the SPC
page draws it and a lot far above the limit raises a drift alert.

NIST/SEMATECH e-Handbook of Statistical Methods 6.3.3.2 p chart example (from memory):
30 samples of 50, p-bar 0.2313, UCL 0.4102, LCL 0.0524; its first counts are used as
lots of 50 boards.
"""

from __future__ import annotations

from urllib.parse import quote

import pytest
from django.test import Client

from shopfloor.core import spc
from shopfloor.errors import InvalidInput
from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.quality import series as series_core
from shopfloor.quality.models import Alert, OutboxEvent, SeriesState
from shopfloor.quality.services import alerts
from tests import factories, helpers

pytestmark = pytest.mark.django_db

NIST_P_COUNTS = [12, 15, 8, 10, 4, 7, 16, 9, 14, 10]  # e-Handbook 6.3.3.2, first ten


def _etest_code(floor) -> str:
    return next(s.code for s in floor.lot.steps.order_by("position") if "etest" in s.code)


def _record_lot(floor, failed: int, tested: int | None) -> Reading:
    lot = factories.new_lot(floor)
    step = helpers.advance_to(lot, _etest_code(floor))
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)
    reading = floor_services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=step.pk,
        data=floor_services.ReadingInput(
            quantity="etest_failed", value=failed, unit="count", tested=tested
        ),
    )
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)
    return reading


def test_etest_step_plans_failed_of_tested(floor):
    step = floor.lot.steps.get(code=_etest_code(floor))
    entry = next(m for m in step.plan if m["quantity"] == "etest_failed")
    assert entry["min"] is None and entry["max"] is None  # watched on the chart
    assert "p chart" in entry["source"]


def test_live_series_uses_the_shared_computation_and_alerts(floor, monkeypatch):
    monkeypatch.setattr(series_core, "DEFAULT_BASELINE", len(NIST_P_COUNTS))
    for k in NIST_P_COUNTS:
        _record_lot(floor, k, 50)
    series = SeriesState.objects.get(quantity="etest_failed")
    # every lot tested 50: an np chart, with the limits spc evaluate gives for the same lots
    assert series.chart == "np"
    expected = spc.evaluate(
        {"chart": "np", "values": NIST_P_COUNTS, "sample_sizes": [50] * len(NIST_P_COUNTS)}
    )
    assert series.limits["p_bar"] == pytest.approx(sum(NIST_P_COUNTS) / 500)
    assert series.limits["ucl"] == pytest.approx(expected["ucl"])
    assert series.limits["lcl"] == pytest.approx(expected["lcl"])
    assert Alert.objects.filter(kind=Alert.Kind.DRIFT).count() == 0
    # 40 of 50 failed: far above n p-bar + 3 sigma = about 19.9 -> one drift alert
    _record_lot(floor, 40, 50)
    alert = Alert.objects.get(kind=Alert.Kind.DRIFT)
    assert "40 of 50 failed" in alert.message
    # a lot of another size turns the series into a p chart with the same p-bar
    _record_lot(floor, 3, 20)
    series.refresh_from_db()
    assert series.chart == "p"

    qe = Client()
    qe.force_login(floor.personas["quality_engineer"].user)
    page = qe.get(f"/quality/spc/{quote(series.key, safe='')}/").content.decode()
    assert "p chart" in page and "p-bar" in page
    assert "Capability against the window" not in page  # counts out of n: no Cpk
    assert "<polyline" in page  # the limits step with each lot's n


def test_tested_defaults_to_the_lots_good_boards_and_bad_counts_are_refused(floor):
    reading = _record_lot(floor, 1, None)
    assert reading.tested and reading.tested >= 1  # the lot's boards (100 % tested)
    lot = factories.new_lot(floor)
    step = helpers.advance_to(lot, _etest_code(floor))
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)
    for value, tested, words in [
        (9, 5, "more than the 5 boards tested"),
        ("1.5", 10, "not a whole number"),
        (1, 0, "whole number from 1"),
    ]:
        with pytest.raises(InvalidInput, match=words):
            floor_services.record_reading(
                person=floor.personas["operator"],
                lot_step_id=step.pk,
                data=floor_services.ReadingInput(
                    quantity="etest_failed", value=value, unit="count", tested=tested
                ),
            )
    assert not Reading.objects.filter(lot_step=step).exists()
    with pytest.raises(InvalidInput, match="applies only to etest_failed"):
        floor_services.record_reading(
            person=floor.personas["operator"],
            lot_step_id=step.pk,
            data=floor_services.ReadingInput(
                quantity="etest_opens", value=0, unit="count", tested=10
            ),
        )
    assert LotStep.objects.get(pk=step.pk).status == LotStep.Status.IN_PROGRESS


def test_tablet_form_records_failed_of_tested(floor):
    lot = factories.new_lot(floor)
    step = helpers.advance_to(lot, _etest_code(floor))
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)
    operator = Client()
    operator.force_login(floor.personas["operator"].user)
    page = operator.get(f"/floor/lots/{lot.code}/").content.decode()
    assert "Boards failed" in page and "of boards tested" in page
    response = operator.post(
        f"/floor/steps/{step.pk}/readings/",
        {
            "quantity": "etest_failed",
            "sample_index": 1,
            "value": "2",
            "unit": "count",
            "tested": "8",
        },
    )
    assert response.status_code in (200, 201, 302), response.content[:500]
    reading = Reading.objects.get(lot_step=step, quantity="etest_failed")
    assert (reading.value, reading.tested) == (2.0, 8)
    page = operator.get(f"/floor/lots/{lot.code}/").content.decode()
    assert "2 of 8 boards failed (25.0 %)" in page
