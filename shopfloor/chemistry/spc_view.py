"""SPC for one tank x parameter, with the same machinery as reading series.

Why not a stored SeriesState: analyses come a few a day per parameter, so the chart is
computed from the latest analyses on each view (bounded), with the same limits, run rules
and capability code (shopfloor.core.spc) and the same drawing (shopfloor.quality.read.charts).
Limits come from the first BASELINE analyses of the window shown, as for readings.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from shopfloor.chemistry.models import PlanParameter
from shopfloor.core import spc, units
from shopfloor.quality.read import charts

BASELINE = 25
MAX_POINTS = 200


@dataclass
class ParameterChart:
    values: list[float]
    unit: str
    limits: spc.Limits | None
    signals: list[spc.Signal]
    capability: spc.Capability | None
    svg: str
    message: str = ""


def _display(param: PlanParameter, value: float) -> float:
    try:
        return units.bath_from_canonical(param.measure, value, param.unit)
    except units.UnitError:
        return value


def parameter_chart(param: PlanParameter) -> ParameterChart:
    """Individuals chart of a parameter's analyses (oldest first), in the plan's unit."""
    latest = list(param.analyses.order_by("-taken_at", "-pk").values_list("value", flat=True))
    values = [_display(param, v) for v in reversed(latest[:MAX_POINTS])]
    lsl, usl = _display(param, param.low), _display(param, param.high)
    limits = None
    signals: list[spc.Signal] = []
    capability = None
    message = ""
    if len(values) >= spc.MIN_BASELINE_POINTS:
        try:
            limits = spc.compute_limits("individuals", values[:BASELINE])
            signals = spc.evaluate_rules(values, limits, "western_electric")
            capability = spc.capability(values, lsl=lsl, usl=usl)
        except spc.SpcInputError as exc:
            message = f"No limits yet: {exc}"
    else:
        message = "Control limits need at least two analyses."
    if limits is not None:
        fig = charts.control_chart(
            values,
            limits.centre,
            limits.ucl,
            limits.lcl,
            [(s.index, s.rule) for s in signals],
            title=f"{param.tank.code} {param.name} (individuals)",
            unit=param.unit,
            lsl=lsl,
            usl=usl,
        )
    else:
        fig = charts.control_chart([], 0, 0, 0, title=f"{param.tank.code} {param.name}")
    return ParameterChart(
        values, param.unit, limits, signals, capability, charts.to_svg(fig), message
    )


def as_dict(chart: ParameterChart) -> dict[str, Any]:
    return {
        "values": chart.values,
        "limits": chart.limits.to_dict() if chart.limits else None,
        "signals": [s.to_dict() for s in chart.signals],
        "capability": chart.capability.to_dict() if chart.capability else None,
    }
