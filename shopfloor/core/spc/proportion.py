"""p and np charts for defectives out of n: the one computation behind the live series,
the SPC page and ``spc evaluate``.

A point is k defectives found among n items inspected (for example boards failing
electrical test out of the boards tested in one lot). With p-bar = sum k / sum n:

* p chart (the proportion k / n; n may differ point to point): limits per point
  p-bar +- 3 sqrt(p-bar (1 - p-bar) / n_i), the lower limit clamped at 0 and the upper
  capped at 1 (NIST/SEMATECH e-Handbook of Statistical Methods 6.3.3.2; the varying-n
  form is the usual one, e.g. Montgomery, Introduction to Statistical Quality Control,
  from memory).
* np chart (the count k; every point has the same n): n p-bar +- 3 sqrt(n p-bar
  (1 - p-bar)), clamped at 0 and capped at n. It is the p chart times n.

The run rules read each point standardized, z_i = (p_i - p-bar) / sigma_i with
sigma_i = sqrt(p-bar (1 - p-bar) / n_i), against limits 0 +- 3: for constant n this is
exactly the rules on the p (or np) chart itself; for varying n it is the standardized
chart (common practice) so the zones of every point are its own.

Pure: no Django imports.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final, Literal

from .errors import SpcInputError
from .limits import Limits, count_limits, proportion_limits

#: The limits the run rules use on standardized points.
STANDARD_LIMITS: Final = Limits(0.0, 3.0, -3.0, 1.0)


@dataclass(frozen=True, slots=True)
class ProportionChart:
    """A p or np chart: per point its n, plotted value and limits, and its z."""

    chart: Literal["p", "np"]
    p_bar: float
    sizes: tuple[int, ...]
    plotted: tuple[float, ...]  # p_i (p chart) or k_i (np chart)
    centre: tuple[float, ...]
    ucl: tuple[float, ...]
    lcl: tuple[float, ...]
    standardized: tuple[float, ...]

    @property
    def constant_n(self) -> bool:
        return len(set(self.sizes)) <= 1


def _whole(value: object, what: str, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise SpcInputError(f"{what} must be a whole number, got {value!r}")
    if isinstance(value, float) and (not math.isfinite(value) or value != int(value)):
        raise SpcInputError(f"{what} must be a whole number, got {value!r}")
    if int(value) < low:
        raise SpcInputError(f"{what} must be {low} or more, got {value!r}")
    return int(value)


def check_points(counts: Sequence[object], sizes: Sequence[object]) -> list[tuple[int, int]]:
    """(k, n) pairs: whole numbers, n >= 1 and 0 <= k <= n, one size per count."""
    if isinstance(counts, str | bytes) or isinstance(sizes, str | bytes):
        raise SpcInputError("values and sample_sizes must be lists of whole numbers")
    if len(counts) != len(sizes):
        raise SpcInputError(
            f"sample_sizes needs one size per value: {len(counts)} values, {len(sizes)} sizes"
        )
    points: list[tuple[int, int]] = []
    for i, (k_raw, n_raw) in enumerate(zip(counts, sizes, strict=True)):
        n = _whole(n_raw, f"sample_sizes[{i}]", 1)
        k = _whole(k_raw, f"values[{i}]", 0)
        if k > n:
            raise SpcInputError(f"values[{i}] = {k} defectives is more than its sample of {n}")
        points.append((k, n))
    return points


def proportion_chart(
    counts: Sequence[object],
    sizes: Sequence[object],
    *,
    p_bar: float | None = None,
    chart: Literal["p", "np"] | None = None,
) -> ProportionChart:
    """The chart of these points. p-bar comes from the points themselves unless given
    (a series' baseline); the chart is np when every n is the same, else p, unless
    named (an np chart needs one n throughout)."""
    points = check_points(counts, sizes)
    if not points:
        raise SpcInputError("a p or np chart needs at least one point")
    if p_bar is None:
        if len(points) < 2:
            raise SpcInputError("limits need at least 2 points (samples)")
        p_bar = sum(k for k, _ in points) / sum(n for _, n in points)
    elif not (math.isfinite(p_bar) and 0.0 <= p_bar <= 1.0):
        raise SpcInputError(f"p-bar must be a proportion from 0 to 1, got {p_bar!r}")
    ns = tuple(n for _, n in points)
    constant = len(set(ns)) == 1
    kind: Literal["p", "np"] = chart or ("np" if constant else "p")
    if kind == "np" and not constant:
        raise SpcInputError(
            "an np chart needs the same sample size for every point; use the p chart"
        )
    plotted: list[float] = []
    centre: list[float] = []
    ucl: list[float] = []
    lcl: list[float] = []
    z: list[float] = []
    for k, n in points:
        lim = count_limits(p_bar, n) if kind == "np" else proportion_limits(p_bar, n)
        plotted.append(float(k) if kind == "np" else k / n)
        centre.append(lim.centre)
        ucl.append(lim.ucl)
        lcl.append(lim.lcl)
        sigma = math.sqrt(p_bar * (1.0 - p_bar) / n)
        z.append((k / n - p_bar) / sigma if sigma > 0 else 0.0)
    return ProportionChart(
        kind, p_bar, ns, tuple(plotted), tuple(centre), tuple(ucl), tuple(lcl), tuple(z)
    )


def standardized(k: int, n: int, p_bar: float) -> float:
    """One point's z = (k / n - p-bar) / sqrt(p-bar (1 - p-bar) / n) (0 without spread)."""
    sigma = math.sqrt(p_bar * (1.0 - p_bar) / n)
    return (k / n - p_bar) / sigma if sigma > 0 else 0.0
