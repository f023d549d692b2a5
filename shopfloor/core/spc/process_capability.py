"""Process capability: Cp, Cpk, Pp, Ppk and expected ppm out of specification.

Pure: no Django imports.
"""

from __future__ import annotations

import statistics
from collections.abc import Sequence
from dataclasses import dataclass

from .constants import _cdf
from .errors import SpcInputError
from .limits import _number, _values, within_sigma

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
