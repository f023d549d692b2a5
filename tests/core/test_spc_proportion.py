"""p and np charts for defectives out of n (shopfloor.core.spc.proportion), the one
computation behind the live series, the SPC page and `spc evaluate`.

Sources are named beside each check; "from memory" marks values recalled rather than
looked up.
"""

from __future__ import annotations

import math

import pytest

from shopfloor.core import spc

# NIST/SEMATECH e-Handbook of Statistical Methods 6.3.3.2, p chart example: 30 wafers,
# 50 chips tested on each, defective chips per wafer (from memory).
NIST_P_COUNTS = [12, 15, 8, 10, 4, 7, 16, 9, 14, 10, 5, 6, 17, 12, 22,
                 8, 10, 5, 13, 11, 20, 18, 24, 15, 9, 12, 7, 13, 9, 6]  # fmt: skip


def test_nist_p_chart_example_through_the_live_computation():
    # e-Handbook 6.3.3.2 (from memory): p-bar = 0.2313, UCL = 0.4102, LCL = 0.0524
    chart = spc.proportion_chart(NIST_P_COUNTS, [50] * 30, chart="p")
    assert chart.p_bar == pytest.approx(347 / 1500)
    assert chart.p_bar == pytest.approx(0.2313, abs=1e-4)
    assert chart.ucl == (pytest.approx(0.4102, abs=1e-4),) * 30
    assert chart.lcl == (pytest.approx(0.0524, abs=1e-4),) * 30
    # the handbook's chart shows wafers 15 and 23 above the UCL (from memory)
    above = [i for i, (p, u) in enumerate(zip(chart.plotted, chart.ucl, strict=True)) if p > u]
    assert above == [14, 22]


def test_constant_n_is_an_np_chart_n_times_the_p_chart():
    # np chart: n p-bar +- 3 sqrt(n p-bar (1 - p-bar)) (e-Handbook 6.3.3.2; closed form)
    p = spc.proportion_chart(NIST_P_COUNTS, [50] * 30, chart="p")
    np_ = spc.proportion_chart(NIST_P_COUNTS, [50] * 30)
    assert np_.chart == "np"
    assert np_.centre[0] == pytest.approx(50 * p.p_bar)
    assert np_.ucl[0] == pytest.approx(50 * p.ucl[0])
    assert np_.lcl[0] == pytest.approx(50 * p.lcl[0])
    # and the older fixed-n entry point gives the same numbers (one computation)
    limits = spc.compute_limits("p", NIST_P_COUNTS, sample_size=50)
    assert (limits.centre, limits.ucl, limits.lcl) == (p.p_bar, p.ucl[0], p.lcl[0])


def test_varying_n_limits_per_point_and_lcl_clamped_at_zero():
    # p-bar = sum k / sum n; limits p-bar +- 3 sqrt(p-bar (1 - p-bar) / n_i), LCL >= 0
    # (e-Handbook 6.3.3.2 formula with each sample's own n; closed form)
    counts, sizes = [2, 5, 1, 8], [40, 100, 20, 160]
    chart = spc.proportion_chart(counts, sizes)
    assert chart.chart == "p"
    p_bar = 16 / 320
    assert chart.p_bar == pytest.approx(p_bar)
    for n, ucl, lcl in zip(sizes, chart.ucl, chart.lcl, strict=True):
        s = math.sqrt(p_bar * (1 - p_bar) / n)
        assert ucl == pytest.approx(p_bar + 3 * s)
        assert lcl == max(0.0, p_bar - 3 * s)
    assert chart.lcl[0] == 0.0  # n = 40: 0.05 - 3 x 0.0345 < 0, clamped
    assert chart.standardized[1] == pytest.approx(0.0)  # 5 of 100 is exactly p-bar


def test_evaluate_contract_takes_a_sample_size_per_point():
    result = spc.evaluate(
        {"chart": "p", "values": [2, 5, 1, 8], "sample_sizes": [40, 100, 20, 160]}
    )
    assert result["centre"] == pytest.approx(0.05)
    assert result["ucl"] is None and result["lcl"] is None  # n varies: see the points
    assert [p["n"] for p in result["points"]] == [40, 100, 20, 160]
    live = spc.proportion_chart([2, 5, 1, 8], [40, 100, 20, 160])
    assert [p["ucl"] for p in result["points"]] == list(live.ucl)
    nist = spc.evaluate(
        {"chart": "p", "values": NIST_P_COUNTS, "sample_sizes": [50] * 30, "rules": "nelson"}
    )
    assert nist["ucl"] == pytest.approx(0.4102, abs=1e-4)
    assert {14, 22} <= {s["index"] for s in nist["signals"] if s["rule"] == "nelson_1"}


@pytest.mark.parametrize(
    ("data", "words"),
    [
        ({"chart": "p", "values": [3, 60], "sample_sizes": [50, 50]}, "more than its sample"),
        ({"chart": "p", "values": [3, 4], "sample_sizes": [50]}, "one size per value"),
        ({"chart": "p", "values": [3, 4], "sample_sizes": [50, 0]}, "1 or more"),
        ({"chart": "p", "values": [3, 4.5], "sample_sizes": [50, 50]}, "whole number"),
        ({"chart": "np", "values": [3, 4], "sample_sizes": [50, 40]}, "same sample size"),
        ({"chart": "c", "values": [3, 4], "sample_sizes": [50, 40]}, "only to the p and np"),
        (
            {"chart": "p", "values": [3, 4], "sample_sizes": [5, 5], "sample_size": 5},
            "not both",
        ),
    ],
)
def test_bad_proportion_input_is_refused_with_the_rule(data, words):
    with pytest.raises(spc.SpcInputError, match=words):
        spc.evaluate(data)
