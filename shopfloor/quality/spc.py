"""Statistical process control (SPC): the pure calculation core.

Nothing here imports Django or touches a database, so the same code serves the web
service, the Celery workers, the ``manage.py spc evaluate`` command and the tests.
Only the standard library is used (``math``, ``statistics``, ``dataclasses``) so that the
numbers can be audited line by line without trusting a numeric package.

Layout of this module, in the order a reading flows through it:

1. Control chart constants (d2, d3, c4, A2, A3, B3, B4, D3, D4) *computed* from their
   definitions, not typed in, so no table transcription error can creep in.
2. Control limits for the individuals / moving range, X-bar/R, X-bar/S, c and p charts
   (:func:`compute_limits`), or limits fixed by the user (:func:`fixed_limits`).
3. Western Electric and Nelson run rules evaluated incrementally (:func:`step`) with a
   small, JSON-serialisable :class:`RuleState`, so the service can keep one state per
   series in the database and never re-read history when a reading arrives.
4. Process capability (Cp, Cpk, Pp, Ppk, expected ppm out of specification).
5. :func:`evaluate`, the validated JSON-in / JSON-out contract behind the command line.

Nothing is rounded inside this module; callers round for display.
"""

from __future__ import annotations

import functools
import itertools
import math
import statistics
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Final, Literal

__all__ = [
    "CHARTS",
    "MAX_SUBGROUP_SIZE",
    "MIN_BASELINE_POINTS",
    "MIN_SUBGROUP_SIZE",
    "RULES",
    "RULESETS",
    "Capability",
    "ChartConstants",
    "ChartKind",
    "Limits",
    "Rule",
    "RuleState",
    "Signal",
    "SpcInputError",
    "c4",
    "capability",
    "capability_indices",
    "chart_constants",
    "compute_limits",
    "d2",
    "d3",
    "evaluate",
    "evaluate_rules",
    "fixed_limits",
    "normal_ppm_out_of_spec",
    "plotted_points",
    "poisson_ppm_above",
    "step",
    "within_sigma",
]


class SpcInputError(ValueError):
    """Input that cannot be charted; the message says what was wrong and what is allowed.

    It subclasses ``ValueError`` so generic callers still treat it as bad input; the
    management command maps it to exit code 2.
    """


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


# ---------------------------------------------------------------------------
# 2. Control limits
# ---------------------------------------------------------------------------

type ChartKind = Literal["individuals", "xbar_r", "xbar_s", "c", "u", "p", "np"]
CHARTS: Final[tuple[str, ...]] = ("individuals", "xbar_r", "xbar_s", "c", "u", "p", "np")
#: Charts of counts: no Cp/Cpk (show defects per unit and a Poisson or binomial ppm).
ATTRIBUTE_CHARTS: Final[tuple[str, ...]] = ("c", "u", "p", "np")
#: Charts whose points are counts out of a sample size n.
SIZED_CHARTS: Final[tuple[str, ...]] = ("u", "p", "np")
VARIABLES_CHARTS: Final[tuple[str, ...]] = ("individuals", "xbar_r", "xbar_s")

#: Fewest baseline points (values, or subgroups) from which limits are computed: one
#: moving range needs two values, and one subgroup alone says nothing about drift.
MIN_BASELINE_POINTS: Final = 2


@dataclass(frozen=True, slots=True)
class Limits:
    """Control limits for the plotted statistic of one chart.

    ``sigma`` is the standard deviation of the *plotted point* (for X-bar charts that is
    the within-subgroup sigma divided by sqrt(n); for p charts it is sqrt(p(1-p)/n)); the
    run rules use it to draw the 1, 2 and 3 sigma zones. ``within_sigma`` is the
    short-term sigma of a single reading (R-bar/d2, S-bar/c4 or MR-bar/d2) used for
    Cp/Cpk; it is None for attribute charts and for limits typed in by the user.
    ``range`` holds the companion dispersion chart (moving range, R or S), if any.
    """

    centre: float
    ucl: float
    lcl: float
    sigma: float
    range: Limits | None = None
    within_sigma: float | None = None

    def to_dict(self) -> dict[str, float]:
        """The three lines in the shape the ``evaluate`` contract returns."""
        return {"centre": self.centre, "ucl": self.ucl, "lcl": self.lcl}


def _number(value: object, where: str) -> float:
    """A finite float, or SpcInputError naming the offending position."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise SpcInputError(
            f"{where} is {value!r} ({type(value).__name__}); every value must be a number"
        )
    result = float(value)
    if not math.isfinite(result):
        raise SpcInputError(f"{where} is {value!r}; NaN and infinite values are not allowed")
    return result


def _values(data: object, name: str, minimum: int) -> list[float]:
    if isinstance(data, str | bytes) or not isinstance(data, Sequence):
        raise SpcInputError(f"{name} must be a list of numbers, got {type(data).__name__}")
    if len(data) < minimum:
        raise SpcInputError(f"{name} has {len(data)} point(s); at least {minimum} are needed")
    return [_number(v, f"{name}[{i}]") for i, v in enumerate(data)]


def _counts(data: object, name: str, minimum: int, ceiling: int | None = None) -> list[float]:
    values = _values(data, name, minimum)
    for i, v in enumerate(values):
        if v < 0 or v != math.floor(v):
            raise SpcInputError(
                f"{name}[{i}] is {v!r}; counts must be whole numbers of zero or more"
            )
        if ceiling is not None and v > ceiling:
            raise SpcInputError(
                f"{name}[{i}] is {v:g} defectives, more than the sample size {ceiling}"
            )
    return values


def _subgroups(data: object, minimum: int) -> list[list[float]]:
    if isinstance(data, str | bytes) or not isinstance(data, Sequence):
        raise SpcInputError(f"subgroups must be a list of lists, got {type(data).__name__}")
    if len(data) < minimum:
        raise SpcInputError(f"subgroups has {len(data)} subgroup(s); at least {minimum} are needed")
    groups: list[list[float]] = []
    for g, group in enumerate(data):
        if isinstance(group, str | bytes) or not isinstance(group, Sequence):
            raise SpcInputError(f"subgroups[{g}] must be a list of numbers")
        groups.append([_number(v, f"subgroups[{g}][{i}]") for i, v in enumerate(group)])
    size = len(groups[0]) if groups else MIN_SUBGROUP_SIZE
    for g, group in enumerate(groups):
        if len(group) != size:
            raise SpcInputError(
                f"subgroups are ragged: subgroups[0] has {size} values but subgroups[{g}] "
                f"has {len(group)}; every subgroup must have the same size"
            )
    _check_n(size)
    return groups


def _sample_size(sample_size: object) -> int:
    if sample_size is None:
        raise SpcInputError(
            "a p chart needs sample_size (the number inspected per sample); so do u and np"
        )
    if isinstance(sample_size, bool) or not isinstance(sample_size, int | float):
        raise SpcInputError(f"sample_size must be a whole number of 1 or more, got {sample_size!r}")
    if not math.isfinite(sample_size) or sample_size < 1 or sample_size != int(sample_size):
        raise SpcInputError(f"sample_size must be a whole number of 1 or more, got {sample_size!r}")
    return int(sample_size)


def _moving_ranges(values: Sequence[float]) -> list[float]:
    return [abs(b - a) for a, b in itertools.pairwise(values)]


def within_sigma(chart: ChartKind, data: Sequence[Any]) -> float:
    """Short-term (within) sigma of one reading, the estimator the chart itself uses.

    individuals: MR-bar / d2(2); xbar_r: R-bar / d2(n); xbar_s: S-bar / c4(n). These
    estimators ignore drift between subgroups (or between consecutive readings), which is
    why Cp/Cpk ("what the process could do") use them while Pp/Ppk use the overall
    standard deviation ("what it did").
    """
    if chart == "individuals":
        values = _values(data, "values", 2)
        return statistics.fmean(_moving_ranges(values)) / d2(2)
    if chart in ("xbar_r", "xbar_s"):
        groups = _subgroups(data, 1)
        n = len(groups[0])
        if chart == "xbar_r":
            return statistics.fmean(max(g) - min(g) for g in groups) / d2(n)
        return statistics.fmean(statistics.stdev(g) for g in groups) / c4(n)
    raise SpcInputError(f"within sigma is defined only for variables charts {VARIABLES_CHARTS}")


def _individuals(values: list[float]) -> Limits:
    centre = statistics.fmean(values)
    mr_bar = statistics.fmean(_moving_ranges(values))
    k = chart_constants(2)
    sigma = mr_bar / k.d2
    mr = Limits(
        centre=mr_bar,
        ucl=k.d4_factor * mr_bar,
        lcl=k.d3_factor * mr_bar,
        sigma=k.d3 * sigma,
    )
    return Limits(centre, centre + 3 * sigma, centre - 3 * sigma, sigma, mr, sigma)


def _xbar_r(groups: list[list[float]]) -> Limits:
    n = len(groups[0])
    k = chart_constants(n)
    centre = statistics.fmean(statistics.fmean(g) for g in groups)
    r_bar = statistics.fmean(max(g) - min(g) for g in groups)
    sigma_within = r_bar / k.d2
    r = Limits(r_bar, k.d4_factor * r_bar, k.d3_factor * r_bar, k.d3 * sigma_within)
    half = k.a2 * r_bar
    return Limits(centre, centre + half, centre - half, half / 3, r, sigma_within)


def _xbar_s(groups: list[list[float]]) -> Limits:
    n = len(groups[0])
    k = chart_constants(n)
    centre = statistics.fmean(statistics.fmean(g) for g in groups)
    s_bar = statistics.fmean(statistics.stdev(g) for g in groups)
    sigma_within = s_bar / k.c4
    s = Limits(s_bar, k.b4 * s_bar, k.b3 * s_bar, sigma_within * math.sqrt(1.0 - k.c4 * k.c4))
    half = k.a3 * s_bar
    return Limits(centre, centre + half, centre - half, half / 3, s, sigma_within)


def _c(counts: list[float]) -> Limits:
    c_bar = statistics.fmean(counts)
    sigma = math.sqrt(c_bar)
    return Limits(c_bar, c_bar + 3 * sigma, max(0.0, c_bar - 3 * sigma), sigma)


def _u(counts: list[float], n: int) -> Limits:
    """u chart (defects per unit, n units per sample): u-bar +- 3 sqrt(u-bar / n), LCL >= 0
    (NIST/SEMATECH e-Handbook 6.3.3.1)."""
    u_bar = sum(counts) / (n * len(counts))
    sigma = math.sqrt(u_bar / n)
    return Limits(u_bar, u_bar + 3 * sigma, max(0.0, u_bar - 3 * sigma), sigma)


def _np(counts: list[float], n: int) -> Limits:
    """np chart (defectives per sample of n): n p-bar +- 3 sqrt(n p-bar (1 - p-bar))."""
    p_bar = sum(counts) / (n * len(counts))
    sigma = math.sqrt(n * p_bar * (1.0 - p_bar))
    centre = n * p_bar
    return Limits(centre, min(float(n), centre + 3 * sigma), max(0.0, centre - 3 * sigma), sigma)


def poisson_ppm_above(mean: float, limit: float) -> float:
    """Expected parts per million of samples with more than `limit` defects when defects
    are Poisson with this mean (1 - P(X <= limit)); used instead of Cpk for counts."""
    if mean < 0 or not math.isfinite(mean):
        raise SpcInputError(f"a defect rate must be a finite number of zero or more, got {mean!r}")
    k_max = math.floor(limit)
    if k_max < 0:
        return 1e6
    term = math.exp(-mean)
    cdf = term
    for k in range(1, k_max + 1):
        term *= mean / k
        cdf += term
    return 1e6 * max(0.0, 1.0 - cdf)


def _p(counts: list[float], n: int) -> Limits:
    p_bar = sum(counts) / (n * len(counts))
    sigma = math.sqrt(p_bar * (1.0 - p_bar) / n)
    return Limits(p_bar, min(1.0, p_bar + 3 * sigma), max(0.0, p_bar - 3 * sigma), sigma)


def _check_chart(chart: object) -> ChartKind:
    if chart not in CHARTS:
        raise SpcInputError(f"unknown chart {chart!r}; allowed charts are {', '.join(CHARTS)}")
    return chart  # type: ignore[return-value]


def compute_limits(
    chart: ChartKind,
    data: Sequence[Any],
    *,
    sample_size: int | None = None,
) -> Limits:
    """Control limits computed from a baseline.

    ``data`` is a list of readings for ``individuals``, a list of equal-size subgroups
    for ``xbar_r``/``xbar_s``, a list of nonconformity counts for ``c`` and a list of
    defective counts out of ``sample_size`` for ``p``. At least
    :data:`MIN_BASELINE_POINTS` points (or subgroups) are required.

    * individuals: centre = mean; sigma = MR-bar / d2(2) (d2(2) = 1.128...);
      limits = centre +- 3 sigma; moving range chart UCL = D4(2) * MR-bar (3.267...).
    * xbar_r: grand mean +- A2 * R-bar; R chart D3 * R-bar .. D4 * R-bar.
    * xbar_s: grand mean +- A3 * S-bar; S chart B3 * S-bar .. B4 * S-bar.
    * c: c-bar +- 3 sqrt(c-bar), LCL floored at 0.
    * u: u-bar +- 3 sqrt(u-bar / n), LCL floored at 0 (n units per sample).
    * p: p-bar +- 3 sqrt(p-bar (1 - p-bar) / n), floored at 0 and capped at 1.
    * np: n p-bar +- 3 sqrt(n p-bar (1 - p-bar)), floored at 0 and capped at n.

    The constants are the computed ones (:func:`chart_constants`), not the 3-4 digit
    table values, so results can differ from a hand calculation in the 4th digit.
    """
    kind = _check_chart(chart)
    if kind == "individuals":
        return _individuals(_values(data, "values", MIN_BASELINE_POINTS))
    if kind == "xbar_r":
        return _xbar_r(_subgroups(data, MIN_BASELINE_POINTS))
    if kind == "xbar_s":
        return _xbar_s(_subgroups(data, MIN_BASELINE_POINTS))
    if kind == "c":
        return _c(_counts(data, "values", MIN_BASELINE_POINTS))
    n = _sample_size(sample_size)
    if kind == "u":
        return _u(_counts(data, "values", MIN_BASELINE_POINTS), n)
    if kind == "np":
        return _np(_counts(data, "values", MIN_BASELINE_POINTS, n), n)
    return _p(_counts(data, "values", MIN_BASELINE_POINTS, n), n)


def fixed_limits(
    centre: float,
    ucl: float,
    lcl: float,
    *,
    sigma: float | None = None,
    range: Limits | None = None,
) -> Limits:
    """Limits supplied by the user (e.g. frozen after a capability study) instead of
    recomputed from each new batch of data.

    When ``sigma`` is not given it is inferred as the distance from the centre to the
    farther limit divided by 3: a limit that was floored at 0 or capped at 1 is nearer
    the centre than 3 sigma, so the farther one is the unclipped one.
    """
    c = _number(centre, "limits.centre")
    u = _number(ucl, "limits.ucl")
    lo = _number(lcl, "limits.lcl")
    if not lo <= c <= u or lo == u:
        raise SpcInputError(
            f"limits must satisfy lcl <= centre <= ucl with lcl < ucl; got lcl={lo!r}, "
            f"centre={c!r}, ucl={u!r}"
        )
    if sigma is None:
        s = max(u - c, c - lo) / 3.0
    else:
        s = _number(sigma, "limits.sigma")
        if s < 0:
            raise SpcInputError(f"limits.sigma must not be negative, got {s!r}")
    return Limits(c, u, lo, s, range)


def plotted_points(
    chart: ChartKind, data: Sequence[Any], *, sample_size: int | None = None
) -> list[float]:
    """The statistic plotted (and tested by the run rules) for each point.

    individuals: the reading; xbar_r/xbar_s: the subgroup mean; c: the count;
    p: the proportion defective (count / sample_size). Needs at least one point.
    """
    kind = _check_chart(chart)
    if kind == "individuals":
        return _values(data, "values", 1)
    if kind in ("xbar_r", "xbar_s"):
        return [statistics.fmean(g) for g in _subgroups(data, 1)]
    if kind == "c":
        return _counts(data, "values", 1)
    n = _sample_size(sample_size)
    if kind == "u":
        return [v / n for v in _counts(data, "values", 1)]
    if kind == "np":
        return _counts(data, "values", 1, n)
    return [v / n for v in _counts(data, "values", 1, n)]


# ---------------------------------------------------------------------------
# 3. Run rules, evaluated incrementally
# ---------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Rule:
    """A stable rule identifier (stored in the database) and a sentence for people."""

    id: str
    description: str


RULES: Final[dict[str, Rule]] = {
    r.id: r
    for r in (
        Rule("western_electric_1", "One point beyond the 3-sigma control limits"),
        Rule("western_electric_2", "2 of 3 consecutive points beyond 2 sigma on the same side"),
        Rule("western_electric_3", "4 of 5 consecutive points beyond 1 sigma on the same side"),
        Rule("western_electric_4", "8 consecutive points on the same side of the centre line"),
        Rule("nelson_1", "One point beyond the 3-sigma control limits"),
        Rule("nelson_2", "9 points in a row on the same side of the centre line"),
        Rule("nelson_3", "6 points in a row steadily increasing or steadily decreasing"),
        Rule("nelson_4", "14 points in a row alternating up and down"),
        Rule("nelson_5", "2 of 3 consecutive points beyond 2 sigma on the same side"),
        Rule("nelson_6", "4 of 5 consecutive points beyond 1 sigma on the same side"),
        Rule("nelson_7", "15 points in a row within 1 sigma of the centre line"),
        Rule("nelson_8", "8 points in a row beyond 1 sigma, on both sides of the centre line"),
    )
}

RULESETS: Final[dict[str, tuple[str, ...]]] = {
    "western_electric": tuple(f"western_electric_{i}" for i in range(1, 5)),
    "nelson": tuple(f"nelson_{i}" for i in range(1, 9)),
}

# Zone masks hold one bit per recent point (bit 0 = newest), 15 points deep because the
# longest zone rule (Nelson 7) spans 15 points. Trends use capped counters instead.
_DEPTH: Final = 15
_MASK: Final = (1 << _DEPTH) - 1


@dataclass(frozen=True, slots=True)
class Signal:
    """A rule that fired; ``index`` is the point that completed the pattern."""

    index: int
    rule: str
    description: str

    def to_dict(self) -> dict[str, object]:
        return {"index": self.index, "rule": self.rule, "description": self.description}


@dataclass(frozen=True, slots=True)
class RuleState:
    """Everything the rules need to remember about a series, in bounded space.

    The service stores ``to_dict()`` per series (a JSON column) and feeds each new
    reading through :func:`step`; the cost per reading is constant however long the
    history. Zone memberships are bit masks of the last 15 points, classified with the
    limits in force when each point arrived, so changing limits later does not rewrite
    how old points were judged.
    """

    index: int = 0  # index the next point will get
    last_value: float | None = None
    present: int = 0  # bit set for each of the last 15 positions that holds a point
    above0: int = 0  # strictly above the centre line
    below0: int = 0
    above1: int = 0  # more than 1 sigma above the centre line
    below1: int = 0
    above2: int = 0  # more than 2 sigma above
    below2: int = 0
    up_run: int = 0  # consecutive strict increases ending here, capped at 5
    down_run: int = 0
    alt_run: int = 0  # consecutive alternating non-zero steps ending here, capped at 13
    alt_dir: int = 0  # sign of the last step (-1, 0, 1)

    _INT_FIELDS = (
        "index",
        "present",
        "above0",
        "below0",
        "above1",
        "below1",
        "above2",
        "below2",
        "up_run",
        "down_run",
        "alt_run",
        "alt_dir",
    )

    def to_dict(self) -> dict[str, int | float | None]:
        """Plain JSON types only (ints and one float or null)."""
        out: dict[str, int | float | None] = {f: getattr(self, f) for f in self._INT_FIELDS}
        out["last_value"] = self.last_value
        out["version"] = 1
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, object]) -> RuleState:
        """Rebuild a stored state; rejects missing keys and wrong types loudly."""
        if data.get("version") != 1:
            raise SpcInputError(f"unsupported rule state version {data.get('version')!r}")
        ints: dict[str, int] = {}
        for f in cls._INT_FIELDS:
            v = data.get(f)
            if isinstance(v, bool) or not isinstance(v, int):
                raise SpcInputError(f"rule state field {f!r} must be an integer, got {v!r}")
            ints[f] = v
        last = data.get("last_value")
        return cls(last_value=None if last is None else _number(last, "last_value"), **ints)


@functools.cache
def _resolve(ruleset: str | tuple[str, ...]) -> frozenset[str]:
    if isinstance(ruleset, str):
        if ruleset not in RULESETS:
            raise SpcInputError(f"unknown rules {ruleset!r}; allowed are {', '.join(RULESETS)}")
        return frozenset(RULESETS[ruleset])
    unknown = [r for r in ruleset if r not in RULES]
    if unknown:
        raise SpcInputError(f"unknown rule id(s) {unknown}; allowed are {', '.join(RULES)}")
    return frozenset(ruleset)


def _count(bits: int) -> int:
    return bits.bit_count()


def step(
    state: RuleState,
    x: float,
    limits: Limits,
    ruleset: str | Iterable[str] = "western_electric",
) -> tuple[RuleState, list[Signal]]:
    """Feed one plotted point; return the new state and the rules it completes.

    A rule is reported at every point where the pattern ending at that point holds
    (a run of 10 above the centre reports Western Electric 4 at the 8th, 9th and 10th
    points); consumers that raise alerts de-duplicate per run. For the "k of m beyond"
    rules the newest point must itself be one of the k, so a calm point after two wild
    ones is not flagged. A point exactly on the centre line is on neither side. Cost is
    O(1): a few integer operations on the state, independent of history length.
    """
    active = _resolve(ruleset if isinstance(ruleset, str) else tuple(ruleset))
    d = x - limits.centre
    s = limits.sigma
    a0, b0 = d > 0, d < 0
    a1, b1 = d > s, d < -s
    a2, b2 = d > 2 * s, d < -2 * s

    def push(mask: int, bit: bool) -> int:
        return ((mask << 1) | bit) & _MASK

    present = push(state.present, True)
    above0, below0 = push(state.above0, a0), push(state.below0, b0)
    above1, below1 = push(state.above1, a1), push(state.below1, b1)
    above2, below2 = push(state.above2, a2), push(state.below2, b2)

    up_run, down_run, alt_run, alt_dir = 0, 0, 0, 0
    if state.last_value is not None:
        delta = x - state.last_value
        if delta > 0:
            up_run, alt_dir = min(state.up_run + 1, 5), 1
        elif delta < 0:
            down_run, alt_dir = min(state.down_run + 1, 5), -1
        if alt_dir != 0:
            alt_run = min(state.alt_run + 1, 13) if state.alt_dir == -alt_dir else 1

    new_state = RuleState(
        index=state.index + 1,
        last_value=x,
        present=present,
        above0=above0,
        below0=below0,
        above1=above1,
        below1=below1,
        above2=above2,
        below2=below2,
        up_run=up_run,
        down_run=down_run,
        alt_run=alt_run,
        alt_dir=alt_dir,
    )

    beyond3 = x > limits.ucl or x < limits.lcl
    two_of_three = (a2 and _count(above2 & 0b111) >= 2) or (b2 and _count(below2 & 0b111) >= 2)
    four_of_five = (a1 and _count(above1 & 0b11111) >= 4) or (b1 and _count(below1 & 0b11111) >= 4)

    def run_same_side(k: int) -> bool:
        full = (1 << k) - 1
        return (above0 & full) == full or (below0 & full) == full

    fired: list[str] = []
    for rule_id in RULESETS["western_electric"] + RULESETS["nelson"]:
        if rule_id not in active:
            continue
        hit: bool
        match rule_id:
            case "western_electric_1" | "nelson_1":
                hit = beyond3
            case "western_electric_2" | "nelson_5":
                hit = two_of_three
            case "western_electric_3" | "nelson_6":
                hit = four_of_five
            case "western_electric_4":
                hit = run_same_side(8)
            case "nelson_2":
                hit = run_same_side(9)
            case "nelson_3":
                hit = up_run >= 5 or down_run >= 5
            case "nelson_4":
                hit = alt_run >= 13
            case "nelson_7":
                full = (1 << 15) - 1
                hit = (present & ~(above1 | below1) & full) == full
            case "nelson_8":
                full = 0xFF
                outside = (above1 | below1) & full
                hit = outside == full and (above1 & full) != full and (below1 & full) != full
            case _:  # pragma: no cover - RULES and this match are kept in step
                hit = False
        if hit:
            fired.append(rule_id)
    return new_state, [Signal(state.index, r, RULES[r].description) for r in fired]


def evaluate_rules(
    values: Iterable[float],
    limits: Limits,
    ruleset: str | Iterable[str] = "western_electric",
    state: RuleState | None = None,
) -> list[Signal]:
    """Batch helper: run :func:`step` over ``values`` (from ``state`` or a fresh one)."""
    rules = ruleset if isinstance(ruleset, str) else tuple(ruleset)
    current = state or RuleState()
    signals: list[Signal] = []
    for x in values:
        current, fired = step(current, x, limits, rules)
        signals.extend(fired)
    return signals


# ---------------------------------------------------------------------------
# 4. Process capability
# ---------------------------------------------------------------------------


def normal_ppm_out_of_spec(
    mean: float, sigma: float, lsl: float | None, usl: float | None
) -> float:
    """Expected parts per million outside the specification for Normal(mean, sigma).

    Tails come from ``erfc`` so values far out (a few ppm or less) keep full relative
    precision. A missing limit contributes nothing. With sigma = 0 every part sits at
    the mean: 0 ppm if the mean is within the limits, 1,000,000 otherwise.
    """
    if sigma <= 0:
        inside = (lsl is None or mean >= lsl) and (usl is None or mean <= usl)
        return 0.0 if inside else 1e6
    tail = 0.0
    if lsl is not None:
        tail += _cdf((lsl - mean) / sigma)
    if usl is not None:
        tail += _cdf((mean - usl) / sigma)
    return 1e6 * tail


@dataclass(frozen=True, slots=True)
class Capability:
    """Capability indices of a window of readings against its specification.

    Cp, Cpk use the within (short-term) sigma; Pp, Ppk use the overall sample standard
    deviation (n - 1 divisor); ``ppm`` is the expected fraction out of specification,
    in parts per million, from a normal distribution with the *overall* mean and the
    *overall* sigma (the long-term view, so it agrees with Ppk rather than Cpk).
    Cp and Pp are None when only one limit is given; any index is None when its sigma
    is zero (no spread means the ratio is undefined).
    """

    cp: float | None
    cpk: float | None
    pp: float | None
    ppk: float | None
    ppm: float
    mean: float
    within_sigma: float
    overall_sigma: float
    lsl: float | None
    usl: float | None

    def to_dict(self) -> dict[str, float | None]:
        return {"cp": self.cp, "cpk": self.cpk, "pp": self.pp, "ppk": self.ppk, "ppm": self.ppm}


def capability_indices(
    mean: float, sigma: float, lsl: float | None, usl: float | None
) -> tuple[float | None, float | None]:
    """(spread index, centred index) for one sigma: (Cp, Cpk) with the within sigma,
    (Pp, Ppk) with the overall sigma.

    spread = (USL - LSL) / (6 sigma), None unless both limits are given;
    centred = min(USL - mean, mean - LSL) / (3 sigma) over the limits that exist.
    Both are None when sigma is zero.
    """
    if sigma <= 0:
        return None, None
    spread = None if lsl is None or usl is None else (usl - lsl) / (6 * sigma)
    sides = []
    if usl is not None:
        sides.append((usl - mean) / (3 * sigma))
    if lsl is not None:
        sides.append((mean - lsl) / (3 * sigma))
    return spread, min(sides)


def capability(
    values: Sequence[float],
    *,
    lsl: float | None = None,
    usl: float | None = None,
    within: float | None = None,
) -> Capability:
    """Cp, Cpk, Pp, Ppk and ppm for ``values`` against ``lsl`` and/or ``usl``.

    ``within`` is the short-term sigma (pass the chart's R-bar/d2 or S-bar/c4 for
    subgrouped data); when omitted it is MR-bar/d2(2) from ``values`` in time order.
    Cpk = min(USL - mean, mean - LSL) / (3 within); with one limit only that side counts
    and Cp/Pp are None. The mean is the overall mean of ``values``.
    """
    xs = _values(values, "values", 2)
    lo = None if lsl is None else _number(lsl, "lsl")
    hi = None if usl is None else _number(usl, "usl")
    if lo is None and hi is None:
        raise SpcInputError("capability needs lsl, usl or both")
    if lo is not None and hi is not None and lo >= hi:
        raise SpcInputError(f"lsl ({lo!r}) must be below usl ({hi!r})")
    mean = statistics.fmean(xs)
    overall = statistics.stdev(xs)
    short = within_sigma("individuals", xs) if within is None else _number(within, "within")
    cp, cpk = capability_indices(mean, short, lo, hi)
    pp, ppk = capability_indices(mean, overall, lo, hi)
    return Capability(
        cp=cp,
        cpk=cpk,
        pp=pp,
        ppk=ppk,
        ppm=normal_ppm_out_of_spec(mean, overall, lo, hi),
        mean=mean,
        within_sigma=short,
        overall_sigma=overall,
        lsl=lo,
        usl=hi,
    )


# ---------------------------------------------------------------------------
# 5. The ``spc evaluate`` contract
# ---------------------------------------------------------------------------

_ALLOWED_KEYS: Final = frozenset(
    {"chart", "values", "subgroups", "sample_size", "lsl", "usl", "rules", "limits"}
)
_LIMIT_KEYS: Final = frozenset({"centre", "ucl", "lcl", "sigma"})


def _parse_fixed_limits(raw: object) -> Limits:
    if not isinstance(raw, Mapping):
        raise SpcInputError('limits must be an object {"centre": ..., "ucl": ..., "lcl": ...}')
    missing = sorted({"centre", "ucl", "lcl"} - raw.keys())
    extra = sorted(set(raw.keys()) - _LIMIT_KEYS)
    if missing or extra:
        raise SpcInputError(
            f"limits needs centre, ucl and lcl (sigma optional); missing {missing}, unknown {extra}"
        )
    return fixed_limits(raw["centre"], raw["ucl"], raw["lcl"], sigma=raw.get("sigma"))


def evaluate(data: object) -> dict[str, Any]:
    """Validate a chart request, compute (or take) limits, run the rules, report.

    Input (a parsed JSON object)::

        {"chart": "individuals" | "xbar_r" | "xbar_s" | "c" | "p",
         "values": [...]            # individuals, c (counts), p (defective counts)
         "subgroups": [[...], ...]  # xbar_r, xbar_s; equal sizes 2..25
         "sample_size": n,          # p only: items inspected per sample
         "lsl": x, "usl": y,        # optional, variables charts only
         "rules": "western_electric" (default) | "nelson",
         "limits": {"centre", "ucl", "lcl", "sigma"?}}  # optional fixed limits

    Output: ``centre``, ``ucl``, ``lcl``; ``range`` (moving range, R or S chart limits,
    null for c and p and for fixed limits); ``signals`` (index into values/subgroups,
    rule id, description; rules run on the plotted statistic only, not on the range
    chart); and ``capability`` (cp, cpk, pp, ppk, ppm) only when lsl or usl is given.
    Limits are computed from all the data given, which needs at least 2 points (values
    or subgroups); with fixed limits 1 point is enough (2 if capability is asked for).
    Floats are returned unrounded. Any problem raises :class:`SpcInputError`.
    """
    if not isinstance(data, Mapping):
        raise SpcInputError("input must be a JSON object with at least a 'chart' key")
    unknown = sorted(str(k) for k in data.keys() - _ALLOWED_KEYS)
    if unknown:
        raise SpcInputError(
            f"unknown key(s) {unknown}; allowed keys are {', '.join(sorted(_ALLOWED_KEYS))}"
        )
    if "chart" not in data:
        raise SpcInputError(f"missing 'chart'; allowed charts are {', '.join(CHARTS)}")
    chart = _check_chart(data["chart"])
    subgrouped = chart in ("xbar_r", "xbar_s")
    wanted, unwanted = ("subgroups", "values") if subgrouped else ("values", "subgroups")
    if unwanted in data:
        raise SpcInputError(f"the {chart} chart takes '{wanted}', not '{unwanted}'")
    if wanted not in data:
        raise SpcInputError(f"the {chart} chart needs '{wanted}'")
    points: Sequence[Any] = data[wanted]
    sample_size = data.get("sample_size")
    if chart in SIZED_CHARTS:
        sample_size = _sample_size(sample_size)
    elif sample_size is not None:
        raise SpcInputError("sample_size applies only to the p chart and the u and np charts")
    ruleset = data.get("rules") or "western_electric"
    if not isinstance(ruleset, str) or ruleset not in RULESETS:
        raise SpcInputError(f"unknown rules {ruleset!r}; allowed are {', '.join(RULESETS)}")
    lsl, usl = data.get("lsl"), data.get("usl")
    wants_capability = lsl is not None or usl is not None
    if wants_capability and chart not in VARIABLES_CHARTS:
        raise SpcInputError(
            f"lsl/usl apply only to variables charts ({', '.join(VARIABLES_CHARTS)})"
        )

    if data.get("limits") is not None:
        limits = _parse_fixed_limits(data["limits"])
    else:
        limits = compute_limits(chart, points, sample_size=sample_size)
    plotted = plotted_points(chart, points, sample_size=sample_size)

    result: dict[str, Any] = limits.to_dict()
    result["range"] = None if limits.range is None else limits.range.to_dict()
    result["signals"] = [s.to_dict() for s in evaluate_rules(plotted, limits, ruleset)]
    if wants_capability:
        if subgrouped:
            groups = _subgroups(points, 1)
            flat = [v for g in groups for v in g]
            cap = capability(flat, lsl=lsl, usl=usl, within=within_sigma(chart, groups))
        else:
            cap = capability(points, lsl=lsl, usl=usl)
        result["capability"] = cap.to_dict()
    return result
