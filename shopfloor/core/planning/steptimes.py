"""Step-time distributions: measured history blended with the library's standard minutes.

The rule (credibility weighting): the standard minutes count as `PRIOR_WEIGHT` made-up
observations beside the `n` measured ones, so a draw comes from the measured history with
probability w = n / (n + PRIOR_WEIGHT) and from the standard-time distribution otherwise.
The mixture's mean is w * (measured mean) + (1 - w) * (standard minutes): with no history
the forecast runs on standard minutes, with 5 observations half and half, with 45 it is
90 % measured. The same weighting is the Buhlmann credibility factor n / (n + k) of
actuarial practice and the posterior-mean weight of a conjugate prior worth k
observations (from memory of both).

The standard-time distribution is lognormal with mean = standard minutes and coefficient
of variation `STANDARD_CV` (0.3, a planning assumption the shop tunes: from memory,
manual and machine steps usually fall between 0.2 and 0.5). Run times are positive and
right-skewed, which a lognormal keeps.

Distributions are drawn by inverse transform from a quantile table (TABLE_SIZE midpoint
quantiles), one uniform number per draw: the simulation draws millions per forecast and
a table lookup is the cheapest draw Python offers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from statistics import NormalDist

PRIOR_WEIGHT = 5.0
STANDARD_CV = 0.3
TABLE_SIZE = 1024
# Measured run times outside [standard / OUTLIER_FACTOR, standard * OUTLIER_FACTOR] are
# left out: a step left "started" over a weekend, or signed off in bulk, is not a run time.
OUTLIER_FACTOR = 20.0
MAX_HISTORY = 500
# The size of a blended sampler's single draw table (Sampler.draw_table).
MIX_TABLE_SIZE = 4096


def credibility(n: int, prior_weight: float = PRIOR_WEIGHT) -> float:
    """The weight of n measured observations against the standard minutes."""
    if n <= 0:
        return 0.0
    return n / (n + prior_weight)


def lognormal_table(mean: float, cv: float, size: int = TABLE_SIZE) -> tuple[float, ...]:
    """Midpoint quantiles of a lognormal with this mean and coefficient of variation."""
    if mean <= 0:
        raise ValueError("a step time's mean must be positive")
    if cv <= 0:
        return (float(mean),) * size
    sigma2 = math.log(1.0 + cv * cv)
    sigma = math.sqrt(sigma2)
    mu = math.log(mean) - sigma2 / 2.0
    nd = NormalDist()
    return tuple(math.exp(mu + sigma * nd.inv_cdf((k + 0.5) / size)) for k in range(size))


def exponential_table(mean: float, size: int = 65536) -> tuple[float, ...]:
    """Midpoint quantiles of an exponential distribution (the M/M/c validation)."""
    return tuple(-mean * math.log(1.0 - (k + 0.5) / size) for k in range(size))


def constant_table(value: float) -> tuple[float, ...]:
    return (float(value),)


@dataclass(frozen=True)
class Sampler:
    """A mixture of measured values (drawn with probability `weight`) and a quantile
    table, drawn with one uniform number u in [0, 1)."""

    weight: float
    history: tuple[float, ...]
    table: tuple[float, ...]

    def as_tuple(self) -> tuple[float, tuple[float, ...], float, tuple[float, ...], float]:
        """(w, history, len/w, table, len/(1-w)); each sequence carries its last value
        twice so a rounding index of exactly len stays in range."""
        w = self.weight if self.history else 0.0
        hist = (*self.history, self.history[-1]) if self.history else (0.0,)
        table = (*self.table, self.table[-1])
        h_scale = len(self.history) / w if w > 0 else 0.0
        t_scale = len(self.table) / (1.0 - w) if w < 1.0 else 0.0
        return (w, hist, h_scale, table, t_scale)

    def draw_table(self) -> tuple[float, ...]:
        """One table for the whole mixture, drawn with one uniform index.

        Without history it is the quantile table itself, so the draw is exact. With
        history it holds MIX_TABLE_SIZE values at the midpoints u = (k + 0.5) / size of
        `draw`: the mixture weight is kept to 1 / MIX_TABLE_SIZE and each quantile to
        the same resolution, finer than the 1,024-value standard-time table. Built once
        per forecast; the engine then draws every step of a replication in one pass."""
        if not self.history or self.weight <= 0.0:
            return tuple(self.table)
        size = max(MIX_TABLE_SIZE, len(self.table))
        w, hist, hs, table, ts = self.as_tuple()
        values = [0.0] * size
        for k in range(size):
            u = (k + 0.5) / size
            values[k] = hist[int(u * hs)] if u < w else table[int((u - w) * ts)]
        return tuple(values)

    def draw(self, u: float) -> float:
        w, hist, hs, table, ts = self.as_tuple()
        if u < w:
            return hist[int(u * hs)]
        return table[int((u - w) * ts)]

    def mean(self) -> float:
        t = sum(self.table) / len(self.table)
        if not self.history:
            return t
        h = sum(self.history) / len(self.history)
        return self.weight * h + (1.0 - self.weight) * t


def clean_history(values: Sequence[float], standard_minutes: float) -> tuple[float, ...]:
    """Measured run times kept for the distribution (newest MAX_HISTORY, outliers out)."""
    lo = standard_minutes / OUTLIER_FACTOR
    hi = standard_minutes * OUTLIER_FACTOR
    kept = [float(v) for v in values if lo <= v <= hi]
    return tuple(kept[-MAX_HISTORY:])


def blended_sampler(
    standard_minutes: float,
    measured: Sequence[float] = (),
    *,
    cv: float = STANDARD_CV,
    prior_weight: float = PRIOR_WEIGHT,
) -> Sampler:
    """The step-time distribution for one operation at one work center (module rule)."""
    history = clean_history(measured, standard_minutes)
    return Sampler(
        weight=credibility(len(history), prior_weight),
        history=history,
        table=lognormal_table(max(standard_minutes, 0.1), cv),
    )


@dataclass(frozen=True)
class StepStats:
    """Measured run and queue times of one operation at one work center (for display)."""

    count: int
    run_median: float | None
    queue_median: float | None
    weight: float


def median(values: Sequence[float]) -> float | None:
    if not values:
        return None
    s = sorted(values)
    m = len(s) // 2
    return s[m] if len(s) % 2 else (s[m - 1] + s[m]) / 2.0
