"""SPC on every series: one SeriesState row per quantity at a work center (per equipment).

Why a stored state: a reading must be judged against the run rules the moment it is
processed, and the cost of that must not grow with the series' history. So each series
keeps (a) its control limits and (b) the bounded rule state of
:class:`shopfloor.core.spc.RuleState`, and each new reading costs one row lock, one
``spc.step`` and one row update.

Life of a series:

1. **Baseline.** The first ``baseline_size`` readings (25 by default; in window or not,
   because limits describe what the process does, not what the drawing asks) are only
   collected. When the baseline is full the limits are computed with
   ``spc.compute_limits``: an individuals/moving-range chart for a quantity measured once
   per lot, X-bar/R (2 to 10 samples per lot) or X-bar/S (11 to 25) for a quantity the
   step samples several times per lot, and a c chart for attribute counts (defects found
   per check). A subgroup is the samples of one lot at that step (a rational subgroup:
   made together, under the same conditions); it is charted when its last sample
   arrives, and a correction replaces its sample's value while the subgroup is open.
   An X-bar series' baseline counts subgroups, not readings.
2. **Monitoring.** Every further point (a reading, or a subgroup's mean) is stepped
   through the rules; a rule that fires yields a :class:`DriftSignal`. An X-bar series
   also checks each subgroup's range (or standard deviation) against the R (S) chart's
   upper limit. Consecutive firings of one rule (the same run) are reported once, at the
   point where the run first fires.
3. **Engineer's control.** A quality engineer may fix limits by hand or recompute them
   from a chosen time window (see ``services.fix_limits`` / ``services.recompute_limits``).
"""

from __future__ import annotations

import logging
import statistics
from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Any

from django.db import IntegrityError, transaction
from django.db.models import Q, QuerySet
from django.utils import timezone

from shopfloor.core import judging, spc, units
from shopfloor.floor.models import Reading
from shopfloor.quality.models import SeriesState

log = logging.getLogger("shopfloor.spc")

DEFAULT_BASELINE = 25
# How many of the latest readings capability is computed over (bounded work per page).
CAPABILITY_WINDOW = 500
# Most readings a recomputed baseline may use (keeps one request's work bounded).
MAX_BASELINE = 5000


@dataclass(frozen=True)
class DriftSignal:
    """A run rule that fired for a new point of a series."""

    series: SeriesState
    rule: str
    description: str
    index: int


def series_key(
    quantity: str,
    work_center_code: str,
    equipment_code: str | None,
    step_code: str = "",
    spec: str = "",
) -> str:
    """'hole_wall_copper|pattern_plate_copper|plating|EQ-12|each_reading20~;mean25~;n5':
    quantity, operation, work center, equipment ('-' when none) and the window's identity
    (`shopfloor.core.judging.spec_key`), so no series mixes specifications."""
    return f"{quantity}|{step_code or '-'}|{work_center_code}|{equipment_code or '-'}|{spec}"[:160]


def reading_spec_key(reading: Reading) -> str:
    """The reading's window identity (stored at insert; derived for older rows)."""
    return reading.spec_key or judging.spec_key(judging.criteria_of(reading.window or {}))


XBAR_CHARTS = ("xbar_r", "xbar_s")
MAX_SUBGROUP = 25  # the constants tables (and spc.chart_constants) stop at n = 25
# Common practice (e.g. Montgomery, Introduction to Statistical Quality Control): the
# range is an efficient spread estimate for small subgroups; above about ten samples the
# standard deviation is used instead.
LARGEST_R_SUBGROUP = 10
# Lots measured at the same time at one work center each keep an open subgroup; beyond
# this many, the oldest unfinished one is dropped (a lot that left mid-sampling).
MAX_OPEN_SUBGROUPS = 50


def chart_for(window: dict[str, Any]) -> tuple[str, int]:
    """The chart and subgroup size for readings judged against this window.

    Attribute checks count defects: c chart. A measured quantity the step samples n times
    per lot (2 <= n <= 25): X-bar/R up to 10, X-bar/S above. Otherwise individuals.
    """
    if window.get("quantity") in units.DEFECTIVES_QUANTITIES:
        return "p", 1  # becomes np at the baseline when every lot tested the same n
    if window.get("attribute"):
        return "c", 1
    n = window.get("samples")
    if isinstance(n, int) and not isinstance(n, bool) and 2 <= n <= MAX_SUBGROUP:
        return ("xbar_r" if n <= LARGEST_R_SUBGROUP else "xbar_s"), n
    return "individuals", 1


def key_of(reading: Reading) -> str:
    """The key of the series a reading belongs to (no query: the caller loaded the step's
    work center and equipment with the reading)."""
    step = reading.lot_step
    equipment = reading.equipment or step.equipment
    return series_key(
        reading.quantity,
        step.work_center.code,
        equipment.code if equipment else None,
        step.code,
        reading_spec_key(reading),
    )


def _lock_series(reading: Reading) -> SeriesState:
    step = reading.lot_step
    equipment = reading.equipment or step.equipment
    spec = reading_spec_key(reading)
    key = key_of(reading)
    locked = SeriesState.objects.select_for_update(no_key=True)
    series = locked.filter(key=key).first()  # one query once the series exists
    if series is None:
        window = reading.window or {}
        chart, subgroup_size = chart_for(window)
        criteria = judging.criteria_of(window)
        try:
            with transaction.atomic():
                SeriesState.objects.create(
                    key=key,
                    quantity=reading.quantity,
                    work_center_id=step.work_center_id,
                    equipment=equipment,
                    step_code=step.code[:60],
                    spec_key=spec,
                    window=criteria,
                    window_label=judging.describe_criteria(criteria)[:400],
                    chart=chart,
                    subgroup_size=subgroup_size,
                    baseline_size=DEFAULT_BASELINE,
                )
        except IntegrityError:
            pass  # a concurrent event created it first; lock that one
        series = locked.get(key=key)
    return series


def limits_from_dict(data: dict[str, Any]) -> spc.Limits:
    spread = data.get("range")
    return spc.Limits(
        centre=float(data["centre"]),
        ucl=float(data["ucl"]),
        lcl=float(data["lcl"]),
        sigma=float(data["sigma"]),
        within_sigma=data.get("within_sigma"),
        range=(
            spc.Limits(float(spread["centre"]), float(spread["ucl"]), float(spread["lcl"]), 0.0)
            if spread
            else None
        ),
    )


def limits_to_dict(limits: spc.Limits, *, source: str) -> dict[str, Any]:
    return {
        "centre": limits.centre,
        "ucl": limits.ucl,
        "lcl": limits.lcl,
        "sigma": limits.sigma,
        "within_sigma": limits.within_sigma,
        "range": limits.range.to_dict() if limits.range is not None else None,
        "source": source,
        "set_at": timezone.now().isoformat(),
    }


def subgroups_of(samples: Iterable[tuple[int, int, float]], size: int) -> list[list[float]]:
    """Complete subgroups from (lot_step_id, sample_index, value), oldest first.

    One subgroup per lot step with at least `size` distinct samples (the first `size` by
    sample number); a later value of the same sample (a correction) replaces the earlier.
    """
    groups: dict[int, dict[int, float]] = {}
    for lot_step_id, sample_index, value in samples:
        groups.setdefault(lot_step_id, {})[sample_index] = float(value)
    return [[g[k] for k in sorted(g)][:size] for g in groups.values() if len(g) >= size]


def _stored_rule_state(series: SeriesState) -> tuple[spc.RuleState, dict[str, int]]:
    """The rule state plus, per rule, the index of the last point it fired at."""
    raw = series.rule_state or {}
    state = spc.RuleState.from_dict(raw["rules"]) if raw.get("rules") else spc.RuleState()
    return state, dict(raw.get("last_fired") or {})


_MOVING_FIELDS = ["points", "updated_at"]  # what every new point changes


_SAVED_FIELDS = [*_MOVING_FIELDS, "baseline", "limits", "rule_state", "chart"]


def add_point(reading: Reading) -> list[DriftSignal]:
    """Add one reading to its series (caller holds the transaction); return new drift.

    The row lock serialises concurrent readings of one series, so the rule state never
    loses a point.
    """
    series = _lock_series(reading)
    signals = _apply(series, reading)
    series.save(update_fields=_SAVED_FIELDS)
    return signals


def add_points(readings: list[Reading]) -> dict[int, list[DriftSignal]]:
    """Add a batch of readings (in the order given) with one lock and one UPDATE per
    series: reading id -> the drift it signalled. The series are locked in key order,
    so two batches touching the same series cannot deadlock."""
    by_series: dict[str, list[Reading]] = {}
    for reading in readings:
        by_series.setdefault(key_of(reading), []).append(reading)
    out: dict[int, list[DriftSignal]] = {}
    for key in sorted(by_series):
        members = by_series[key]
        series = _lock_series(members[0])
        for reading in members:
            out[reading.pk] = _apply(series, reading)
        series.save(update_fields=_SAVED_FIELDS)
    return out


def _apply(series: SeriesState, reading: Reading) -> list[DriftSignal]:
    """Step one reading through the series in memory (the caller saves the row)."""
    if series.chart in XBAR_CHARTS:
        return _add_to_subgroup(series, reading)
    if series.chart in PROPORTION_CHARTS:
        return _add_proportion(series, reading)
    value = float(reading.value)
    series.points += 1
    series.updated_at = timezone.now()
    signals: list[DriftSignal] = []
    if series.limits is None:
        _grow_baseline(series, value, "")
        return signals

    limits = limits_from_dict(series.limits)
    if limits.sigma <= 0:
        # A baseline without spread (all equal) cannot be charted; keep counting points.
        return signals
    state, last_fired = _stored_rule_state(series)
    new_state, fired = spc.step(state, value, limits, series.rules)
    signals = _new_signals(series, fired, last_fired)
    series.rule_state = {"rules": new_state.to_dict(), "last_fired": last_fired}
    return signals


PROPORTION_CHARTS = ("p", "np")


def proportion_limits_dict(chart: spc.ProportionChart, *, source: str) -> dict[str, Any]:
    """Stored limits of a p / np series: p-bar (what every point's limits come from),
    the np chart's n, and the lines at the baseline's mean n for the list pages."""
    n_mean = statistics.fmean(chart.sizes)
    if chart.chart == "np":
        lim = spc.count_limits(chart.p_bar, chart.sizes[0])
    else:
        lim = spc.proportion_limits(chart.p_bar, max(1, round(n_mean)))
    return {
        **limits_to_dict(lim, source=source),
        "p_bar": chart.p_bar,
        "n": chart.sizes[0] if chart.chart == "np" else None,
    }


def _add_proportion(series: SeriesState, reading: Reading) -> list[DriftSignal]:
    """p / np series: a point is one lot's "failed k of n tested". The baseline decides
    np (every n the same) or p; each later point is judged standardized against p-bar
    (spc.proportion), the computation the page and `spc evaluate` use. In memory, like
    `_apply` (the caller saves the row, `chart` included)."""
    n = int(reading.tested or 0)
    if n < 1:
        return []  # a row from before n was recorded: not charted
    k = round(float(reading.value))
    series.points += 1
    series.updated_at = timezone.now()
    if series.limits is None:
        baseline = [*list(series.baseline or []), [k, n]]
        series.baseline = baseline
        if len(baseline) >= series.baseline_size:
            try:
                chart = spc.proportion_chart([b[0] for b in baseline], [b[1] for b in baseline])
                series.chart = chart.chart
                series.limits = proportion_limits_dict(
                    chart, source=f"baseline of {len(baseline)} lots"
                )
            except spc.SpcInputError as exc:
                log.warning("series %s: baseline not usable: %s", series.key, exc)
        return []
    p_bar = float(series.limits.get("p_bar", series.limits["centre"]))
    if series.chart == "np" and series.limits.get("n") != n:
        series.chart = "p"  # a lot of another size: the p chart (same p-bar) from here on
    z = spc.standardized(k, n, p_bar)
    state, last_fired = _stored_rule_state(series)
    new_state, fired = spc.step(state, z, spc.STANDARD_LIMITS, series.rules)
    fired = [
        replace(
            f,
            description=f"{f.description} (lot {reading.lot_step.lot.code}: {k} of {n} failed,"
            f" {100 * k / n:.1f} % against p-bar {100 * p_bar:.2f} %)",
        )
        for f in fired
    ]
    signals = _new_signals(series, fired, last_fired)
    series.rule_state = {"rules": new_state.to_dict(), "last_fired": last_fired}
    return signals


def _add_to_subgroup(series: SeriesState, reading: Reading) -> list[DriftSignal]:
    """X-bar series: collect the lot's samples; chart the subgroup once it is complete."""
    series.points += 1
    series.updated_at = timezone.now()
    raw = dict(series.rule_state or {})
    # [[lot_step_id, {sample_index: value}], ...] oldest first (a list: jsonb objects do
    # not keep key order)
    open_groups: list[list[Any]] = [list(g) for g in raw.get("open") or []]
    entry = next((g for g in open_groups if g[0] == reading.lot_step_id), None)
    if entry is None:
        entry = [reading.lot_step_id, {}]
        open_groups.append(entry)
    entry[1][str(reading.sample_index)] = float(reading.value)
    n = max(int(series.subgroup_size), 2)
    signals: list[DriftSignal] = []
    if len(entry[1]) >= n:
        open_groups.remove(entry)
        values = [entry[1][k] for k in sorted(entry[1], key=int)][:n]
        signals = _chart_subgroup(series, raw, values)
    if len(open_groups) > MAX_OPEN_SUBGROUPS:
        dropped = open_groups.pop(0)
        log.warning("series %s: dropped the unfinished subgroup of step %s", series.key, dropped[0])
    raw["open"] = open_groups
    series.rule_state = raw
    return signals


def _chart_subgroup(
    series: SeriesState, raw: dict[str, Any], values: list[float]
) -> list[DriftSignal]:
    if series.limits is None:
        _grow_baseline(series, values, f" subgroups of {len(values)}")
        return []
    limits = limits_from_dict(series.limits)
    if limits.sigma <= 0:
        return []
    state = spc.RuleState.from_dict(raw["rules"]) if raw.get("rules") else spc.RuleState()
    last_fired = dict(raw.get("last_fired") or {})
    new_state, fired = spc.step(state, statistics.fmean(values), limits, series.rules)
    fired = [
        replace(f, description=f"{f.description} (subgroup mean of {len(values)} samples)")
        for f in fired
    ]
    if limits.range is not None:
        spread, name = (
            (max(values) - min(values), "R")
            if series.chart == "xbar_r"
            else (statistics.stdev(values), "S")
        )
        if spread > limits.range.ucl:
            fired.append(
                spc.Signal(
                    state.index,
                    f"{name}_chart_ucl",
                    f"Subgroup {'range' if name == 'R' else 'standard deviation'} "
                    f"{spread:.4g} above the {name} chart's upper limit "
                    f"{limits.range.ucl:.4g}",
                )
            )
    signals = _new_signals(series, fired, last_fired)
    raw["rules"] = new_state.to_dict()
    raw["last_fired"] = last_fired
    return signals


def _grow_baseline(series: SeriesState, point: Any, unit_words: str) -> None:
    """Collect one baseline point (a value or a subgroup); set the limits once full."""
    baseline = [*list(series.baseline or []), point]
    series.baseline = baseline
    if len(baseline) >= series.baseline_size:
        try:
            limits = spc.compute_limits(series.chart, baseline)  # type: ignore[arg-type]
            series.limits = limits_to_dict(
                limits, source=f"baseline of {len(baseline)}{unit_words}"
            )
        except spc.SpcInputError as exc:  # e.g. counts that are not whole numbers
            log.warning("series %s: baseline not usable: %s", series.key, exc)


def _new_signals(
    series: SeriesState, fired: list[spc.Signal], last_fired: dict[str, int]
) -> list[DriftSignal]:
    """The rules that start a new run (updates `last_fired`): one alert per run."""
    signals: list[DriftSignal] = []
    for signal in fired:
        previous = last_fired.get(signal.rule)
        last_fired[signal.rule] = signal.index
        if previous is not None and previous == signal.index - 1:
            continue  # the same run is still going
        signals.append(DriftSignal(series, signal.rule, signal.description, signal.index))
    return signals


def series_queryset(series: SeriesState) -> QuerySet[Reading]:
    """Current readings (corrections replace what they correct) of one series."""
    qs = Reading.objects.filter(
        quantity=series.quantity,
        lot_step__work_center_id=series.work_center_id,
        superseded_by__isnull=True,
    )
    if series.spec_key:  # series made before keys named the window keep their filter
        qs = qs.filter(spec_key=series.spec_key, lot_step__code=series.step_code)
    if series.equipment_id is None:
        return qs.filter(equipment__isnull=True, lot_step__equipment__isnull=True)
    return qs.filter(
        Q(equipment_id=series.equipment_id)
        | Q(equipment__isnull=True, lot_step__equipment_id=series.equipment_id)
    )


def series_readings(series: SeriesState, limit: int = CAPABILITY_WINDOW) -> list[Reading]:
    """The latest ``limit`` current readings of a series, oldest first."""
    latest = list(series_queryset(series).order_by("-recorded_at", "-pk")[:limit])
    latest.reverse()
    return latest
