"""Control limits for the individuals / moving range, X-bar/R, X-bar/S, c, u, p and np charts.

Pure: no Django imports.
"""

from __future__ import annotations

import itertools
import math
import statistics
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Final, Literal

from .constants import MIN_SUBGROUP_SIZE, _check_n, c4, chart_constants, d2
from .errors import SpcInputError

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


def proportion_limits(p_bar: float, n: int) -> Limits:
    """The p chart's centre and limits for one sample of n: p-bar +- 3 sqrt(p-bar
    (1 - p-bar) / n), LCL >= 0, UCL <= 1 (NIST/SEMATECH e-Handbook 6.3.3.2). The live
    series, the SPC page and `spc evaluate` all use this (see proportion.py)."""
    sigma = math.sqrt(p_bar * (1.0 - p_bar) / n)
    return Limits(p_bar, min(1.0, p_bar + 3 * sigma), max(0.0, p_bar - 3 * sigma), sigma)


def count_limits(p_bar: float, n: int) -> Limits:
    """The np chart's centre and limits for samples of n: n p-bar +- 3 sqrt(n p-bar
    (1 - p-bar)), LCL >= 0, UCL <= n."""
    sigma = math.sqrt(n * p_bar * (1.0 - p_bar))
    centre = n * p_bar
    return Limits(centre, min(float(n), centre + 3 * sigma), max(0.0, centre - 3 * sigma), sigma)


def _np(counts: list[float], n: int) -> Limits:
    """np chart (defectives per sample of n)."""
    return count_limits(sum(counts) / (n * len(counts)), n)


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
    return proportion_limits(sum(counts) / (n * len(counts)), n)


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
