"""Bath chemistry use cases: one function each, called by the pages, the API and the tasks.

Why here: an analysis, an addition, a hold of exposed lots must each be one transaction
with its audit entry, whichever screen or client asked for it, and must refuse bad input
with a message that says what is allowed. The arithmetic itself is in the pure core
(shopfloor.core.chemistry); this module reads and writes the rows around it.
"""

from __future__ import annotations

import logging
import re
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from django.db import transaction
from django.utils import timezone
from django.utils.dateparse import parse_datetime

from shopfloor import access
from shopfloor.audit import services as audit
from shopfloor.chemistry.models import (
    Analysis,
    PlanParameter,
    PlatedArea,
    PlatingSetup,
    Tank,
    TankEvent,
    TankUse,
)
from shopfloor.chemistry.read import (
    MAX_ID_DIGITS,
    design_area,
    doses_due,
    exposure,
    fmt,
    get_analysis,
    get_parameter,
    get_tank,
    tank_rows,
    window_text,
)
from shopfloor.chemistry.spc_view import parameter_chart
from shopfloor.core import units
from shopfloor.core.chemistry import bath, plating
from shopfloor.core.chemistry.errors import ChemistryInputError, non_negative
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, Person, Role
from shopfloor.plant.people import verify_pin
from shopfloor.quality.models import Alert
from shopfloor.quality.services import alerts

log = logging.getLogger("shopfloor.chemistry")

#: Enter analyses and additions, record dumps and make-ups.
LAB_ROLES = frozenset({Role.LAB_TECHNICIAN, Role.PROCESS_ENGINEER, Role.ADMIN})
#: Confirm an addition (the engineer's word that it may go in).
CONFIRM_ROLES = frozenset({Role.PROCESS_ENGINEER, Role.ADMIN})
#: Hold the lots an out-of-window bath touched, for quality review.
HOLD_ROLES = frozenset({Role.QUALITY_ENGINEER, Role.SUPERVISOR, Role.ADMIN})
#: Set a plating step's area and compute its amps and minutes.
PLATING_ROLES = frozenset({Role.PROCESS_ENGINEER, Role.SUPERVISOR, Role.ADMIN})

#: Shown on every addition screen and in every calculator reply.
CAUTION = (
    "Additions involve concentrated acids, oxidisers and gold salts (cyanide or "
    "cyanide-free, by shop). Wear the protective equipment the safety data sheet names "
    "(face shield, gloves, apron), always add acid to water (never water to acid), "
    "add slowly with the ventilation running, and follow the site's procedures, the "
    "safety data sheets and local codes. The calculated amount is advice: a qualified "
    "person checks and confirms it before anything goes into a tank."
)

#: Routing step code -> (metal, default target thickness µm, default cathode efficiency).
#: Targets: hole-wall copper of about 25 µm average for IPC class 2/3 work plated in one
#: pattern plate, 8 µm tin etch resist, 5 µm nickel under 1 µm hard gold on fingers;
#: efficiencies of 95-100 % for acid copper and nickel, lower for tin and gold (common
#: practice; the site sets its own on the step).
PLATING_STEPS: dict[str, tuple[str, float, float]] = {
    "panel_plate": ("copper", 25.0, 0.95),
    "pattern_plate_copper": ("copper", 25.0, 0.95),
    "pattern_plate_tin": ("tin", 8.0, 0.90),
    "gold_nickel_plate": ("nickel", 5.0, 0.95),
    "gold_plate": ("gold", 1.0, 0.60),
}


def base_code(code: str) -> str:
    """A routing step's code without its lamination-cycle suffix ('panel_plate_c1' ->
    'panel_plate'): sub-assembly cycles repeat the same wet steps in the same tanks."""
    return re.sub(r"_c\d+$", "", code or "")


def require_sees_all_lots(scope: Any) -> None:
    """Exposed-lot lists name lots of every work center: not for operators (who read only
    the lots at their own work centers)."""
    if not scope.sees_all:
        raise NotAllowed(
            "The lots a bath exposed span every work center; ask a supervisor, quality "
            "engineer or lab technician for this list."
        )


def _verify_pin(person: Person, pin: str) -> None:

    if not pin:
        raise InvalidInput("Enter your PIN to sign this entry.")
    verify_pin(person, pin)


# --- reads ----------------------------------------------------------------------------


# --- analyses -------------------------------------------------------------------------


@dataclass(frozen=True)
class AnalysisInput:
    parameter: str  # code or id
    value: Any
    unit: str = ""
    taken_at: Any = None  # datetime or ISO text with a time zone; None = now
    amp_hours: Any = None
    note: str = ""


def _parse_taken_at(raw: Any, now: datetime) -> datetime:
    if raw in (None, ""):
        return now
    when: datetime | None = raw if isinstance(raw, datetime) else None
    if when is None:
        try:
            when = parse_datetime(raw.strip()) if isinstance(raw, str) else None
        except ValueError:
            when = None
        if when is None:
            raise InvalidInput(
                f"taken_at {raw!r} is not a date and time; give ISO 8601 with a time zone, "
                "e.g. 2026-03-02T07:30:00+01:00"
            )
    if timezone.is_naive(when):
        raise InvalidInput("taken_at needs a time zone (e.g. +00:00); none was given.")
    if when > now + timedelta(minutes=5):
        raise InvalidInput("taken_at is in the future; give the time the sample was taken.")
    return when


def _optional_number(name: str, raw: Any) -> float | None:
    if raw in (None, ""):
        return None
    try:
        return _non_negative(name, raw)
    except ChemistryInputError as exc:
        raise InvalidInput(str(exc)) from exc


def _non_negative(name: str, raw: Any) -> float:
    return non_negative(name, raw)


def judge(param: PlanParameter, value: float) -> bool:
    return param.low <= value <= param.high


def record_analysis(
    *, person: Person, tank_code: str, data: AnalysisInput, via: str = "page"
) -> Analysis:
    """Store one analysis in canonical units, judge it, and act on the result.

    Out of window: the tank is flagged (its parameter's last result is out), an alert is
    raised that names the lots exposed since the last in-window analysis. In window: the
    parameter's due and overdue alerts close.
    """
    access.require_role(person, LAB_ROLES, "enter bath analyses")

    tank = get_tank(tank_code)
    now = timezone.now()
    with transaction.atomic():
        param = (
            PlanParameter.objects.select_for_update(no_key=True)
            .filter(pk=get_parameter(tank, data.parameter).pk)
            .get()
        )
        unit = (data.unit or param.unit).strip()
        try:
            value = units.bath_to_canonical(param.measure, data.value, unit)
        except units.UnitError as exc:
            raise InvalidInput(f"{param.name}: {exc}") from exc
        taken_at = _parse_taken_at(data.taken_at, now)
        amp_hours = _optional_number("amp-hour counter", data.amp_hours)
        note = (data.note or "").strip()
        if len(note) > 300:
            raise InvalidInput("The note is longer than 300 characters; shorten it.")
        in_window = judge(param, value)
        window = {
            "low": param.low,
            "high": param.high,
            "target": param.target,
            "unit": units.BATH_MEASURES[param.measure],
            "source": param.source,
        }
        analysis = Analysis.objects.create(
            tank=tank,
            parameter=param,
            entered_value=str(data.value)[:40],
            entered_unit=unit[:20],
            value=value,
            window=window,
            in_window=in_window,
            taken_at=taken_at,
            analyst=person,
            amp_hours=amp_hours,
            note=note,
            via=via,
        )
        if param.last_taken_at is None or taken_at >= param.last_taken_at:
            param.last_analysis = analysis
            param.last_taken_at = taken_at
            param.last_in_window = in_window
            if amp_hours is not None:
                param.last_amp_hours = amp_hours
            elif tank.amp_hours is not None:
                param.last_amp_hours = tank.amp_hours
            param.save(
                update_fields=["last_analysis", "last_taken_at", "last_in_window", "last_amp_hours"]
            )
        if amp_hours is not None and (tank.amp_hours is None or amp_hours >= tank.amp_hours):
            Tank.objects.filter(pk=tank.pk).update(amp_hours=amp_hours, amp_hours_at=taken_at)
        Alert.objects.filter(
            closed_at__isnull=True,
            kind=Alert.Kind.ANALYSIS_OVERDUE,
            dedupe_key__startswith=f"analysis_overdue:{param.pk}:",
        ).update(closed_at=now)
        audit.record(
            actor=person.user,
            action="bath.analysed",
            object_type="analysis",
            object_id=analysis.pk,
            after={
                "tank": tank.code,
                "parameter": param.code,
                "value": value,
                "unit": window["unit"],
                "in_window": in_window,
            },
        )
        if in_window:
            _drift_alert(analysis)
        else:
            exposed = exposure(analysis)
            side = "below" if value < param.low else "above"
            alerts.raise_alert(
                {"tank": tank.code, "analysis": analysis.pk, "lots_exposed": len(exposed.lots)},
                kind=Alert.Kind.BATH_OUT_OF_WINDOW,
                severity=Alert.Severity.WARNING,
                dedupe_key=f"bath_oow:{analysis.pk}",
                work_center=tank.work_center,
                message=(
                    f"Tank {tank.code} ({tank.name}): {param.name} {fmt(param, value)} is "
                    f"{side} its window {window_text(param)}. {len(exposed.lots)} lot(s) ran "
                    "in this tank since its last in-window analysis: review them."
                ),
            )
    return analysis


def _drift_alert(analysis: Analysis) -> None:
    """An in-window analysis that breaks a run rule on its tank x parameter chart raises a
    drift warning (never a hold), as readings do; an out-of-window one already alerted."""

    param = analysis.parameter
    if param.last_analysis_id != analysis.pk:
        return  # a late entry for an earlier time: the chart's newest point is another
    chart = parameter_chart(param)
    newest = len(chart.values) - 1
    # once per run of the pattern, as for readings: not when the same rule also fired on
    # the point before (the run goes on)
    before = {s.rule for s in chart.signals if s.index == newest - 1}
    fired = [s for s in chart.signals if s.index == newest and s.rule not in before]
    if not fired:
        return
    alerts.raise_alert(
        {"tank": analysis.tank.code, "parameter": param.code, "rule": fired[0].rule},
        kind=Alert.Kind.DRIFT,
        severity=Alert.Severity.WARNING,
        dedupe_key=f"bath_drift:{analysis.pk}",
        work_center=analysis.tank.work_center,
        rule=fired[0].rule,
        message=(
            f"Tank {analysis.tank.code} ({analysis.tank.name}): {param.name} "
            f"{fmt(param, analysis.value)} is in window but {fired[0].description.lower()} "
            "on its control chart: the bath is drifting."
        ),
    )


# --- impact ---------------------------------------------------------------------------


def hold_exposed_lots(*, person: Person, analysis_id: int) -> list[Lot]:
    """Hold every exposed lot (not scrapped, not already held for this analysis) with an
    NCR each, so quality reviews them; returns the lots newly held."""
    access.require_role(person, HOLD_ROLES, "hold the lots a bath touched")

    analysis = get_analysis(analysis_id)
    if analysis.in_window:
        raise Conflict(
            f"Analysis {analysis.pk} is in window; only an out-of-window analysis exposes lots."
        )
    found = exposure(analysis)
    param = analysis.parameter
    held: list[Lot] = []
    with transaction.atomic():
        for lot in found.lots:
            if lot.status == Lot.Status.SCRAPPED:
                continue
            step = next(u.lot_step for u in found.uses if u.lot_step.lot_id == lot.pk)
            message = (
                f"Lot {lot.code} ran '{step.name}' in tank {analysis.tank.code} while "
                f"{param.name} was {fmt(param, analysis.value)} (window {window_text(param)}, "
                f"analysis {analysis.pk}). Held for quality review of the bath exposure."
            )
            alert = alerts.raise_alert(
                {"lot": lot.code, "analysis": analysis.pk, "by": person.badge_number},
                kind=Alert.Kind.BATH_OUT_OF_WINDOW,
                severity=Alert.Severity.WARNING,
                dedupe_key=f"bath_exposure:{analysis.pk}:{lot.pk}",
                lot=lot,
                lot_step=step,
                work_center=analysis.tank.work_center,
                message=message,
            )
            if alert is None:
                continue  # already held for this analysis
            alerts.hold_for_review(
                lot=lot,
                lot_step=step,
                alert=alert,
                message=message,
                reason=f"Bath exposure: tank {analysis.tank.code}, analysis {analysis.pk}",
            )
            held.append(lot)
        audit.record(
            actor=person.user,
            action="bath.exposed_lots_held",
            object_type="analysis",
            object_id=analysis.pk,
            after={"lots": [lot.code for lot in held]},
        )
    return held


# --- additions and tank events ----------------------------------------------------------


@dataclass(frozen=True)
class AdditionAdvice:
    parameter: PlanParameter
    measured: float
    target: float
    stock: float
    volume_l: float
    advice: bath.Addition
    dose: bath.AmpHourDose | None
    caution: str = CAUTION

    @property
    def shown(self) -> dict[str, str]:
        """Measured, target and stock in the parameter's own unit, for the page."""
        p = self.parameter
        return {"measured": fmt(p, self.measured), "target": fmt(p, self.target),
                "stock": fmt(p, self.stock)}  # fmt: skip


def _number_in(param: PlanParameter, name: str, raw: Any, unit: str) -> float:
    try:
        return units.bath_to_canonical(param.measure, raw, unit or param.unit)
    except units.UnitError as exc:
        raise InvalidInput(f"{name}: {exc}") from exc


def advise_addition(
    *,
    tank: Tank,
    parameter: str | int,
    measured: Any = None,
    target: Any = None,
    stock: Any = None,
    volume_l: Any = None,
    unit: str = "",
) -> AdditionAdvice:
    """The calculator's advice for one parameter (nothing is saved).

    Defaults: measured = the last analysis, target = the plan's, stock = the plan's
    replenisher, volume = the tank's working volume. Values are in `unit` (the plan's
    unit when blank).
    """
    param = get_parameter(tank, parameter)
    if param.measure not in ("mass_concentration", "volume_concentration"):
        raise InvalidInput(
            f"{param.name} is a {param.measure.replace('_', ' ')}: additions are worked out "
            "for concentrations (g/L, mL/L ...). Follow the site's procedure for this one."
        )
    if measured in (None, ""):
        if param.last_analysis_id is None:
            raise InvalidInput(f"{param.name} has no analysis yet: enter the measured value.")
        m = param.last_analysis.value  # type: ignore[union-attr]
    else:
        m = _number_in(param, "measured", measured, unit)
    t = param.target if target in (None, "") else _number_in(param, "target", target, unit)
    if stock in (None, ""):
        if param.stock_strength is None:
            raise InvalidInput(f"{param.name} has no replenisher strength in its plan: enter it.")
        s = param.stock_strength
    else:
        s = _number_in(param, "stock", stock, unit)
    v = tank.volume_l if volume_l in (None, "") else volume_l
    try:
        advice = bath.concentrate_addition(
            v, m, t, s, max_volume_l=tank.max_volume_l, high=param.high
        )
        dose = next((d for p, d in doses_due(tank) if p.pk == param.pk), None)
    except ChemistryInputError as exc:
        raise InvalidInput(str(exc)) from exc
    return AdditionAdvice(param, m, t, s, float(v), advice, dose)


def _event_kind(kind: str) -> str:
    allowed = [k.value for k in TankEvent.Kind]
    if kind not in allowed:
        raise InvalidInput(f"unknown tank event {kind!r}; allowed: {', '.join(allowed)}")
    return kind


def record_event(
    *,
    person: Person,
    tank_code: str,
    kind: str,
    pin: str,
    parameter: str | int | None = None,
    analysis_id: Any = None,
    add_l: Any = 0,
    water_l: Any = 0,
    dump_l: Any = 0,
    add_g: Any = 0,
    amp_hours: Any = None,
    advice: dict[str, Any] | None = None,
    note: str = "",
) -> TankEvent:
    """Record an addition, dose, dump, make-up or counter reading, signed with the PIN.

    An addition entered by a process engineer (or admin) is confirmed by that signature;
    one entered by a lab technician waits for an engineer's confirmation
    (`confirm_event`). A make-up restarts the tank's age (turnovers, exposure start).
    """
    access.require_role(person, LAB_ROLES, "record additions, dumps and make-ups")
    kind = _event_kind(kind)
    tank = get_tank(tank_code)
    param = get_parameter(tank, parameter) if parameter not in (None, "") else None
    if kind in (TankEvent.Kind.ADDITION, TankEvent.Kind.DOSE) and param is None:
        raise InvalidInput("An addition or dose names the parameter it corrects.")
    analysis = None
    if analysis_id not in (None, ""):
        if not str(analysis_id).isdigit() or len(str(analysis_id)) > MAX_ID_DIGITS:
            raise InvalidInput(f"analysis {analysis_id!r} is not an analysis number.")
        analysis = Analysis.objects.filter(pk=int(analysis_id), tank=tank).first()
        if analysis is None:
            raise InvalidInput(f"Analysis {analysis_id} is not one of tank {tank.code}'s.")
    try:
        amounts = {
            "add_l": _non_negative("litres added", add_l or 0),
            "water_l": _non_negative("water added", water_l or 0),
            "dump_l": _non_negative("litres dumped", dump_l or 0),
            "add_g": _non_negative("grams added", add_g or 0),
        }
        counter = None if amp_hours in (None, "") else _non_negative("amp-hours", amp_hours)
    except ChemistryInputError as exc:
        raise InvalidInput(str(exc)) from exc
    if kind == TankEvent.Kind.ADDITION and not (
        amounts["add_l"] or amounts["add_g"] or amounts["water_l"]
    ):
        raise InvalidInput("An addition needs litres or grams added (or water for a dilution).")
    if kind == TankEvent.Kind.DUMP and not amounts["dump_l"]:
        raise InvalidInput("A partial dump needs the litres dumped.")
    if amounts["dump_l"] > tank.volume_l:
        raise InvalidInput(
            f"{amounts['dump_l']:g} L dumped is more than the tank holds ({tank.volume_l:g} L)."
        )
    if kind == TankEvent.Kind.COUNTER and counter is None:
        raise InvalidInput("A counter reading needs the amp-hours shown on the rectifier.")
    _verify_pin(person, pin)
    now = timezone.now()
    confirms = access.has_role(person, CONFIRM_ROLES) or kind != TankEvent.Kind.ADDITION
    with transaction.atomic():
        event = TankEvent.objects.create(
            tank=tank,
            kind=kind,
            parameter=param,
            analysis=analysis,
            amp_hours=counter,
            advice=advice or {},
            note=(note or "").strip()[:300],
            entered_by=person,
            entered_at=now,
            confirmed_by=person if confirms else None,
            confirmed_at=now if confirms else None,
            **amounts,
        )
        updates: dict[str, Any] = {}
        if counter is not None and (tank.amp_hours is None or counter >= tank.amp_hours):
            updates.update(amp_hours=counter, amp_hours_at=now)
        if kind == TankEvent.Kind.MAKE_UP:
            updates["made_up_at"] = now
        if updates:
            Tank.objects.filter(pk=tank.pk).update(**updates)
        audit.record(
            actor=person.user,
            action=f"bath.{kind}",
            object_type="tank_event",
            object_id=event.pk,
            after={
                "tank": tank.code,
                "parameter": param.code if param else None,
                **amounts,
                "confirmed": confirms,
            },
        )
    return event


def confirm_event(*, person: Person, event_id: int, pin: str) -> TankEvent:
    """An engineer confirms a lab technician's addition (who and when, signed with the PIN)."""
    access.require_role(person, CONFIRM_ROLES, "confirm additions")
    _verify_pin(person, pin)
    with transaction.atomic():
        event = (
            TankEvent.objects.select_for_update(no_key=True).filter(pk=event_id).first()
            if 0 < event_id < 2**63
            else None
        )
        if event is None:
            raise NotFound(f"No tank event {event_id}.")
        if event.confirmed_at is not None:
            raise Conflict(
                f"This addition was already confirmed at {event.confirmed_at:%Y-%m-%d %H:%M}."
            )
        event.confirmed_by = person
        event.confirmed_at = timezone.now()
        event.save(update_fields=["confirmed_by", "confirmed_at"])
        audit.record(
            actor=person.user,
            action="bath.addition_confirmed",
            object_type="tank_event",
            object_id=event.pk,
            after={"tank": event.tank.code, "confirmed_by": person.badge_number},
        )
    return event


# --- tank use and the lot history --------------------------------------------------------


def record_tank_use(step: LotStep, when: datetime | None = None) -> list[TankUse]:
    """Note the tanks a wet step runs in (tanks at its work center that serve its code).

    Called when the step starts, inside its transaction. When the step is a plating step
    and its part has a plated area on file, its amps and minutes are computed too.
    """
    when = when or step.started_at or timezone.now()
    tanks = [
        t
        for t in Tank.objects.filter(work_center_id=step.work_center_id)
        if base_code(step.code) in (t.step_codes or [])
    ]
    uses = []
    for tank in tanks:
        use, _ = TankUse.objects.get_or_create(lot_step=step, tank=tank, defaults={"used_at": when})
        uses.append(use)
    plating_step = base_code(step.code) in PLATING_STEPS
    if plating_step and not PlatingSetup.objects.filter(lot_step=step).exists():
        area = design_area(step)
        if area is not None:
            try:
                _store_setup(step, None, area[0], PlatingSetup.AreaSource.DESIGN, None, None)
            except InvalidInput as exc:  # never stop a start over a missing parameter
                log.info("plating setup for step %s not computed: %s", step.pk, exc.detail)
    return uses


# --- plating steps ---------------------------------------------------------------------


def _store_setup(
    step: LotStep,
    person: Person | None,
    area: float,
    source: str,
    target_um: Any,
    eff: Any,
) -> PlatingSetup:
    metal, default_target, default_eff = PLATING_STEPS[base_code(step.code)]
    params = dict(step.parameters or {})
    j = params.get("current_density_a_per_dm2")
    if j is None:
        raise InvalidInput(f"'{step.name}' has no current density (current_density_a_per_dm2).")
    target = default_target if target_um in (None, "") else target_um
    efficiency = default_eff if eff in (None, "") else eff
    try:
        setup = plating.setup_for(
            metal, area_dm2=area, current_density_asd=j, target_um=target, eff=efficiency
        )
    except ChemistryInputError as exc:
        raise InvalidInput(str(exc)) from exc
    row, _ = PlatingSetup.objects.update_or_create(
        lot_step=step,
        defaults={
            "metal": metal,
            "area_dm2": setup.area_dm2,
            "area_source": source,
            "current_density_asd": setup.current_density_asd,
            "efficiency": setup.efficiency,
            "target_um": setup.target_um,
            "current_a": setup.current_a,
            "minutes": setup.minutes,
            "computed_by": person,
            "computed_at": timezone.now(),
        },
    )
    params.update(
        {
            "plated_area_dm2": round(setup.area_dm2, 2),
            "target_thickness_um": round(setup.target_um, 2),
            "cathode_efficiency": round(setup.efficiency, 3),
            "rectifier_current_a": round(setup.current_a, 1),
            "time_min": round(setup.minutes, 1),
        }
    )
    LotStep.objects.filter(pk=step.pk).update(parameters=params)
    audit.record(
        actor=person.user if person else None,
        action="plating.computed",
        object_type="lot_step",
        object_id=step.pk,
        after={
            "metal": metal,
            "area_dm2": setup.area_dm2,
            "area_source": source,
            "current_a": setup.current_a,
            "minutes": setup.minutes,
        },
    )
    return row


def compute_plating(
    *,
    person: Person,
    lot_step_id: int,
    area_dm2: Any = None,
    target_um: Any = None,
    efficiency: Any = None,
) -> PlatingSetup:
    """Compute a plating step's rectifier amps and minutes (Faraday's law) and show them
    as step parameters. The area is the one entered, else the job's design data."""
    access.require_role(person, PLATING_ROLES, "set plating areas")
    with transaction.atomic():
        step = (
            LotStep.objects.select_for_update(no_key=True).filter(pk=lot_step_id).first()
            if 0 < lot_step_id < 2**63
            else None
        )
        if step is None:
            raise NotFound(f"No lot step {lot_step_id}.")
        if base_code(step.code) not in PLATING_STEPS:
            raise InvalidInput(
                f"'{step.name}' is not a plating step; the calculator serves: "
                + ", ".join(sorted(PLATING_STEPS))
            )
        if step.status == LotStep.Status.DONE:
            raise Conflict(f"'{step.name}' is already done; its parameters are part of the record.")
        if area_dm2 not in (None, ""):
            area: float = area_dm2
            source = PlatingSetup.AreaSource.ENTERED
        else:
            found = design_area(step)
            if found is None:
                raise InvalidInput(
                    "This job's design data has no plated area: enter the area per panel (dm²)."
                )
            area, source = found[0], PlatingSetup.AreaSource.DESIGN
        return _store_setup(step, person, area, source, target_um, efficiency)


def record_design_area(*, part_revision_id: int, area_dm2: float, source: str) -> PlatedArea:
    """Store a part revision's plated area (from a design import, or entered once)."""
    try:
        area = plating.setup_for(
            "copper", area_dm2=area_dm2, current_density_asd=1, target_um=1
        ).area_dm2
    except ChemistryInputError as exc:
        raise InvalidInput(str(exc)) from exc
    row, _ = PlatedArea.objects.update_or_create(
        part_revision_id=part_revision_id, defaults={"area_dm2": area, "source": source[:200]}
    )
    return row


# --- periodic check --------------------------------------------------------------------


def check_analyses(now: datetime | None = None) -> dict[str, int]:
    """Raise an alert for every planned analysis that is overdue.

    One alert per parameter and missed analysis (the dedupe key carries the last analysis
    id), so reruns of the beat task change nothing; recording the analysis closes it.
    Analyses that are merely due show on the lab page and the board's lab strip.
    """

    now = now or timezone.now()
    counts = {"checked": 0, "due": 0, "overdue": 0, "alerts": 0}
    for row in tank_rows(now):
        for prow in row.rows:
            counts["checked"] += 1
            state = prow.due.state
            if state == "ok":
                continue
            counts[state] += 1
            if state != "overdue":
                continue
            p = prow.parameter
            when = (
                f"was due at {timezone.localtime(prow.due.due_at):%Y-%m-%d %H:%M}"
                if prow.due.due_at
                else f"is {-(prow.due.amp_hours_left or 0):.0f} Ah past its interval"
            )
            with transaction.atomic():
                alert = alerts.raise_alert(
                    {"tank": row.tank.code, "parameter": p.code},
                    kind=Alert.Kind.ANALYSIS_OVERDUE,
                    severity=Alert.Severity.WARNING,
                    dedupe_key=f"analysis_overdue:{p.pk}:{p.last_analysis_id or 0}",
                    work_center=row.tank.work_center,
                    message=(
                        f"Tank {row.tank.code} ({row.tank.name}): the {p.name} analysis "
                        f"({p.get_frequency_display().lower()}, {p.method}) {when} and is "
                        "overdue."
                    ),
                )
            if alert is not None:
                counts["alerts"] += 1
    return counts
