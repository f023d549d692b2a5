"""Capability indices and expected ppm against published examples and normal-table facts."""

from __future__ import annotations

import itertools
import math
import statistics

import pytest

from shopfloor.core.spc import (
    SpcInputError,
    capability,
    capability_indices,
    normal_ppm_out_of_spec,
)


def test_nist_capability_example() -> None:
    # NIST/SEMATECH e-Handbook of Statistical Methods, section 6.1.6 (from memory):
    # USL = 20, LSL = 8, mean = 16, sigma = 2 gives Cp = 1.0, Cpk = 0.667
    # (Cpu = 0.667, Cpl = 1.333).
    cp, cpk = capability_indices(16.0, 2.0, 8.0, 20.0)
    assert cp == pytest.approx(1.0)
    assert cpk == pytest.approx(0.667, abs=5e-4)
    assert capability_indices(16.0, 2.0, None, 20.0) == (None, pytest.approx(0.667, abs=5e-4))
    assert capability_indices(16.0, 2.0, 8.0, None) == (None, pytest.approx(1.333, abs=5e-4))


def test_nist_example_expected_out_of_spec() -> None:
    # Standard normal table: P(Z > 2) = 0.02275, P(Z < -4) = 0.0000317.
    ppm = normal_ppm_out_of_spec(16.0, 2.0, 8.0, 20.0)
    assert ppm == pytest.approx(22750.1 + 31.7, abs=0.5)


@pytest.mark.parametrize(
    ("half_width_sigmas", "shift", "expected", "tol"),
    [
        # Normal-distribution facts: a centred process with Cp = Cpk = 1 has 2700 ppm out
        # (0.27 %) two-sided; Cpk = 1.33 (4 sigma each side) about 63 ppm; Cp = 2 centred
        # about 0.002 ppm; "six sigma" with the conventional 1.5 sigma mean shift leaves
        # 4.5 sigma to the near limit: 3.4 ppm.
        (3.0, 0.0, 2699.8, 0.1),
        (4.0, 0.0, 63.3, 0.1),
        (6.0, 0.0, 0.00197, 0.00002),
        (6.0, 1.5, 3.4, 0.05),
    ],
)
def test_ppm_normal_table_facts(
    half_width_sigmas: float, shift: float, expected: float, tol: float
) -> None:
    ppm = normal_ppm_out_of_spec(shift, 1.0, -half_width_sigmas, half_width_sigmas)
    assert ppm == pytest.approx(expected, abs=tol)


def test_one_sided_ppm_counts_only_the_given_side() -> None:
    # P(Z > 3) = 0.00135 (normal table).
    assert normal_ppm_out_of_spec(0.0, 1.0, None, 3.0) == pytest.approx(1349.9, abs=0.1)
    assert normal_ppm_out_of_spec(0.0, 1.0, -3.0, None) == pytest.approx(1349.9, abs=0.1)


# Invented readings in time order.
READINGS = [10.2, 9.8, 10.1, 10.4, 9.9, 10.0, 10.3, 9.7, 10.1, 10.0]


def test_capability_from_readings_uses_within_and_overall_sigma() -> None:
    """Invariant: expected values recomputed here from the formulas (not outside data)."""
    cap = capability(READINGS, lsl=9.0, usl=11.5)
    mean = statistics.fmean(READINGS)
    mr_bar = statistics.fmean(abs(b - a) for a, b in itertools.pairwise(READINGS))
    within = mr_bar / (2 / math.sqrt(math.pi))  # d2(2) = 2/sqrt(pi) exactly
    overall = statistics.stdev(READINGS)
    assert cap.mean == pytest.approx(mean)
    assert cap.within_sigma == pytest.approx(within)
    assert cap.overall_sigma == pytest.approx(overall)
    assert cap.cp == pytest.approx(2.5 / (6 * within))
    assert cap.cpk == pytest.approx((mean - 9.0) / (3 * within))
    assert cap.pp == pytest.approx(2.5 / (6 * overall))
    assert cap.ppk == pytest.approx((mean - 9.0) / (3 * overall))
    assert set(cap.to_dict()) == {"cp", "cpk", "pp", "ppk", "ppm"}


def test_one_sided_spec_has_no_cp_or_pp() -> None:
    cap = capability(READINGS, usl=11.0)
    assert cap.cp is None and cap.pp is None
    assert cap.cpk is not None and cap.ppk is not None
    assert cap.cpk == pytest.approx((11.0 - cap.mean) / (3 * cap.within_sigma))


def test_explicit_within_sigma_is_used() -> None:
    cap = capability(READINGS, lsl=9.0, usl=11.0, within=0.25)
    assert cap.cp == pytest.approx(2.0 / 1.5)


def test_zero_spread_leaves_indices_undefined() -> None:
    cap = capability([5.0, 5.0, 5.0], lsl=4.0, usl=6.0)
    assert (cap.cp, cap.cpk, cap.pp, cap.ppk, cap.ppm) == (None, None, None, None, 0.0)
    assert capability([7.0, 7.0], lsl=4.0, usl=6.0).ppm == 1e6


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [({}, "lsl, usl or both"), ({"lsl": 5.0, "usl": 5.0}, "must be below usl")],
)
def test_bad_specs_rejected(kwargs: dict[str, float], message: str) -> None:
    with pytest.raises(SpcInputError, match=message):
        capability(READINGS, **kwargs)
