"""The SPC pages' reads: the stored series a reader may see, and one series' points,
limits, signals and capability for its chart."""

from __future__ import annotations

import statistics
from dataclasses import dataclass, field
from typing import Any

from django.db.models import Count

from shopfloor.access import Scope
from shopfloor.core import spc, units
from shopfloor.errors import NotAllowed, NotFound
from shopfloor.floor.models import Reading
from shopfloor.plant.models import WorkCenter
from shopfloor.quality import series as series_core
from shopfloor.quality.models import SeriesState

# --- SPC series reads -----------------------------------------------------------------

SPC_POINTS = 200


@dataclass
class SeriesRow:
    key: str
    quantity: str
    work_center: str
    equipment: str
    points: int
    stored: bool
    step_code: str = ""
    window_label: str = ""


@dataclass
class SeriesDetail:
    row: SeriesRow
    values: list[float]
    unit: str
    window: dict[str, Any]
    limits: Any
    signals: list[Any]
    capability: Any
    message: str
    rules: str
    chart: str = "individuals"
    subgroup_size: int = 1
    readings: list[float] = field(default_factory=list)  # every reading (histogram, Cpk)
    # X-bar charts: each subgroup's range (R) or standard deviation (S), drawn beneath
    spreads: list[float] = field(default_factory=list)
    # attribute charts: mean defects per unit and the Poisson ppm above the window
    attribute: dict[str, Any] | None = None
    # p / np charts: each point's n and limits (they move with n on a p chart)
    point_ucl: list[float] = field(default_factory=list)
    point_lcl: list[float] = field(default_factory=list)
    point_n: list[int] = field(default_factory=list)

    @property
    def chart_label(self) -> str:
        return CHART_LABELS.get(self.chart, self.chart)

    @property
    def spread_label(self) -> str:
        return "S" if self.chart == "xbar_s" else "R"


#: Chart names for people (each already ends in "chart": never "c chart chart").
CHART_LABELS = {
    "individuals": "individuals chart",
    "xbar_r": "X-bar/R chart",
    "xbar_s": "X-bar/S chart",
    "c": "c chart",
    "u": "u chart",
    "p": "p chart",
    "np": "np chart",
}


def _series_key(quantity: str, step: str, wc: str, eq: str | None, spec: str) -> str:
    return f"{quantity}@{step}@{wc}@{eq or '-'}@{spec}"


def spc_series(scope: Scope) -> list[SeriesRow]:
    """Stored series when the SPC worker has made them; otherwise grouped from readings
    (by quantity, operation, work center, equipment and window, like stored ones)."""

    rows: list[SeriesRow] = []
    for s in SeriesState.objects.select_related("work_center", "equipment").order_by("key"):
        if scope.sees_work_center(s.work_center_id):
            rows.append(
                SeriesRow(
                    s.key,
                    s.quantity,
                    s.work_center.code,
                    s.equipment.code if s.equipment else "",
                    s.points,
                    True,
                    s.step_code,
                    s.window_label,
                )
            )
    if rows:
        return rows
    grouped = (
        Reading.objects.filter(superseded_by__isnull=True)
        .values(
            "quantity",
            "lot_step__code",
            "lot_step__work_center__code",
            "lot_step__work_center_id",
            "equipment__code",
            "spec_key",
        )
        .annotate(n=Count("id"))
        .order_by("quantity", "lot_step__code", "lot_step__work_center__code")
    )
    for g in grouped:
        if scope.sees_work_center(g["lot_step__work_center_id"]):
            wc, eq = g["lot_step__work_center__code"], g["equipment__code"]
            step, spec = g["lot_step__code"], g["spec_key"]
            rows.append(
                SeriesRow(
                    _series_key(g["quantity"], step, wc, eq, spec),
                    g["quantity"],
                    wc,
                    eq or "",
                    g["n"],
                    False,
                    step,
                    spec,
                )
            )
    return rows


def spc_detail(scope: Scope, key: str) -> SeriesDetail:
    """Points, limits, rule breaks and capability of one series (newest SPC_POINTS).

    Limits come from the shared computation (`spc.compute_limits`, the one `spc evaluate`
    uses) for the series' own chart: c-bar +- 3 sqrt(c-bar) for counts, never moving-range
    limits; counts get defects per unit and a Poisson ppm instead of Cp/Cpk.
    """

    stored = SeriesState.objects.select_related("work_center", "equipment").filter(key=key).first()
    if stored is not None:
        row = SeriesRow(
            stored.key,
            stored.quantity,
            stored.work_center.code,
            stored.equipment.code if stored.equipment else "",
            stored.points,
            True,
            stored.step_code,
            stored.window_label,
        )
        wc_id = stored.work_center_id
        qs = series_core.series_queryset(stored)
    else:
        parts = key.split("@")
        if len(parts) != 5 or not all(parts[:3]):
            raise NotFound(f"No SPC series {key!r}. Pick one from the SPC list.")

        wc = WorkCenter.objects.filter(code=parts[2]).first()
        if wc is None:
            raise NotFound(f"No SPC series {key!r}: work center {parts[2]!r} does not exist.")
        wc_id = wc.pk
        eq = "" if parts[3] == "-" else parts[3]
        row = SeriesRow(key, parts[0], parts[2], eq, 0, False, parts[1], parts[4])
        qs = Reading.objects.filter(
            superseded_by__isnull=True,
            quantity=row.quantity,
            lot_step__work_center_id=wc_id,
            lot_step__code=parts[1],
            spec_key=parts[4],
        )
        qs = qs.filter(equipment__code=eq) if eq else qs.filter(equipment__isnull=True)
    if not scope.sees_work_center(wc_id):
        raise NotAllowed("This series belongs to a work center that is not yours.")
    chart = stored.chart if stored else "individuals"
    size = stored.subgroup_size if stored and chart in series_core.XBAR_CHARTS else 1
    recent = list(
        qs.order_by("-captured_at", "-pk").values_list(
            "value", "unit", "window", "lot_step_id", "sample_index", "tested"
        )[: SPC_POINTS * size]
    )
    recent.reverse()
    if chart in series_core.PROPORTION_CHARTS or row.quantity in units.DEFECTIVES_QUANTITIES:
        return _proportion_detail(row, stored, recent)
    readings = [v for v, *_ in recent]
    unit = recent[-1][1] if recent else ""
    window = dict(recent[-1][2]) if recent else {}
    if stored is None and window.get("attribute"):
        chart = "c"
    if stored is not None and stored.window:
        window = {**window, "criteria": stored.window}
    groups: list[list[float]] = []
    spreads: list[float] = []
    if size > 1:
        groups = series_core.subgroups_of([(st, i, v) for v, _, _, st, i, _ in recent], size)
        values = [statistics.fmean(g) for g in groups]
        spreads = [(max(g) - min(g)) if chart == "xbar_r" else statistics.stdev(g) for g in groups]
    else:
        values = readings
    if not stored:
        row.points = len(values)
    rules = stored.rules if stored else "western_electric"
    limits, signals, cap, message = None, [], None, ""
    attribute: dict[str, Any] | None = None
    try:
        if stored and stored.limits:
            spread = stored.limits.get("range")
            limits = spc.fixed_limits(
                stored.limits["centre"],
                stored.limits["ucl"],
                stored.limits["lcl"],
                sigma=stored.limits.get("sigma"),
                range=spc.Limits(
                    float(spread["centre"]), float(spread["ucl"]), float(spread["lcl"]), 0.0
                )
                if spread
                else None,
            )
        elif size > 1 and len(groups) >= spc.MIN_BASELINE_POINTS:
            limits = spc.compute_limits(chart, groups)  # type: ignore[arg-type]
        elif size == 1 and len(values) >= spc.MIN_BASELINE_POINTS:
            limits = spc.compute_limits("c" if chart == "c" else "individuals", values)
        if limits is not None:
            signals = spc.evaluate_rules(values, limits, rules)
        lsl, usl = window.get("min"), window.get("max")
        if chart in spc.ATTRIBUTE_CHARTS:
            if readings:
                mean = statistics.fmean(readings)
                attribute = {
                    "per_unit": mean,
                    "limit": usl,
                    "ppm": spc.poisson_ppm_above(mean, usl if usl is not None else 0.0),
                }
        elif len(readings) >= 2 and (lsl is not None or usl is not None):
            # subgrouped data: short-term sigma from within the subgroups (R-bar/d2, S-bar/c4)
            within = spc.within_sigma(chart, groups) if len(groups) >= 2 else None  # type: ignore[arg-type]
            cap = spc.capability(readings, lsl=lsl, usl=usl, within=within)
    except (spc.SpcInputError, KeyError, TypeError) as exc:
        message = f"Cannot compute this chart: {exc}"
    if limits is None and not message:
        message = (
            "Too few complete subgroups to compute control limits yet."
            if size > 1
            else "Too few readings to compute control limits yet."
        )
    return SeriesDetail(
        row,
        values,
        unit,
        window,
        limits,
        signals,
        cap,
        message,
        rules,
        chart,
        size,
        readings,
        spreads,
        attribute,
    )


def _proportion_detail(row: SeriesRow, stored: Any, recent: list[Any]) -> SeriesDetail:
    """A p / np series ("failed k of n tested" per lot): the same computation as the
    live series and `spc evaluate` (shopfloor.core.spc.proportion). p-bar is the
    series' baseline once it has one, else the points shown; rules run on the
    standardized points, so each point is judged against its own n."""

    points = [(round(float(v)), int(n)) for v, _, _, _, _, n in recent if n]
    window = dict(recent[-1][2]) if recent else {}
    rules = stored.rules if stored else "western_electric"
    if not stored:
        row.points = len(points)
    limits_data = stored.limits if stored and stored.limits else None
    chart = stored.chart if stored else "p"
    if chart not in series_core.PROPORTION_CHARTS:
        chart = "p"
    message = ""
    detail = SeriesDetail(row, [], "", window, None, [], None, "", rules, chart, 1)
    detail.readings = [float(k) for k, _ in points]
    try:
        p_bar = float(limits_data["p_bar"]) if limits_data and "p_bar" in limits_data else None
        if p_bar is None and len(points) < spc.MIN_BASELINE_POINTS:
            raise spc.SpcInputError("Too few lots to compute control limits yet.")
        if points:
            if chart == "np" and len({n for _, n in points}) > 1:
                chart = "p"
            pc = spc.proportion_chart(
                [k for k, _ in points],
                [n for _, n in points],
                p_bar=p_bar,
                chart="np" if chart == "np" else "p",
            )
            detail.chart = pc.chart
            detail.values = list(pc.plotted)
            detail.point_ucl, detail.point_lcl = list(pc.ucl), list(pc.lcl)
            detail.point_n = list(pc.sizes)
            middle = len(pc.sizes) - 1
            detail.limits = spc.Limits(pc.centre[middle], pc.ucl[middle], pc.lcl[middle], 0.0)
            detail.signals = spc.evaluate_rules(pc.standardized, spc.STANDARD_LIMITS, rules)
            detail.unit = "share failed" if pc.chart == "p" else "boards failed"
            detail.attribute = {
                "p_bar": pc.p_bar,
                "n_min": min(pc.sizes),
                "n_max": max(pc.sizes),
                "failed": sum(k for k, _ in points),
                "tested": sum(pc.sizes),
                "source": (limits_data or {}).get("source") or f"the {len(points)} lots shown",
            }
    except spc.SpcInputError as exc:
        message = str(exc)
    if detail.limits is None and not message:
        message = "No lot has been recorded yet."
    detail.message = message
    return detail
