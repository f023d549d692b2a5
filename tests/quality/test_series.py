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
from urllib.parse import quote

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from shopfloor.errors import InvalidInput, NotAllowed
from shopfloor.floor.models import Reading
from shopfloor.plant.models import Lot
from shopfloor.quality.models import Alert, OutboxEvent, SeriesState
from shopfloor.quality.services import alerts, limits
from tests import factories, helpers

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


def _feed(floor, step, value, *, window=WINDOW, when=None, sample=1):
    """A reading straight into the database plus its event, then the handler."""
    lo, hi = window["min"], window["max"]
    reading = Reading.objects.create(
        lot_step=step,
        sample_index=sample,
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
    alerts.handle_event(event.pk)
    return reading


@pytest.fixture
def step(floor):
    return helpers.start_at(floor, floor.lot)


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


def test_nelson_rules_once_chosen(floor, step):
    # Nelson (1984), rule 2: nine points in a row on one side of the centre line (from
    # memory); Western Electric's run rule (8 in a row) is then no longer reported.
    _baselined(floor, step)
    limits.set_series_rules(floor.personas["quality_engineer"], _series().pk, "nelson")
    for n in range(9):
        _feed(floor, step, 51.5)  # just above the centre line 50.81, inside 1 sigma
        fired = set(Alert.objects.values_list("rule", flat=True))
        assert fired == (set() if n < 8 else {"nelson_2"}), f"after {n + 1} points: {fired}"


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
        limits.fix_limits(floor.personas["operator"], s.pk, 50, 56, 44)
    with pytest.raises(InvalidInput, match="lcl <= centre <= ucl"):
        limits.fix_limits(qe, s.pk, 50, 44, 56)
    limits.fix_limits(qe, s.pk, 50.0, 56.0, 44.0)
    assert _series().limits["ucl"] == 56.0 and _series().limits_fixed

    limits.recompute_limits(qe, s.pk, start, start + dt.timedelta(minutes=30))
    assert _series().limits["ucl"] == pytest.approx(55.80, abs=0.01)
    with pytest.raises(InvalidInput, match="at least"):
        limits.recompute_limits(
            qe, s.pk, start - dt.timedelta(days=2), start - dt.timedelta(days=1)
        )
    from shopfloor.audit.models import AuditEntry

    assert AuditEntry.objects.filter(action__startswith="spc.limits").count() == 2


def test_capability_against_definitions(floor, step):
    for v in NIST:
        _feed(floor, step, v)
    result = limits.series_capability(_series().pk)
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
    alerts.handle_event(
        OutboxEvent.objects.create(kind="reading.recorded", payload={"reading": r2.pk}).pk
    )
    from shopfloor.core import judging

    keys = set(SeriesState.objects.values_list("key", flat=True))
    wc = step.work_center.code
    spec = judging.spec_key(judging.criteria_of(WINDOW))
    assert keys == {
        f"hole_wall_copper|{step.code}|{wc}|-|{spec}",
        f"hole_wall_copper|{step.code}|{wc}|EQ-12|{spec}",
    }


# --- X-bar charts: the samples one lot takes at a step form a subgroup ----------------
#
# Constants for n = 5 from the usual control-chart tables (ASTM E2587, Table 1;
# Montgomery, Introduction to Statistical Quality Control, Appendix VI; from memory):
# A2 = 0.577, D3 = 0, D4 = 2.114. The live series must give X-bar limits
# grand mean +- A2 * R-bar and an R chart UCL of D4 * R-bar.

WINDOW5 = {**WINDOW, "samples": 5}
GROUPS = [
    [50.1, 49.6, 50.4, 49.9, 50.0],
    [49.8, 50.3, 50.2, 49.7, 50.0],
    [50.5, 49.9, 49.8, 50.1, 50.2],
    [49.7, 50.0, 50.3, 50.1, 49.6],
    [50.2, 50.4, 49.9, 49.8, 50.1],
]


def _lot_steps(floor, count, prefix="XB"):
    return [
        helpers.start_at(floor, factories.new_lot(floor, code=f"{prefix}-{k}"))
        for k in range(count)
    ]


def _feed_group(floor, step, values):
    for sample, value in enumerate(values, start=1):
        _feed(floor, step, value, window=WINDOW5, sample=sample)


def _xbar_baselined(floor):
    steps = _lot_steps(floor, len(GROUPS))
    # two lots measured at the same time: their samples interleave at the work center
    _feed(floor, steps[0], GROUPS[0][0], window=WINDOW5, sample=1)
    SeriesState.objects.update(baseline_size=len(GROUPS))
    _feed(floor, steps[1], GROUPS[1][0], window=WINDOW5, sample=1)
    for i in range(1, 5):
        _feed(floor, steps[0], GROUPS[0][i], window=WINDOW5, sample=i + 1)
        _feed(floor, steps[1], GROUPS[1][i], window=WINDOW5, sample=i + 1)
    for step, values in zip(steps[2:], GROUPS[2:], strict=True):
        _feed_group(floor, step, values)
    return _series()


def test_chart_for_picks_the_chart_from_the_sampling_plan():
    from shopfloor.quality.series import chart_for

    # common practice: R for small subgroups, S above about ten samples
    assert chart_for(WINDOW) == ("individuals", 1)
    assert chart_for({**WINDOW, "samples": 1}) == ("individuals", 1)
    assert chart_for(WINDOW5) == ("xbar_r", 5)
    assert chart_for({**WINDOW, "samples": 10}) == ("xbar_r", 10)
    assert chart_for({**WINDOW, "samples": 12}) == ("xbar_s", 12)
    assert chart_for({**WINDOW, "samples": 40}) == ("individuals", 1)  # beyond the tables
    assert chart_for({**WINDOW, "attribute": True, "samples": 5}) == ("c", 1)


def test_xbar_r_baseline_limits_use_tabled_constants(floor):
    series = _xbar_baselined(floor)
    assert series.chart == "xbar_r" and series.subgroup_size == 5
    assert series.baseline == GROUPS  # interleaved samples sorted into their own lots
    grand = sum(sum(g) for g in GROUPS) / 25
    r_bar = sum(max(g) - min(g) for g in GROUPS) / 5
    limits = series.limits
    assert limits["centre"] == pytest.approx(grand, abs=1e-9)
    assert limits["ucl"] == pytest.approx(grand + 0.577 * r_bar, abs=1e-3)
    assert limits["lcl"] == pytest.approx(grand - 0.577 * r_bar, abs=1e-3)
    assert limits["range"]["centre"] == pytest.approx(r_bar)
    assert limits["range"]["ucl"] == pytest.approx(2.114 * r_bar, abs=1e-3)
    assert limits["range"]["lcl"] == 0.0
    assert series.rule_state["open"] == []
    assert Alert.objects.count() == 0


def test_xbar_subgroup_is_judged_when_its_last_sample_arrives(floor):
    series = _xbar_baselined(floor)
    ucl = series.limits["ucl"]
    (step,) = _lot_steps(floor, 1, prefix="NEW")
    high = round(ucl + 0.4, 2)  # every sample in the 45-58 window, the mean above UCL
    for sample in range(1, 5):
        _feed(floor, step, high, window=WINDOW5, sample=sample)
        assert Alert.objects.count() == 0, f"judged after only {sample} of 5 samples"
    _feed(floor, step, high, window=WINDOW5, sample=5)
    alert = Alert.objects.get()
    assert alert.kind == "drift" and alert.rule == "western_electric_1"
    assert "subgroup mean of 5 samples" in alert.message
    assert alert.lot_step_id == step.pk
    assert not Lot.objects.get(pk=step.lot_id).on_hold  # drift warns, never holds


def test_xbar_wide_subgroup_breaks_the_r_chart_limit(floor):
    series = _xbar_baselined(floor)
    centre, r_ucl = series.limits["centre"], series.limits["range"]["ucl"]
    (step,) = _lot_steps(floor, 1, prefix="NEW")
    half = r_ucl / 2 + 0.2  # range just over the R chart's UCL, mean on the centre line
    _feed_group(floor, step, [centre - half, centre + half, centre, centre, centre])
    alert = Alert.objects.get()
    assert alert.rule == "R_chart_ucl" and "range" in alert.message
    assert "subgroup mean" not in alert.message  # the R chart judges the spread, not the mean


def test_xbar_correction_replaces_its_sample_in_the_open_subgroup(floor):
    series = _xbar_baselined(floor)
    (step,) = _lot_steps(floor, 1, prefix="NEW")
    _feed(floor, step, 57.0, window=WINDOW5, sample=1)  # mistyped, then corrected
    _feed(floor, step, 50.0, window=WINDOW5, sample=1)
    for sample in range(2, 6):
        _feed(floor, step, 50.0, window=WINDOW5, sample=sample)
    assert Alert.objects.count() == 0
    assert _series().rule_state["rules"]["index"] == 1  # one subgroup charted
    assert series.points + 6 == _series().points


def test_xbar_recompute_uses_complete_subgroups(floor):
    qe = floor.personas["quality_engineer"]
    start = timezone.now() - dt.timedelta(minutes=5)
    series = _xbar_baselined(floor)
    limits.fix_limits(qe, series.pk, 50.0, 60.0, 40.0)
    limits.recompute_limits(qe, series.pk, start, timezone.now())
    recomputed = _series().limits
    r_bar = sum(max(g) - min(g) for g in GROUPS) / 5
    assert recomputed["range"]["centre"] == pytest.approx(r_bar)
    assert "5 complete subgroup(s) of 5" in recomputed["source"]


def test_xbar_series_page_plots_subgroup_means(floor, client):
    series = _xbar_baselined(floor)
    client.force_login(floor.personas["quality_engineer"].user)
    page = client.get(f"/quality/spc/{quote(series.key, safe='')}/")
    assert page.status_code == 200, page.content[:300]
    text = page.content.decode()
    assert "X-bar/R chart" in text and "5 subgroup(s) of 5 samples" in text


def test_xbar_capability_uses_within_subgroup_sigma(floor):
    # Cp = (USL - LSL) / (6 sigma_within), sigma_within = R-bar / d2 with d2(5) = 2.326
    # (ASTM E2587 Table 1 / Montgomery Appendix VI, from memory).
    series = _xbar_baselined(floor)
    r_bar = sum(max(g) - min(g) for g in GROUPS) / 5
    cap = limits.series_capability(series.pk)["capability"]
    assert cap["within_sigma"] == pytest.approx(r_bar / 2.326, rel=1e-3)
    assert cap["cp"] == pytest.approx((58 - 45) / (6 * r_bar / 2.326), rel=1e-3)
