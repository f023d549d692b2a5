"""Attribute charts (c, u, p, np), X-bar/R limits, and series that never mix windows.

Sources are named beside each check; "from memory" marks values recalled rather than
looked up.
"""

from __future__ import annotations

import itertools
import json
import math
from urllib.parse import quote

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from shopfloor.core import judging, spc
from shopfloor.quality.read.charts import spread_labels
from shopfloor.quality.series import series_key

# NIST/SEMATECH e-Handbook 6.3.3.2 p chart example: 30 samples of 50, number
# nonconforming per sample (the orange-juice can data also in Montgomery; from memory).
NIST_P_COUNTS = [12, 15, 8, 10, 4, 7, 16, 9, 14, 10, 5, 6, 17, 12, 22,
                 8, 10, 5, 13, 11, 20, 18, 24, 15, 9, 12, 7, 13, 9, 6]  # fmt: skip


def test_nist_c_chart_limits():
    # NIST/SEMATECH e-Handbook 6.3.3.1 c chart: UCL = c-bar + 3 sqrt(c-bar), LCL =
    # c-bar - 3 sqrt(c-bar); its wafer example has c-bar = 16, UCL 28, LCL 4 (from memory)
    limits = spc.compute_limits("c", [16] * 25)
    assert (limits.centre, limits.ucl, limits.lcl) == (16.0, 28.0, 4.0)


def test_low_mean_c_chart_clamps_lcl_to_zero():
    # two defects in seven checks: c-bar = 0.2857, UCL = 0.2857 + 3 sqrt(0.2857) = 1.889,
    # LCL = max(0, 0.2857 - 1.604) = 0 (e-Handbook 6.3.3.1 formula; closed form)
    limits = spc.compute_limits("c", [0, 1, 0, 0, 1, 0, 0])
    assert limits.centre == pytest.approx(2 / 7)
    assert limits.ucl == pytest.approx(1.889, abs=5e-4)
    assert limits.lcl == 0.0


def test_nist_p_chart_example():
    # NIST/SEMATECH e-Handbook 6.3.3.2 (from memory): p-bar = 0.2313, UCL = 0.4102,
    # LCL = 0.0524
    limits = spc.compute_limits("p", NIST_P_COUNTS, sample_size=50)
    assert limits.centre == pytest.approx(0.2313, abs=1e-4)
    assert limits.ucl == pytest.approx(0.4102, abs=1e-4)
    assert limits.lcl == pytest.approx(0.0524, abs=1e-4)


def test_np_chart_is_the_p_chart_times_n():
    # np chart: n p-bar +- 3 sqrt(n p-bar (1 - p-bar)) (e-Handbook 6.3.3.2; closed form)
    p = spc.compute_limits("p", NIST_P_COUNTS, sample_size=50)
    np_ = spc.compute_limits("np", NIST_P_COUNTS, sample_size=50)
    assert np_.centre == pytest.approx(50 * p.centre)
    assert np_.ucl == pytest.approx(50 * p.ucl)
    assert np_.lcl == pytest.approx(50 * p.lcl)


def test_u_chart_limits():
    # u chart: u-bar +- 3 sqrt(u-bar / n) (e-Handbook 6.3.3.1; closed form): 40 defects in
    # 10 samples of 4 units -> u-bar 1.0, UCL 1 + 3 sqrt(1/4) = 2.5, LCL 0 (clamped)
    limits = spc.compute_limits("u", [4] * 10, sample_size=4)
    assert (limits.centre, limits.ucl, limits.lcl) == (1.0, 2.5, 0.0)


def test_montgomery_piston_ring_xbar_r_limits():
    # Montgomery, Introduction to Statistical Quality Control, piston ring inside
    # diameter, 25 samples of 5 (from memory): grand mean 74.001, R-bar 0.023,
    # X-bar UCL 74.014, LCL 73.988 (A2 = 0.577); R chart UCL 0.049 (D4 = 2.114), LCL 0.
    # Subgroups with the same summary stand in for the raw data.
    groups = [[74.001 - 0.0115, 74.001, 74.001, 74.001, 74.001 + 0.0115]] * 25
    limits = spc.compute_limits("xbar_r", groups)
    assert limits.ucl == pytest.approx(74.014, abs=5e-4)
    assert limits.lcl == pytest.approx(73.988, abs=5e-4)
    assert limits.range is not None
    assert limits.range.ucl == pytest.approx(0.049, abs=5e-4)
    assert limits.range.lcl == 0.0


def test_poisson_ppm_above_closed_form():
    # P(X >= 1) = 1 - e^-m for a Poisson mean m (closed form)
    assert spc.poisson_ppm_above(2 / 7, 0) == pytest.approx(1e6 * (1 - math.exp(-2 / 7)))
    # P(X >= 2) = 1 - e^-m (1 + m)
    assert spc.poisson_ppm_above(0.5, 1) == pytest.approx(1e6 * (1 - math.exp(-0.5) * 1.5))


def test_evaluate_command_shares_the_computation(tmp_path):
    from django.core.management import call_command

    data = tmp_path / "c.json"
    data.write_text(json.dumps({"chart": "c", "values": [0, 1, 0, 0, 1, 0, 0]}))
    import io

    out = io.StringIO()
    call_command("spc", "evaluate", str(data), stdout=out)
    result = json.loads(out.getvalue())
    live = spc.compute_limits("c", [0, 1, 0, 0, 1, 0, 0])
    assert (result["ucl"], result["lcl"]) == (live.ucl, live.lcl)


def test_labels_never_overlap():
    ys = spread_labels([100.0, 101.0, 300.0, 302.0, 303.0])
    ordered = sorted(ys)
    assert all(b - a >= 14.0 - 1e-9 for a, b in itertools.pairwise(ordered))
    assert ys[2] <= 300.0 + 14 * 2  # moved only as far as needed


# --- series never mix windows ------------------------------------------------------------

_limit = st.one_of(st.none(), st.floats(0, 100, allow_nan=False).map(lambda v: round(v, 3)))
_entry = st.fixed_dictionaries(
    {
        "quantity": st.just("hole_wall_copper"),
        "unit": st.just("um"),
        "min": _limit,
        "max": _limit,
        "samples": st.integers(1, 6),
        "applies_to": st.sampled_from(judging.APPLIES_TO),
    }
)
_criteria = st.lists(_entry, min_size=1, max_size=3)


def _canonical(entries):
    n = judging.samples_of(entries)
    return n, sorted(
        (judging.applies_to(e), e["min"] is None, e["min"] or 0, e["max"] is None, e["max"] or 0)
        for e in entries
    )


@settings(max_examples=300, deadline=None)
@given(a=_criteria, b=_criteria, step=st.sampled_from(["plate", "plate_c1"]))
def test_no_series_holds_points_judged_against_two_windows(a, b, step):
    # the series key includes the window's identity: equal keys imply equal criteria
    # (limits, what they apply to, sample count), so a class 2 lot never enters a class 3
    # series (property over arbitrary windows)
    key_a = series_key("hole_wall_copper", "plating", None, step, judging.spec_key(a))
    key_b = series_key("hole_wall_copper", "plating", None, step, judging.spec_key(b))
    if key_a == key_b:
        assert _canonical(a) == _canonical(b)


@pytest.mark.django_db
def test_class_2_and_class_3_lots_feed_separate_series(floor, client):
    from shopfloor.floor import services as floor_services
    from shopfloor.quality import series as series_core
    from shopfloor.quality.models import OutboxEvent, SeriesState
    from shopfloor.quality.services import alerts
    from tests import factories, helpers

    steps = []
    for ipc_class in (2, 3):
        revision = factories.make_part_revision(dict(factories.SPEC_4L_ENIG, ipc_class=ipc_class))
        routing = factories.release_routing(revision, floor.personas["process_engineer"])
        lot = factories.make_lot(routing, factories.make_job(revision, routing))
        steps.append(helpers.start_at(floor, lot))
    for step in steps:
        for sample in range(1, 6):
            floor_services.record_reading(
                person=floor.personas["operator"],
                lot_step_id=step.pk,
                data=floor_services.ReadingInput(
                    quantity="hole_wall_copper", value=27, unit="um", sample_index=sample
                ),
            )
    for event in OutboxEvent.objects.order_by("pk"):
        alerts.handle_event(event.pk)
    series = list(SeriesState.objects.filter(quantity="hole_wall_copper"))
    assert len(series) == 2
    for s in series:
        keys = set(series_core.series_queryset(s).values_list("spec_key", flat=True))
        assert keys == {s.spec_key}
        assert s.points == 5
    labels = sorted(s.window_label for s in series)
    # IPC-6012 class 2: average 20 / thin 18 um; class 3: 25 / 20 um (from memory)
    assert labels == [
        "average of 5 samples ≥ 20 µm; each ≥ 18 µm",
        "average of 5 samples ≥ 25 µm; each ≥ 20 µm",
    ]
    client.force_login(floor.personas["quality_engineer"].user)
    page = client.get(f"/quality/spc/{quote(series[0].key, safe='')}/")
    assert page.status_code == 200
    assert "Only readings judged against this window" in page.content.decode()
