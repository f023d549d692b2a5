"""Bath chemistry read models: tanks and their plan's state, a tank's history, which lots a
bath exposed, which analyses covered a lot's wet steps. They only read; the writes
(analyses, additions, holds, tank use, plating setups) are in shopfloor/chemistry/services.py.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

from django.db.models import QuerySet
from django.utils import timezone

from shopfloor.chemistry.models import (
    Analysis,
    PlanParameter,
    PlatedArea,
    Tank,
    TankEvent,
    TankUse,
)
from shopfloor.core import units
from shopfloor.core.chemistry import bath
from shopfloor.core.chemistry import schedule as due_rules
from shopfloor.core.chemistry.errors import ChemistryInputError
from shopfloor.errors import NotFound
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot

MAX_ID_DIGITS = 18  # a bigint id has at most 19 digits; longer "ids" are codes (or junk)


def get_tank(code: str) -> Tank:
    tank = Tank.objects.select_related("work_center").filter(code__iexact=code.strip()).first()
    if tank is None:
        raise NotFound(f"No tank {code!r}. The lab page lists every tank.")
    return tank


def get_parameter(tank: Tank, code_or_id: str | int) -> PlanParameter:
    qs = tank.parameters.all()
    text = str(code_or_id).strip()
    by_id = text.isdigit() and len(text) <= MAX_ID_DIGITS
    param = qs.filter(pk=int(text)).first() if by_id else qs.filter(code=text[:40]).first()
    if param is None:
        known = ", ".join(tank.parameters.values_list("code", flat=True))
        raise NotFound(f"Tank {tank.code} has no parameter {text!r}; its plan has: {known}.")
    return param


def get_analysis(analysis_id: int) -> Analysis:
    if not 0 < analysis_id < 2**63:  # beyond the id column: no such row, never a 500
        raise NotFound(f"No analysis {analysis_id}.")
    found = (
        Analysis.objects.select_related("tank__work_center", "parameter", "analyst")
        .filter(pk=analysis_id)
        .first()
    )
    if found is None:
        raise NotFound(f"No analysis {analysis_id}.")
    return found


@dataclass
class ParameterRow:
    """One plan parameter with its last analysis and when the next one is due."""

    parameter: PlanParameter
    due: due_rules.Due
    last_value: str
    in_window: bool | None

    @property
    def window(self) -> str:
        return window_short(self.parameter)

    @property
    def target(self) -> str:
        return fmt(self.parameter, self.parameter.target)


def due_state(param: PlanParameter, tank: Tank, now: datetime) -> due_rules.Due:
    last = param.last_taken_at or tank.made_up_at or tank.created_at
    return due_rules.analysis_due(
        param.frequency,
        last_taken_at=last,
        now=now,
        every_amp_hours=param.every_amp_hours,
        last_amp_hours=param.last_amp_hours,
        amp_hours_now=tank.amp_hours,
    )


def fmt(param: PlanParameter, canonical: float) -> str:
    """A canonical value shown in the parameter's own unit: '72.5 g/L'."""
    try:
        shown = units.bath_from_canonical(param.measure, canonical, param.unit)
    except units.UnitError:
        shown = canonical
    text = f"{shown:.0f}" if abs(shown) >= 10_000 else f"{shown:.4g}"  # never 4.28e+05
    return f"{text} {param.unit}".strip()


def window_short(param: PlanParameter) -> str:
    """'40–80 mg/L' in the parameter's own unit."""
    low, high = fmt(param, param.low), fmt(param, param.high)
    return f"{low.removesuffix(' ' + param.unit)}–{high}"


def window_text(param: PlanParameter) -> str:
    return f"{fmt(param, param.low)} – {fmt(param, param.high)} (target {fmt(param, param.target)})"


@dataclass
class TankRow:
    tank: Tank
    rows: list[ParameterRow] = field(default_factory=list)

    @property
    def flagged(self) -> bool:
        return any(r.in_window is False for r in self.rows)

    @property
    def overdue(self) -> int:
        return sum(1 for r in self.rows if r.due.state == "overdue")

    @property
    def due(self) -> int:
        return sum(1 for r in self.rows if r.due.state == "due")


def tank_rows(now: datetime | None = None, tanks: QuerySet[Tank] | None = None) -> list[TankRow]:
    """Every tank with its plan's state (two queries whatever the number of tanks)."""
    now = now or timezone.now()
    qs = tanks if tanks is not None else Tank.objects.all()
    tank_list = list(qs.select_related("work_center").order_by("work_center__code", "code"))
    by_tank: dict[int, TankRow] = {t.pk: TankRow(t) for t in tank_list}
    params = PlanParameter.objects.filter(tank__in=tank_list).select_related("last_analysis")
    for p in params.order_by("tank_id", "position", "code"):
        row = by_tank[p.tank_id]
        last = p.last_analysis
        row.rows.append(
            ParameterRow(
                p,
                due_state(p, row.tank, now),
                fmt(p, last.value) if last else "never analysed",
                p.last_in_window,
            )
        )
    return list(by_tank.values())


def doses_due(tank: Tank) -> list[tuple[PlanParameter, bath.AmpHourDose]]:
    """Additives dosed by charge: mL due since each one's last dose (rectifier counter)."""
    if tank.amp_hours is None:
        return []
    out = []
    for param in tank.parameters.filter(dose_ml_per_kah__isnull=False):
        last = (
            TankEvent.objects.filter(
                tank=tank, parameter=param, kind=TankEvent.Kind.DOSE, amp_hours__isnull=False
            )
            .order_by("-entered_at", "-pk")
            .first()
        )
        if last is None or last.amp_hours is None or param.dose_ml_per_kah is None:
            continue
        try:
            out.append(
                (param, bath.amp_hour_dose(param.dose_ml_per_kah, tank.amp_hours, last.amp_hours))
            )
        except ChemistryInputError:
            continue  # counter reset since the last dose: the page says to record a new start
    return out


@dataclass
class Exposure:
    """Lot steps that ran in a tank while one parameter was (or may have been) out."""

    analysis: Analysis
    since: datetime | None
    since_analysis: Analysis | None
    until: datetime | None
    until_analysis: Analysis | None
    uses: list[TankUse]

    @property
    def lots(self) -> list[Lot]:
        seen: dict[int, Lot] = {}
        for use in self.uses:
            seen.setdefault(use.lot_step.lot_id, use.lot_step.lot)
        return list(seen.values())


def exposure(analysis: Analysis) -> Exposure:
    """Every lot step that ran in the tank since the parameter's last in-window analysis
    before this one (or the tank's make-up), up to the next in-window analysis (or now)."""
    same = Analysis.objects.filter(parameter_id=analysis.parameter_id, in_window=True)
    before = same.filter(taken_at__lt=analysis.taken_at).order_by("-taken_at", "-pk").first()
    after = same.filter(taken_at__gt=analysis.taken_at).order_by("taken_at", "pk").first()
    since = before.taken_at if before else analysis.tank.made_up_at
    uses = TankUse.objects.filter(tank_id=analysis.tank_id).select_related(
        "lot_step__lot", "lot_step__work_center"
    )
    if since is not None:
        uses = uses.filter(used_at__gt=since)
    if after is not None:
        uses = uses.filter(used_at__lt=after.taken_at)
    return Exposure(
        analysis,
        since,
        before,
        after.taken_at if after else None,
        after,
        list(uses.order_by("used_at", "pk")),
    )


def turnovers(tank: Tank) -> bath.Turnovers | None:
    """Electroless nickel age: nickel replenished (confirmed additions to the nickel
    parameter since the last make-up, litres × replenisher strength) in metal turnovers."""
    if tank.makeup_nickel_g_per_l is None:
        return None
    events = TankEvent.objects.filter(
        tank=tank,
        kind=TankEvent.Kind.ADDITION,
        confirmed_at__isnull=False,
        parameter__measure="mass_concentration",
        parameter__code__startswith="nickel",
    ).select_related("parameter")
    if tank.made_up_at is not None:
        events = events.filter(entered_at__gte=tank.made_up_at)
    grams = 0.0
    for e in events:
        strength = e.parameter.stock_strength if e.parameter else None
        grams += e.add_g + e.add_l * (strength or 0.0)
    return bath.metal_turnovers(
        grams, tank.volume_l, tank.makeup_nickel_g_per_l, dump_at=tank.dump_at_turnovers or 5.0
    )


@dataclass(frozen=True)
class HistoryRow:
    at: datetime
    kind: str
    text: str
    who: str
    in_window: bool | None = None
    analysis: Analysis | None = None
    event: TankEvent | None = None


def tank_history(tank: Tank, limit: int = 200) -> list[HistoryRow]:
    """Analyses and events of a tank, newest first (bounded)."""
    rows: list[HistoryRow] = []
    for a in tank.analyses.select_related("parameter", "analyst")[:limit]:
        rows.append(
            HistoryRow(
                a.taken_at,
                "analysis",
                f"{a.parameter.name}: {fmt(a.parameter, a.value)}"
                + ("" if a.in_window else " — OUT OF WINDOW"),
                a.analyst.printed_name,
                a.in_window,
                analysis=a,
            )
        )
    for e in tank.events.select_related("parameter", "entered_by", "confirmed_by")[:limit]:
        parts = []
        if e.dump_l:
            parts.append(f"dumped {e.dump_l:.3g} L")
        if e.add_l:
            parts.append(
                f"added {e.add_l:.3g} L"
                + (
                    f" of {e.parameter.stock_name}"
                    if e.parameter and e.parameter.stock_name
                    else ""
                )
            )
        if e.add_g:
            parts.append(f"added {e.add_g:.4g} g")
        if e.water_l:
            parts.append(f"water {e.water_l:.3g} L")
        if e.amp_hours is not None:
            parts.append(f"counter {e.amp_hours:.0f} Ah")
        what = e.get_kind_display() + (f" ({e.parameter.name})" if e.parameter else "")
        who = e.entered_by.printed_name
        if e.kind == TankEvent.Kind.ADDITION:
            who += (
                f"; confirmed by {e.confirmed_by.printed_name}"
                if e.confirmed_by
                else "; awaiting an engineer's confirmation"
            )
        rows.append(
            HistoryRow(e.entered_at, e.kind, f"{what}: {', '.join(parts) or e.note}", who, event=e)
        )
    rows.sort(key=lambda r: r.at, reverse=True)
    return rows[:limit]


@dataclass(frozen=True)
class Coverage:
    """A wet step, the tank it ran in and the analyses that covered it."""

    step: LotStep
    tank: Tank
    used_at: datetime
    analyses: list[tuple[PlanParameter, Analysis | None]]

    @property
    def all_in_window(self) -> bool:
        return all(a is not None and a.in_window for _, a in self.analyses)


def bath_coverage(lot: Lot) -> list[Coverage]:
    """For each wet step of a lot: its tank and, per plan parameter, the last analysis
    taken before the step ran (the one that covered it)."""
    uses = list(
        TankUse.objects.filter(lot_step__lot=lot)
        .select_related("tank", "lot_step")
        .order_by("lot_step__position", "tank__code")
    )
    if not uses:
        return []
    params = list(PlanParameter.objects.filter(tank__in={u.tank_id for u in uses}))
    out = []
    for use in uses:
        covered = []
        for p in (p for p in params if p.tank_id == use.tank_id):
            last = (
                Analysis.objects.filter(parameter=p, taken_at__lte=use.used_at)
                .order_by("-taken_at", "-pk")
                .first()
            )
            covered.append((p, last))
        out.append(Coverage(use.lot_step, use.tank, use.used_at, covered))
    return out


def design_area(step: LotStep) -> tuple[float, str] | None:
    """The plated area per panel from the job's design data, if the part has one."""

    job = Job.objects.filter(panels__lot_id=step.lot_id).order_by("pk").first()
    if job is None:
        return None
    area = PlatedArea.objects.filter(part_revision_id=job.part_revision_id).first()
    return (area.area_dm2, area.source) if area else None
