"""SPC limits: a quality engineer fixes, recomputes or chooses the run rules of a series'
control limits, each with an audit entry; `series_capability` reads a series' Cp/Cpk for
the SPC page.
"""

from __future__ import annotations

import logging
from datetime import datetime
from typing import Any

from django.db import transaction
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.core import spc
from shopfloor.errors import InvalidInput, NotAllowed, NotFound
from shopfloor.plant.models import Person
from shopfloor.quality import series as series_core
from shopfloor.quality.models import SeriesState

log = logging.getLogger("shopfloor.quality")

# --- SPC: the engineer's controls -----------------------------------------------------


def _require_quality(person: Person, what: str) -> None:
    if "quality_engineer" not in person.roles():
        raise NotAllowed(f"Only a quality engineer can {what}.")


def _get_series_locked(series_id: int) -> SeriesState:
    found = SeriesState.objects.select_for_update(no_key=True).filter(pk=series_id).first()
    if found is None:
        raise NotFound(f"No SPC series {series_id}.")
    return found


def fix_limits(
    person: Person, series_id: int, centre: float, ucl: float, lcl: float
) -> SeriesState:
    """Set a series' control limits by hand (e.g. after a capability study)."""
    _require_quality(person, "fix control limits")
    try:
        limits = spc.fixed_limits(centre, ucl, lcl)
    except spc.SpcInputError as exc:
        raise InvalidInput(f"Control limits not accepted: {exc}.") from exc
    with transaction.atomic():
        s = _get_series_locked(series_id)
        if s.chart in series_core.PROPORTION_CHARTS:
            raise InvalidInput(
                f"A {s.chart} chart's limits follow from p-bar and each lot's number tested, "
                "so they are not typed in: recompute them from a time window instead."
            )
        source = f"fixed by {person.printed_name}"
        return _store_limits(person, s, limits, source, "spc.limits_fixed")


def _store_limits(
    person: Person, s: SeriesState, limits: spc.Limits, source: str, action: str
) -> SeriesState:
    """Keep limits an engineer set (the baseline no longer moves them), with an audit entry."""
    before = s.limits
    s.limits = series_core.limits_to_dict(limits, source=source)
    s.limits_fixed = True
    s.updated_at = timezone.now()
    s.save(update_fields=["limits", "limits_fixed", "updated_at"])
    audit.record(
        actor=person.user,
        action=action,
        object_type="spc_series",
        object_id=s.pk,
        before=before,
        after=s.limits,
    )
    return s


RULESET_NAMES = {"western_electric": "Western Electric", "nelson": "Nelson"}


def set_series_rules(person: Person, series_id: int, rules: str) -> SeriesState:
    """Choose which run rules judge a series from its next point on (audited).

    The rule state keeps the same history for every rule set, so a change takes effect at
    once; alerts already raised stay as they are.
    """
    _require_quality(person, "choose the run rules")
    if rules not in spc.RULESETS:
        allowed = ", ".join(f"{key} ({name})" for key, name in RULESET_NAMES.items())
        raise InvalidInput(f"Unknown rule set {rules!r}; allowed: {allowed}.")
    with transaction.atomic():
        s = _get_series_locked(series_id)
        before = s.rules
        if before == rules:
            return s
        s.rules = rules
        s.updated_at = timezone.now()
        s.save(update_fields=["rules", "updated_at"])
        audit.record(
            actor=person.user,
            action="spc.rules_changed",
            object_type="spc_series",
            object_id=s.pk,
            before={"rules": before},
            after={"rules": rules},
        )
        return s


def recompute_limits(person: Person, series_id: int, start: datetime, end: datetime) -> SeriesState:
    """Recompute a series' limits from the readings recorded in [start, end]."""
    _require_quality(person, "recompute control limits")
    if not isinstance(start, datetime) or not isinstance(end, datetime):
        raise InvalidInput("Give the baseline window as two date-times (from, to).")
    if timezone.is_naive(start) or timezone.is_naive(end):
        raise InvalidInput("The baseline window's date-times must include a time zone.")
    if start >= end:
        raise InvalidInput("The baseline window must start before it ends.")
    with transaction.atomic():
        s = _get_series_locked(series_id)
        if s.chart in series_core.PROPORTION_CHARTS:
            return _recompute_proportion(person, s, start, end)
        rows = list(
            series_core.series_queryset(s)
            .filter(recorded_at__gte=start, recorded_at__lte=end)
            .order_by("recorded_at", "pk")
            .values_list("lot_step_id", "sample_index", "value")[: series_core.MAX_BASELINE]
        )
        data: list[Any]
        if s.chart in series_core.XBAR_CHARTS:
            data = series_core.subgroups_of(rows, s.subgroup_size)
            what = f"complete subgroup(s) of {s.subgroup_size}"
        else:
            data = [value for _, _, value in rows]
            what = "reading(s)"
        if len(data) < spc.MIN_BASELINE_POINTS:
            raise InvalidInput(
                f"The window {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} holds "
                f"{len(data)} {what} of {s.key}; at least "
                f"{spc.MIN_BASELINE_POINTS} are needed (25 or more is common practice)."
            )
        try:
            limits = spc.compute_limits(s.chart, data)  # type: ignore[arg-type]
        except spc.SpcInputError as exc:
            raise InvalidInput(f"Limits cannot be computed from that window: {exc}.") from exc
        source = f"recomputed from {len(data)} {what} {start.isoformat()} to {end.isoformat()}"
        return _store_limits(person, s, limits, source, "spc.limits_recomputed")


def series_capability(series_id: int) -> dict[str, Any]:
    """Cp, Cpk, Pp, Ppk and ppm of a series' latest readings against their window.

    The window is the one the newest reading was judged against (lots carry windows
    snapshotted from their routing). ``capability`` is None, with ``reason``, when it
    cannot be computed (fewer than 2 readings, no limits, an attribute chart).
    """
    s = SeriesState.objects.filter(pk=series_id).first()
    if s is None:
        raise NotFound(f"No SPC series {series_id}.")
    readings = series_core.series_readings(s)
    values = [r.value for r in readings]
    window = readings[-1].window if readings else {}
    lsl, usl = window.get("min"), window.get("max")
    result: dict[str, Any] = {
        "series": s.key,
        "chart": s.chart,
        "n": len(values),
        "lsl": lsl,
        "usl": usl,
        "unit": readings[-1].unit if readings else "",
        "source": window.get("source"),
        "limits": s.limits,
        "capability": None,
        "reason": "",
    }
    if s.chart == "c":
        result["reason"] = "capability applies to measured values, not attribute counts"
    elif len(values) < 2:
        result["reason"] = f"{len(values)} reading(s); at least 2 are needed"
    elif lsl is None and usl is None:
        result["reason"] = "the window has no specification limits"
    else:
        within = None
        if s.chart in series_core.XBAR_CHARTS:
            groups = series_core.subgroups_of(
                ((r.lot_step_id, r.sample_index, r.value) for r in readings), s.subgroup_size
            )
            if len(groups) >= 2:  # short-term sigma from within the lots' subgroups
                within = spc.within_sigma(s.chart, groups)  # type: ignore[arg-type]
        try:
            cap = spc.capability(values, lsl=lsl, usl=usl, within=within)
        except spc.SpcInputError as exc:
            result["reason"] = str(exc)
        else:
            result["capability"] = {
                **cap.to_dict(),
                "mean": cap.mean,
                "within_sigma": cap.within_sigma,
                "overall_sigma": cap.overall_sigma,
            }
    return result


def _recompute_proportion(
    person: Person, s: SeriesState, start: datetime, end: datetime
) -> SeriesState:
    """p / np series: p-bar from the lots recorded in [start, end] (the live computation)."""
    points = [
        (round(value), tested)
        for value, tested in series_core.series_queryset(s)
        .filter(recorded_at__gte=start, recorded_at__lte=end, tested__isnull=False)
        .order_by("recorded_at", "pk")
        .values_list("value", "tested")[: series_core.MAX_BASELINE]
    ]
    if len(points) < spc.MIN_BASELINE_POINTS:
        raise InvalidInput(
            f"The window {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} holds {len(points)} "
            f"lot(s) of {s.key}; at least {spc.MIN_BASELINE_POINTS} are needed (25 or more "
            "is common practice)."
        )
    try:
        chart = spc.proportion_chart([k for k, _ in points], [n for _, n in points])
    except spc.SpcInputError as exc:
        raise InvalidInput(f"Limits cannot be computed from that window: {exc}.") from exc
    before = s.limits
    s.chart = chart.chart
    s.limits = series_core.proportion_limits_dict(
        chart, source=f"recomputed from {len(points)} lots {start.isoformat()} to {end.isoformat()}"
    )
    s.limits_fixed = True
    s.updated_at = timezone.now()
    s.save(update_fields=["chart", "limits", "limits_fixed", "updated_at"])
    audit.record(
        actor=person.user,
        action="spc.limits_recomputed",
        object_type="spc_series",
        object_id=s.pk,
        before=before,
        after=s.limits,
    )
    return s
