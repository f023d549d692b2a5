"""The validated JSON-in / JSON-out contract behind ``manage.py spc evaluate``.

Pure: no Django imports.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, Final

from .errors import SpcInputError
from .limits import (
    CHARTS,
    SIZED_CHARTS,
    VARIABLES_CHARTS,
    Limits,
    _check_chart,
    _sample_size,
    _subgroups,
    compute_limits,
    fixed_limits,
    plotted_points,
    within_sigma,
)
from .process_capability import capability
from .proportion import STANDARD_LIMITS, proportion_chart
from .rules import RULESETS, evaluate_rules

# ---------------------------------------------------------------------------
# 5. The ``spc evaluate`` contract
# ---------------------------------------------------------------------------

_ALLOWED_KEYS: Final = frozenset(
    {
        "chart",
        "values",
        "subgroups",
        "sample_size",
        "sample_sizes",
        "lsl",
        "usl",
        "rules",
        "limits",
    }
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
         "sample_size": n,          # u, p, np: items inspected per sample
         "sample_sizes": [n, ...],  # p, np: one n per value instead (see _evaluate_proportions)
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
    if data.get("sample_sizes") is not None:
        return _evaluate_proportions(chart, data)
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


def _evaluate_proportions(chart: str, data: Mapping[str, Any]) -> dict[str, Any]:
    """p or np chart with a sample size per point (`sample_sizes`): the computation the
    live series use (proportion.py). Output: centre (p-bar, or n p-bar for np), ucl and
    lcl (null when n varies: see `points`), points (per point n, plotted value, limits
    and z) and the signals, found on the standardized points."""
    if chart not in ("p", "np"):
        raise SpcInputError("sample_sizes applies only to the p and np charts")
    if data.get("sample_size") is not None:
        raise SpcInputError("give either sample_size (one n for all) or sample_sizes, not both")
    if data.get("limits") is not None:
        raise SpcInputError("fixed limits are not taken with sample_sizes")
    if "subgroups" in data or "values" not in data:
        raise SpcInputError(f"the {chart} chart takes 'values' (defectives per sample)")
    for key in ("lsl", "usl"):
        if data.get(key) is not None:
            raise SpcInputError(
                f"lsl/usl apply only to variables charts ({', '.join(VARIABLES_CHARTS)})"
            )
    ruleset = data.get("rules") or "western_electric"
    if not isinstance(ruleset, str) or ruleset not in RULESETS:
        raise SpcInputError(f"unknown rules {ruleset!r}; allowed are {', '.join(RULESETS)}")
    values, sizes = data["values"], data["sample_sizes"]
    if not isinstance(values, list) or not isinstance(sizes, list):
        raise SpcInputError("values and sample_sizes must be lists of whole numbers")
    pc = proportion_chart(values, sizes, chart=chart)  # type: ignore[arg-type]
    constant = pc.constant_n
    return {
        "centre": pc.centre[0] if constant else pc.p_bar,
        "ucl": pc.ucl[0] if constant else None,
        "lcl": pc.lcl[0] if constant else None,
        "p_bar": pc.p_bar,
        "range": None,
        "points": [
            {"n": n, "plotted": v, "ucl": u, "lcl": lo, "z": z}
            for n, v, u, lo, z in zip(
                pc.sizes, pc.plotted, pc.ucl, pc.lcl, pc.standardized, strict=True
            )
        ],
        "signals": [s.to_dict() for s in evaluate_rules(pc.standardized, STANDARD_LIMITS, ruleset)],
    }
