"""Control limits against published worked examples, plus labelled invariants.

The library computes its constants exactly, while the worked examples use 3-decimal
table factors; tolerances below allow for that difference (a few units in the 4th
significant digit) and no more.
"""

from __future__ import annotations

import math

import pytest

from shopfloor.core.spc import (
    SpcInputError,
    compute_limits,
    evaluate_rules,
    fixed_limits,
    plotted_points,
)

# NIST/SEMATECH e-Handbook of Statistical Methods, section 6.3.2.2 (individuals control
# charts), example of 10 batch measurements (from memory).
NIST_INDIVIDUALS = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]

# Montgomery, Introduction to Statistical Quality Control, p chart example: frozen
# orange juice concentrate cans, 30 samples of n=50, number nonconforming per sample;
# 347 nonconforming in total, samples 15 and 23 plot above the UCL (from memory).
MONTGOMERY_P_COUNTS = [12, 15, 8, 10, 4, 7, 16, 9, 14, 10, 5, 6, 17, 12, 22,
                       8, 10, 5, 13, 11, 20, 18, 24, 15, 9, 12, 7, 13, 9, 6]  # fmt: skip

# Montgomery, Introduction to Statistical Quality Control, c chart example: nonconformities
# in 26 successive samples of 100 printed circuit boards; 516 in total, samples 6 and 20
# fall outside the limits (from memory).
MONTGOMERY_C_COUNTS = [21, 24, 16, 12, 15, 5, 28, 20, 31, 25, 20, 24, 16,
                       19, 10, 17, 13, 22, 18, 39, 30, 24, 16, 19, 17, 15]  # fmt: skip


def test_nist_individuals_example() -> None:
    # NIST/SEMATECH e-Handbook 6.3.2.2 (from memory): mean 50.81, MR-bar 1.8778,
    # UCL 55.8041, LCL 45.8159 (with d2 = 1.128), moving range UCL 6.1347 (3.267 * MR-bar).
    limits = compute_limits("individuals", NIST_INDIVIDUALS)
    assert limits.centre == pytest.approx(50.81, abs=1e-9)
    assert limits.range is not None
    assert limits.range.centre == pytest.approx(1.8778, abs=1e-4)
    assert limits.ucl == pytest.approx(55.8041, abs=0.002)
    assert limits.lcl == pytest.approx(45.8159, abs=0.002)
    assert limits.range.ucl == pytest.approx(6.1347, abs=0.002)
    assert limits.range.lcl == 0.0
    # The handbook reports the process in control.
    assert evaluate_rules(NIST_INDIVIDUALS, limits, ["western_electric_1"]) == []


def test_montgomery_p_chart_example() -> None:
    # Montgomery (from memory): p-bar = 0.2313, UCL = 0.4102, LCL = 0.0524.
    limits = compute_limits("p", MONTGOMERY_P_COUNTS, sample_size=50)
    assert limits.centre == pytest.approx(347 / 1500)
    assert limits.ucl == pytest.approx(0.4102, abs=1e-4)
    assert limits.lcl == pytest.approx(0.0524, abs=1e-4)
    assert limits.range is None
    points = plotted_points("p", MONTGOMERY_P_COUNTS, sample_size=50)
    signals = evaluate_rules(points, limits, ["western_electric_1"])
    assert [s.index for s in signals] == [14, 22]  # samples 15 and 23, 1-based


def test_montgomery_c_chart_pcb_example() -> None:
    # Montgomery (from memory): c-bar = 19.85, UCL = 33.22, LCL = 6.48.
    limits = compute_limits("c", MONTGOMERY_C_COUNTS)
    assert limits.centre == pytest.approx(516 / 26)
    assert limits.ucl == pytest.approx(33.22, abs=0.01)
    assert limits.lcl == pytest.approx(6.48, abs=0.01)
    signals = evaluate_rules(MONTGOMERY_C_COUNTS, limits, ["western_electric_1"])
    assert [s.index for s in signals] == [5, 19]  # samples 6 and 20, 1-based


def _subgroups_with(mean: float, spread: float, count: int, kind: str) -> list[list[float]]:
    """Invented subgroups of 5 that reproduce a published grand mean and R-bar / S-bar.

    [m-a, m, m, m, m+a] has mean m, range 2a and sample standard deviation a/sqrt(2).
    """
    a = spread / 2 if kind == "range" else spread * math.sqrt(2)
    return [[mean - a, mean, mean, mean, mean + a] for _ in range(count)]


def test_montgomery_xbar_r_flow_width_summary() -> None:
    # Montgomery, hard-bake flow width X-bar/R example, 25 subgroups of 5 (from memory):
    # grand mean 1.5056, R-bar 0.32521, X-bar UCL 1.6933, LCL 1.3179, R chart UCL 0.6876,
    # LCL 0. The raw data are not reproduced; subgroups with the same summary are used.
    limits = compute_limits("xbar_r", _subgroups_with(1.5056, 0.32521, 25, "range"))
    assert limits.centre == pytest.approx(1.5056)
    assert limits.ucl == pytest.approx(1.6933, abs=2e-4)
    assert limits.lcl == pytest.approx(1.3179, abs=2e-4)
    assert limits.range is not None
    assert limits.range.centre == pytest.approx(0.32521)
    assert limits.range.ucl == pytest.approx(0.6876, abs=2e-4)
    assert limits.range.lcl == 0.0


def test_montgomery_xbar_s_piston_ring_summary() -> None:
    # Montgomery, piston ring inside diameter X-bar/S example, 25 subgroups of 5 (from
    # memory): grand mean 74.001, S-bar 0.0094, X-bar limits 74.014 / 73.988, S chart
    # UCL 0.0196, LCL 0.
    limits = compute_limits("xbar_s", _subgroups_with(74.001, 0.0094, 25, "sd"))
    assert limits.centre == pytest.approx(74.001)
    assert limits.ucl == pytest.approx(74.014, abs=5e-4)
    assert limits.lcl == pytest.approx(73.988, abs=5e-4)
    assert limits.range is not None
    assert limits.range.centre == pytest.approx(0.0094)
    assert limits.range.ucl == pytest.approx(0.0196, abs=1e-4)
    assert limits.range.lcl == 0.0


# ----- invariants (expected values derived from the formulas, not outside checks) -----


def test_xbar_sigma_is_the_sigma_of_the_plotted_mean() -> None:
    groups = [[1.0, 2.0, 3.0, 4.0], [2.0, 2.5, 3.5, 5.0], [0.5, 2.0, 2.0, 3.0]]
    limits = compute_limits("xbar_r", groups)
    assert limits.within_sigma is not None
    assert limits.sigma == pytest.approx(limits.within_sigma / 2)  # sqrt(4) = 2
    assert limits.ucl - limits.centre == pytest.approx(3 * limits.sigma)
    assert limits.centre - limits.lcl == pytest.approx(3 * limits.sigma)
    assert plotted_points("xbar_r", groups) == [2.5, 3.25, 1.875]


def test_c_chart_lcl_floored_at_zero() -> None:
    limits = compute_limits("c", [0, 1, 2, 1, 0])
    assert limits.lcl == 0.0
    assert limits.ucl == pytest.approx(0.8 + 3 * math.sqrt(0.8))


def test_p_chart_limits_capped_at_one_and_floored_at_zero() -> None:
    limits = compute_limits("p", [2, 2, 1, 2], sample_size=2)  # p-bar = 0.875
    assert limits.ucl == 1.0
    assert limits.lcl == pytest.approx(0.875 - 3 * math.sqrt(0.875 * 0.125 / 2))
    low = compute_limits("p", [0, 1, 0, 0], sample_size=10)
    assert low.lcl == 0.0


def test_fixed_limits_infer_sigma_from_the_unclipped_side() -> None:
    limits = fixed_limits(0.1, 0.25, 0.0)
    assert limits.sigma == pytest.approx(0.05)
    assert fixed_limits(10, 16, 4, sigma=1.5).sigma == 1.5
    with pytest.raises(SpcInputError, match="lcl <= centre <= ucl"):
        fixed_limits(10, 4, 16)


def test_zero_spread_baseline_gives_zero_width_limits() -> None:
    limits = compute_limits("individuals", [5.0, 5.0, 5.0])
    assert (limits.lcl, limits.centre, limits.ucl, limits.sigma) == (5.0, 5.0, 5.0, 0.0)
