"""Control chart constants (d2, d3, c4, A2, A3, B3, B4, D3, D4) computed from their definitions.

Pure: no Django imports.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Final

from .errors import SpcInputError

# ---------------------------------------------------------------------------
# 1. Control chart constants
# ---------------------------------------------------------------------------

MIN_SUBGROUP_SIZE: Final = 2
MAX_SUBGROUP_SIZE: Final = 25

# Numeric integration grid. The integrands below are smooth and decay like a normal
# density, so the plain trapezoid rule on a wide, fine grid is accurate to far better
# than the 3-4 decimals the published tables carry (checked in the tests against the
# exact closed forms for n = 2 and n = 3).
_GRID_HALF_WIDTH: Final = 8.0
_GRID_STEP: Final = 0.04


def _phi(x: float) -> float:
    """Standard normal density."""
    return math.exp(-0.5 * x * x) / math.sqrt(2.0 * math.pi)


def _cdf(x: float) -> float:
    """Standard normal CDF via erfc, which stays accurate far into both tails."""
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def _check_n(n: int) -> None:
    if isinstance(n, bool) or not isinstance(n, int):
        raise SpcInputError(f"subgroup size must be a whole number, got {n!r}")
    if not MIN_SUBGROUP_SIZE <= n <= MAX_SUBGROUP_SIZE:
        raise SpcInputError(
            f"subgroup size {n} is not supported; allowed sizes are "
            f"{MIN_SUBGROUP_SIZE} to {MAX_SUBGROUP_SIZE}"
        )


@functools.cache
def _grid() -> tuple[tuple[float, ...], tuple[float, ...], tuple[float, ...], tuple[float, ...]]:
    """Shared grid: points x_i, density phi(x_i), CDF Phi(x_i) and upper tail Phi(-x_i)."""
    m = round(2 * _GRID_HALF_WIDTH / _GRID_STEP)
    xs = tuple(-_GRID_HALF_WIDTH + i * _GRID_STEP for i in range(m + 1))
    return (
        xs,
        tuple(_phi(x) for x in xs),
        tuple(_cdf(x) for x in xs),
        tuple(_cdf(-x) for x in xs),
    )


@functools.cache
def d2(n: int) -> float:
    """Expected range of ``n`` independent standard normal variables.

    Computed as ``integral of 1 - Phi(x)^n - (1 - Phi(x))^n dx`` over the real line
    (the range is max - min, and E[max] - E[min] reduces to this single integral), so the
    value is exact to the accuracy of the quadrature rather than copied from a table.
    Used to turn an average range into a sigma estimate: sigma = R-bar / d2.
    """
    _check_n(n)
    xs, _, cdf, upper = _grid()
    h = _GRID_STEP
    vals = [1.0 - cdf[i] ** n - upper[i] ** n for i in range(len(xs))]
    return h * (sum(vals) - 0.5 * (vals[0] + vals[-1]))


@functools.cache
def _range_second_moment(n: int) -> float:
    """E[W^2] for the range W of ``n`` standard normals, by double integration.

    Uses the range density f(w) = n(n-1) * integral phi(x) phi(x+w) (Phi(x+w)-Phi(x))^(n-2) dx
    on a grid where w is a multiple of the x step, so x+w lands on a grid point and no
    interpolation is needed. w^2 f(w) vanishes with its first derivative at w = 0, which
    keeps the trapezoid rule's end correction negligible.
    """
    _, dens, cdf, upper = _grid()
    h = _GRID_STEP
    m = len(dens) - 1
    power = n - 2
    total = 0.0
    for j in range(1, m + 1):
        inner = 0.0
        for i in range(m + 1 - j):
            k = i + j
            # Phi(x+w) - Phi(x), taken from whichever tail avoids cancellation.
            diff = upper[i] - upper[k] if cdf[i] > 0.5 else cdf[k] - cdf[i]
            inner += dens[i] * dens[k] * diff**power
        w = j * h
        total += w * w * inner
    return n * (n - 1) * h * h * total


@functools.cache
def d3(n: int) -> float:
    """Standard deviation of the range of ``n`` standard normals: sqrt(E[W^2] - d2^2).

    Sets the width of the R chart limits (D3, D4).
    """
    _check_n(n)
    return math.sqrt(_range_second_moment(n) - d2(n) ** 2)


@functools.cache
def c4(n: int) -> float:
    """Bias correction for the sample standard deviation: E[s] = c4 * sigma.

    c4 = sqrt(2 / (n - 1)) * Gamma(n / 2) / Gamma((n - 1) / 2); computed through
    ``lgamma`` so large ``n`` does not overflow.
    """
    _check_n(n)
    return math.sqrt(2.0 / (n - 1)) * math.exp(math.lgamma(n / 2) - math.lgamma((n - 1) / 2))


@dataclass(frozen=True, slots=True)
class ChartConstants:
    """All Shewhart chart factors for one subgroup size, derived from d2, d3 and c4."""

    n: int
    d2: float
    d3: float
    c4: float
    a2: float  # X-bar/R: limits are grand mean +- A2 * R-bar
    a3: float  # X-bar/S: limits are grand mean +- A3 * S-bar
    d3_factor: float  # D3: R chart LCL = D3 * R-bar (named to avoid clashing with d3)
    d4_factor: float  # D4: R chart UCL = D4 * R-bar
    b3: float  # S chart LCL = B3 * S-bar
    b4: float  # S chart UCL = B4 * S-bar


@functools.cache
def chart_constants(n: int) -> ChartConstants:
    """Factors for subgroup size ``n`` (2..25), computed from their definitions.

    A2 = 3 / (d2 sqrt n), A3 = 3 / (c4 sqrt n), D3 = max(0, 1 - 3 d3/d2),
    D4 = 1 + 3 d3/d2, B3 = max(0, 1 - 3 sqrt(1 - c4^2)/c4), B4 = 1 + 3 sqrt(1 - c4^2)/c4.
    The lower factors are floored at zero because a range or standard deviation cannot
    be negative.
    """
    _check_n(n)
    dd2, dd3, cc4 = d2(n), d3(n), c4(n)
    s_ratio = 3.0 * math.sqrt(1.0 - cc4 * cc4) / cc4
    return ChartConstants(
        n=n,
        d2=dd2,
        d3=dd3,
        c4=cc4,
        a2=3.0 / (dd2 * math.sqrt(n)),
        a3=3.0 / (cc4 * math.sqrt(n)),
        d3_factor=max(0.0, 1.0 - 3.0 * dd3 / dd2),
        d4_factor=1.0 + 3.0 * dd3 / dd2,
        b3=max(0.0, 1.0 - s_ratio),
        b4=1.0 + s_ratio,
    )
