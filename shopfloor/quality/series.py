"""SPC on every series: one SeriesState row per quantity at a work center (per equipment).

Why a stored state: a reading must be judged against the run rules the moment it is
processed, and the cost of that must not grow with the series' history. So each series
keeps (a) its control limits and (b) the bounded rule state of
:class:`shopfloor.quality.spc.RuleState`, and each new reading costs one row lock, one
``spc.step`` and one row update.

Life of a series:

1. **Baseline.** The first ``baseline_size`` readings (25 by default; in window or not,
   because limits describe what the process does, not what the drawing asks) are only
   collected. When the baseline is full the limits are computed with
   ``spc.compute_limits``: an individuals/moving-range chart for measured values, a c chart
   for attribute counts (defects found per check). Subgrouped X-bar/R charts are not
   formed here; every reading is charted as an individual (documented limitation).
2. **Monitoring.** Every further reading is stepped through the rules; a rule that
   fires yields a :class:`DriftSignal`. Consecutive firings of one rule (the same run)
   are reported once, at the point where the run first fires.
3. **Engineer's control.** A quality engineer may fix limits by hand or recompute them
   from a chosen time window (see ``services.fix_limits`` / ``services.recompute_limits``).
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any

from django.db import IntegrityError, transaction
from django.db.models import Q, QuerySet
from django.utils import timezone

from shopfloor.floor.models import Reading
from shopfloor.quality import spc
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


def series_key(quantity: str, work_center_code: str, equipment_code: str | None) -> str:
    """'hole_wall_copper|plating|EQ-12'; '-' when the reading names no equipment."""
    return f"{quantity}|{work_center_code}|{equipment_code or '-'}"[:160]


def chart_for(window: dict[str, Any]) -> str:
    """Attribute checks count defects, so they go on a c chart; the rest are individuals."""
    return "c" if window.get("attribute") else "individuals"


def _lock_series(reading: Reading) -> SeriesState:
    step = reading.lot_step
    equipment = reading.equipment or step.equipment
    key = series_key(reading.quantity, step.work_center.code, equipment.code if equipment else None)
    locked = SeriesState.objects.select_for_update(no_key=True)
    series = locked.filter(key=key).first()  # one query once the series exists
    if series is None:
        try:
            with transaction.atomic():
                SeriesState.objects.create(
                    key=key,
                    quantity=reading.quantity,
                    work_center_id=step.work_center_id,
                    equipment=equipment,
                    chart=chart_for(reading.window or {}),
                    baseline_size=DEFAULT_BASELINE,
                )
        except IntegrityError:
            pass  # a concurrent event created it first; lock that one
        series = locked.get(key=key)
    return series


def limits_from_dict(data: dict[str, Any]) -> spc.Limits:
    return spc.Limits(
        centre=float(data["centre"]),
        ucl=float(data["ucl"]),
        lcl=float(data["lcl"]),
        sigma=float(data["sigma"]),
        within_sigma=data.get("within_sigma"),
    )


def limits_to_dict(limits: spc.Limits, *, source: str) -> dict[str, Any]:
    return {
        "centre": limits.centre,
        "ucl": limits.ucl,
        "lcl": limits.lcl,
        "sigma": limits.sigma,
        "within_sigma": limits.within_sigma,
        "source": source,
        "set_at": timezone.now().isoformat(),
    }


def _stored_rule_state(series: SeriesState) -> tuple[spc.RuleState, dict[str, int]]:
    """The rule state plus, per rule, the index of the last point it fired at."""
    raw = series.rule_state or {}
    state = spc.RuleState.from_dict(raw["rules"]) if raw.get("rules") else spc.RuleState()
    return state, dict(raw.get("last_fired") or {})


_MOVING_FIELDS = ["points", "updated_at"]  # what every new point changes


def add_point(reading: Reading) -> list[DriftSignal]:
    """Add one reading to its series (caller holds the transaction); return new drift.

    The row lock serialises concurrent readings of one series, so the rule state never
    loses a point.
    """
    series = _lock_series(reading)
    value = float(reading.value)
    series.points += 1
    series.updated_at = timezone.now()
    signals: list[DriftSignal] = []
    if series.limits is None:
        baseline = [*list(series.baseline or []), value]
        series.baseline = baseline
        if len(baseline) >= series.baseline_size:
            try:
                limits = spc.compute_limits(series.chart, baseline)  # type: ignore[arg-type]
                series.limits = limits_to_dict(limits, source=f"baseline of {len(baseline)}")
            except spc.SpcInputError as exc:  # e.g. counts that are not whole numbers
                log.warning("series %s: baseline not usable: %s", series.key, exc)
        series.save(update_fields=[*_MOVING_FIELDS, "baseline", "limits"])
        return signals

    limits = limits_from_dict(series.limits)
    if limits.sigma <= 0:
        # A baseline without spread (all equal) cannot be charted; keep counting points.
        series.save(update_fields=_MOVING_FIELDS)
        return signals
    state, last_fired = _stored_rule_state(series)
    new_state, fired = spc.step(state, value, limits, series.rules)
    for signal in fired:
        previous = last_fired.get(signal.rule)
        last_fired[signal.rule] = signal.index
        if previous is not None and previous == signal.index - 1:
            continue  # the same run is still going: one alert per run
        signals.append(DriftSignal(series, signal.rule, signal.description, signal.index))
    series.rule_state = {"rules": new_state.to_dict(), "last_fired": last_fired}
    series.save(update_fields=[*_MOVING_FIELDS, "rule_state"])
    return signals


def series_queryset(series: SeriesState) -> QuerySet[Reading]:
    """Current readings (corrections replace what they correct) of one series."""
    qs = Reading.objects.filter(
        quantity=series.quantity,
        lot_step__work_center_id=series.work_center_id,
        superseded_by__isnull=True,
    )
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
