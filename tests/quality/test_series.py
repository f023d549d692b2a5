"""SPC on every series: baseline limits, incremental rules, engineer's controls, Cpk.

Reference values: NIST/SEMATECH e-Handbook of Statistical Methods 6.3.2.2 flow-rate
individuals example (from memory: mean 50.81, MR-bar 1.8778, UCL 55.80, LCL 45.82).
Western Electric rules 1 and 4 (Western Electric Statistical Quality Control Handbook,
1956: one point beyond 3 sigma; 8 in a row on one side of the centre line). Cp/Cpk
definitions: Montgomery, Introduction to Statistical Quality Control (common practice):
Cp = (USL-LSL)/6 sigma, Cpk = min(USL-mean, mean-LSL)/3 sigma, sigma = MR-bar/1.128.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from shopfloor.errors import InvalidInput, NotAllowed
from shopfloor.floor.models import Reading
from shopfloor.quality import services
from shopfloor.quality.models import Alert, OutboxEvent, SeriesState
from tests.worker import floorkit as kit

pytestmark = pytest.mark.django_db

NIST = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]
WINDOW = {
    "quantity": "hole_wall_copper",
    "min": 45.0,
    "max": 58.0,
    "unit": "um",
    "source": "test window (invented)",
    "attribute": False,
}


def _feed(floor, step, value, *, window=WINDOW, when=None):
    """A reading straight into the database plus its event, then the handler."""
    lo, hi = window["min"], window["max"]
    reading = Reading.objects.create(
        lot_step=step,
        quantity=window["quantity"],
        entered_value=str(value),
        entered_unit="um",
        value=value,
        unit="um",
        operator=floor.personas["operator"],
        captured_at=when or timezone.now(),
        recorded_at=when or timezone.now(),
        window=window,
        in_window=lo <= value <= hi,
    )
    event = OutboxEvent.objects.create(
        kind="reading.recorded", payload={"reading": reading.pk, "message": "test"}
    )
    services.handle_event(event.pk)
    return reading


@pytest.fixture
def step(floor):
    return kit.start_at(floor, floor.lot)


def _series():
    return SeriesState.objects.get(quantity="hole_wall_copper")


def test_baseline_limits_match_handbook(floor, step):
    _feed(floor, step, NIST[0])
    SeriesState.objects.update(baseline_size=10)
    for v in NIST[1:]:
        _feed(floor, step, v)
    limits = _series().limits
    assert limits["centre"] == pytest.approx(50.81, abs=0.005)
    assert limits["ucl"] == pytest.approx(55.80, abs=0.01)
    assert limits["lcl"] == pytest.approx(45.82, abs=0.01)
    assert Alert.objects.count() == 0


def _baselined(floor, step):
    _feed(floor, step, NIST[0])
    SeriesState.objects.update(baseline_size=10)
    for v in NIST[1:]:
        _feed(floor, step, v)


def test_point_beyond_ucl_is_drift_alert_without_hold(floor, step):
    _baselined(floor, step)
    _feed(floor, step, 56.5)  # in the 45-58 window, above UCL 55.80
    alert = Alert.objects.get()
    assert alert.kind == "drift" and alert.rule == "western_electric_1"
    assert "beyond the 3-sigma" in alert.message
    floor.lot.refresh_from_db()
    assert not floor.lot.on_hold


def test_run_of_eight_reported_once(floor, step):
    _baselined(floor, step)
    for _ in range(11):  # 11 points just above the centre line 50.81
        _feed(floor, step, 51.5)
    drift = Alert.objects.filter(kind="drift", rule="western_electric_4")
    assert drift.count() == 1  # the 8th point starts the run; 9th-11th continue it


def test_cost_per_point_does_not_grow(floor, step):
    _baselined(floor, step)
    counts = []
    for n in range(40):
        with CaptureQueriesContext(connection) as ctx:
            _feed(floor, step, 50.0 + (n % 3) * 0.5)
        counts.append(len(ctx.captured_queries))
    assert counts[5] == counts[-1]
    assert set(_series().rule_state["rules"]) >= {"index", "above0"}
    assert _series().rule_state["rules"]["index"] == 40


def test_fix_and_recompute_limits(floor, step):
    qe = floor.personas["quality_engineer"]
    start = timezone.now() - dt.timedelta(hours=2)
    for i, v in enumerate(NIST):
        _feed(floor, step, v, when=start + dt.timedelta(minutes=i))
    s = _series()
    with pytest.raises(NotAllowed):
        services.fix_limits(floor.personas["operator"], s.pk, 50, 56, 44)
    with pytest.raises(InvalidInput, match="lcl <= centre <= ucl"):
        services.fix_limits(qe, s.pk, 50, 44, 56)
    services.fix_limits(qe, s.pk, 50.0, 56.0, 44.0)
    assert _series().limits["ucl"] == 56.0 and _series().limits_fixed

    services.recompute_limits(qe, s.pk, start, start + dt.timedelta(minutes=30))
    assert _series().limits["ucl"] == pytest.approx(55.80, abs=0.01)
    with pytest.raises(InvalidInput, match="at least"):
        services.recompute_limits(
            qe, s.pk, start - dt.timedelta(days=2), start - dt.timedelta(days=1)
        )
    from shopfloor.audit.models import AuditEntry

    assert AuditEntry.objects.filter(action__startswith="spc.limits").count() == 2


def test_capability_against_definitions(floor, step):
    for v in NIST:
        _feed(floor, step, v)
    result = services.series_capability(_series().pk)
    sigma = 1.87778 / 1.128
    cap = result["capability"]
    assert result["n"] == 10 and result["lsl"] == 45.0 and result["usl"] == 58.0
    assert cap["cp"] == pytest.approx((58 - 45) / (6 * sigma), rel=2e-3)
    assert cap["cpk"] == pytest.approx((50.81 - 45) / (3 * sigma), rel=2e-3)
    assert cap["ppk"] is not None and cap["ppm"] > 0


def test_series_keyed_per_equipment(floor, step):
    from shopfloor.plant.models import Equipment

    eq = Equipment.objects.create(work_center=step.work_center, code="EQ-12", name="Line 2")
    reading = _feed(floor, step, 50.0)
    Reading.objects.filter(pk=reading.pk).update(equipment=eq)
    r2 = Reading.objects.create(
        lot_step=step,
        quantity="hole_wall_copper",
        entered_value="50",
        entered_unit="um",
        value=50.0,
        unit="um",
        operator=floor.personas["operator"],
        equipment=eq,
        captured_at=timezone.now(),
        window=WINDOW,
        in_window=True,
    )
    services.handle_event(
        OutboxEvent.objects.create(kind="reading.recorded", payload={"reading": r2.pk}).pk
    )
    keys = set(SeriesState.objects.values_list("key", flat=True))
    wc = step.work_center.code
    assert keys == {f"hole_wall_copper|{wc}|-", f"hole_wall_copper|{wc}|EQ-12"}
