# ruff: noqa: E501 -- the demo tank table reads best as one parameter per two lines
"""The demo shop's baths: plating, etch and ENIG lines with a week of analyses and additions.

Invented scenario (no real company, person or product). Windows are typical ranges of the
kind a supplier's sheet gives for each bath type, marked common practice and recalled
from memory; a real site enters its own. Loaded through the same services as the lab
pages. Safe to run twice: tanks are created once, their history only when they have none.

Order matters, and load_demo keeps it: `ensure_tanks` runs before the demo lots are
advanced (so starting a wet step records the tank it ran in), `after_jobs` runs after:
it backfills tank use for lots started by an older load, computes the plating steps'
amps and minutes from the design area, and records one out-of-window acid copper
analysis, which lists the lots that ran in that tank since the last in-window one.
"""

from __future__ import annotations

import datetime as dt
import zlib
from typing import Any

from django.utils import timezone

from shopfloor.chemistry import services
from shopfloor.chemistry.models import (
    Analysis,
    PlanParameter,
    PlatedArea,
    PlatingSetup,
    Tank,
    TankEvent,
)
from shopfloor.core import units
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import PartRevision, Person, WorkCenter

CP = "common practice: typical range of a supplier's sheet for this bath type (from memory)"

# (code, name, work center, kind, litres, step codes, extra, parameters)
# parameter: (code, name, measure, unit, low, target, high, frequency, every_ah, method,
#             stock (in unit) or None, stock name, dose mL/kAh or None); values in `unit`.
TANKS: list[tuple[Any, ...]] = [
    (
        "PL-CU1", "Acid copper 1", "plating", "acid_copper", 4000.0,
        ["panel_plate", "pattern_plate_copper"], {"amp_hours": 52_000.0},
        [
            ("copper_sulfate", "Copper sulfate (pentahydrate)", "mass_concentration", "g/L",
             60, 75, 90, "daily", None, "EDTA titration", 300, "copper sulfate solution 300 g/L", None),
            ("sulfuric_acid", "Sulfuric acid", "mass_concentration", "g/L",
             180, 200, 220, "daily", None, "acid-base titration", 1766,
             "sulfuric acid 96 % (1766 g/L)", None),
            ("chloride", "Chloride", "mass_concentration", "mg/L",
             40, 60, 80, "daily", None, "silver nitrate titration", 428000,
             "hydrochloric acid 37 % (428 g/L chloride)", None),
            ("brightener", "Brightener", "volume_concentration", "mL/L",
             0.5, 1.0, 1.5, "amp_hours", 2000.0, "cyclic voltammetric stripping",
             1000, "brightener, neat", 150.0),
            ("temperature", "Temperature", "temperature", "°C",
             20, 24, 28, "per_shift", None, "thermometer", None, "", None),
        ],
    ),
    (
        "PL-SN1", "Tin etch resist", "plating", "tin", 800.0, ["pattern_plate_tin"], {},
        [
            ("tin", "Stannous tin", "mass_concentration", "g/L",
             15, 20, 25, "daily", None, "iodometric titration", 300, "stannous tin concentrate 300 g/L", None),
            ("sulfuric_acid", "Sulfuric acid", "volume_concentration", "% v/v",
             8, 10, 12, "daily", None, "acid-base titration", 100, "sulfuric acid 96 %", None),
        ],
    ),
    (
        "WP-ELC1", "Electroless copper", "wet_process", "electroless_copper", 600.0,
        ["hole_metallisation"], {},
        [
            ("copper", "Copper", "mass_concentration", "g/L",
             2.0, 2.5, 3.0, "per_shift", None, "EDTA titration", 60, "copper replenisher 60 g/L", None),
            ("sodium_hydroxide", "Sodium hydroxide", "mass_concentration", "g/L",
             8, 10, 12, "per_shift", None, "acid-base titration", 500, "sodium hydroxide 50 %", None),
        ],
    ),
    (
        "OW-ETCH1", "Ammoniacal etchant", "outer_wet", "ammoniacal_etch", 1200.0,
        ["outer_etch"], {},
        [
            ("copper", "Copper", "mass_concentration", "g/L",
             140, 150, 160, "per_shift", None, "EDTA titration", None, "", None),
            ("ph", "pH", "ph", "pH", 8.0, 8.4, 8.8, "per_shift", None, "pH meter", None, "", None),
            ("specific_gravity", "Specific gravity", "specific_gravity", "SG",
             1.19, 1.21, 1.23, "per_shift", None, "hydrometer", None, "", None),
        ],
    ),
    (
        "OW-DEV1", "Resist developer", "outer_wet", "developer", 500.0, ["outer_develop"], {},
        [
            ("sodium_carbonate", "Sodium carbonate", "mass_concentration", "% w/v",
             0.8, 1.0, 1.2, "per_shift", None, "acid-base titration", 20, "sodium carbonate 20 % w/v", None),
        ],
    ),
    (
        "OW-STRIP1", "Resist stripper", "outer_wet", "stripper", 500.0, ["outer_resist_strip"], {},
        [
            ("sodium_hydroxide", "Sodium hydroxide", "mass_concentration", "% w/v",
             2.5, 3.0, 3.5, "daily", None, "acid-base titration", 50, "sodium hydroxide 50 %", None),
        ],
    ),
    (
        "FL-NI1", "Electroless nickel", "finish_line", "electroless_nickel", 300.0,
        ["enig_nickel"], {"makeup_nickel_g_per_l": 5.0, "dump_at_turnovers": 5.0},
        [
            ("nickel", "Nickel", "mass_concentration", "g/L",
             4.5, 5.0, 5.5, "per_shift", None, "EDTA titration", 90, "nickel replenisher 90 g/L", None),
            ("ph", "pH", "ph", "pH", 4.5, 4.7, 4.9, "per_shift", None, "pH meter", None, "", None),
            ("temperature", "Temperature", "temperature", "°C",
             82, 85, 88, "per_shift", None, "thermometer", None, "", None),
        ],
    ),
    (
        "FL-AU1", "Immersion gold", "finish_line", "immersion_gold", 150.0, ["enig_gold"], {},
        [
            ("gold", "Gold", "mass_concentration", "g/L",
             1.5, 2.0, 2.5, "daily", None, "atomic absorption", 20, "gold replenisher 20 g/L", None),
            ("temperature", "Temperature", "temperature", "°C",
             80, 84, 88, "per_shift", None, "thermometer", None, "", None),
        ],
    ),
]  # fmt: skip

#: Plated copper area per panel (both sides), invented per demo part: "design data".
DESIGN_AREA_DM2 = 21.5


def _canon(measure: str, value: float, unit: str) -> float:
    return units.bath_to_canonical(measure, value, unit)


def ensure_tanks() -> int:
    """Create the demo tanks and plans (missing ones only). Returns how many were created."""
    created = 0
    centers = {wc.code: wc for wc in WorkCenter.objects.all()}
    for code, name, wc_code, kind, litres, steps, extra, params in TANKS:
        if wc_code not in centers or Tank.objects.filter(code=code).exists():
            continue
        tank = Tank.objects.create(
            code=code,
            name=name,
            work_center=centers[wc_code],
            kind=kind,
            volume_l=litres,
            max_volume_l=round(litres * 1.05),  # the demo's tanks have 5 % headroom
            step_codes=steps,
            created_at=timezone.now() - dt.timedelta(days=8),
            made_up_at=timezone.now() - dt.timedelta(days=8),
            **extra,
        )
        for i, p in enumerate(params):
            pcode, pname, measure, unit, lo, tgt, hi, freq, every, method, stock, sname, dose = p
            PlanParameter.objects.create(
                tank=tank,
                code=pcode,
                name=pname,
                measure=measure,
                unit=unit,
                low=_canon(measure, lo, unit),
                target=_canon(measure, tgt, unit),
                high=_canon(measure, hi, unit),
                source=CP,
                frequency=freq,
                every_amp_hours=every,
                method=method,
                stock_strength=None if stock is None else _canon(measure, stock, unit),
                stock_name=sname,
                dose_ml_per_kah=dose,
                position=i,
            )
        created += 1
    for revision in PartRevision.objects.all():
        PlatedArea.objects.get_or_create(
            part_revision=revision,
            defaults={"area_dm2": DESIGN_AREA_DM2, "source": "design data (demo layout)"},
        )
    return created


def _wobble(key: str, i: int) -> float:
    """Deterministic -1..1 so loading twice gives the same week."""
    return ((zlib.crc32(f"{key}:{i}".encode()) % 2001) - 1000) / 1000.0


def history(lab: Person, engineer: Person, pin: str) -> int:
    """A week of in-window analyses (and the additions that followed low ones) for every
    tank without analyses. Returns the number of analyses recorded."""
    now = timezone.now()
    count = 0
    for tank in Tank.objects.all():
        if tank.analyses.exists():
            continue
        # The last analysis 2 h ago (nothing due yet), except: the stripper's daily
        # analysis was missed (overdue, alerted) and the electroless copper's shift one is due.
        lag = {"OW-STRIP1": 33.0, "WP-ELC1": 8.5}.get(tank.code, 2.0)
        for param in tank.parameters.all():
            hours = 8 if param.frequency == "per_shift" else 24
            if param.frequency == "amp_hours":
                hours = 12
            steps = int(7 * 24 / hours)
            span = param.high - param.low
            for i in range(steps):
                taken = now - dt.timedelta(hours=(steps - 1 - i) * hours + lag)
                # drifts down inside the window, then an addition brings it back up
                value = param.target + span * (0.25 * _wobble(param.code, i) - 0.08 * (i % 4))
                if tank.makeup_nickel_g_per_l and param.code == "nickel":
                    # electroless nickel plates out fast: low every shift, topped up each time
                    value = param.target - span * (0.4 + 0.1 * _wobble(param.code, i))
                value = min(max(value, param.low + span * 0.05), param.high - span * 0.05)
                amp_hours = None
                if tank.amp_hours is not None:
                    amp_hours = tank.amp_hours - (steps - i) * 900.0
                services.record_analysis(
                    person=lab,
                    tank_code=tank.code,
                    data=services.AnalysisInput(
                        parameter=param.code,
                        value=units.bath_from_canonical(param.measure, value, param.unit),
                        unit=param.unit,
                        taken_at=taken,
                        amp_hours=amp_hours,
                        note="",
                    ),
                )
                count += 1
                if param.dose_ml_per_kah and amp_hours is not None:
                    _dose(tank, param, lab, pin, amp_hours, taken)
                top_up = i % 4 == 3 or (tank.makeup_nickel_g_per_l and param.code == "nickel")
                if top_up and param.stock_strength:
                    _addition(tank, param, lab, engineer, pin, taken)
    return count


def _addition(
    tank: Tank,
    param: PlanParameter,
    lab: Person,
    engineer: Person,
    pin: str,
    at: dt.datetime,
) -> None:
    a = services.advise_addition(tank=tank, parameter=param.code).advice
    if a.action not in ("add", "dump_then_add"):
        return
    event = services.record_event(
        person=lab,
        tank_code=tank.code,
        kind=TankEvent.Kind.ADDITION,
        pin=pin,
        parameter=param.code,
        analysis_id=param.last_analysis_id,
        add_l=round(a.add_l, 2),
        dump_l=round(a.dump_l, 2),
        advice={"action": a.action, "add_l": a.add_l, "dump_l": a.dump_l},
    )
    services.confirm_event(person=engineer, event_id=event.pk, pin=pin)
    later = at + dt.timedelta(minutes=40)
    TankEvent.objects.filter(pk=event.pk).update(
        entered_at=at + dt.timedelta(minutes=20), confirmed_at=later
    )


def _dose(
    tank: Tank, param: PlanParameter, lab: Person, pin: str, amp_hours: float, at: dt.datetime
) -> None:
    """The additive dosed by charge at the counter reading taken with the analysis."""
    last = TankEvent.objects.filter(tank=tank, parameter=param, kind=TankEvent.Kind.DOSE).first()
    ml = (
        0.0
        if last is None or last.amp_hours is None
        else ((amp_hours - last.amp_hours) * (param.dose_ml_per_kah or 0.0) / 1000.0)
    )
    event = services.record_event(
        person=lab, tank_code=tank.code, kind=TankEvent.Kind.DOSE, pin=pin,
        parameter=param.code, add_l=round(ml / 1000.0, 4), amp_hours=amp_hours,
        note="amp-hour dose" if ml else "dosing counter start",
    )  # fmt: skip
    TankEvent.objects.filter(pk=event.pk).update(
        entered_at=at + dt.timedelta(minutes=10), confirmed_at=at + dt.timedelta(minutes=10)
    )


def after_jobs(lab: Person, engineer: Person, pin: str) -> dict[str, int]:
    """Backfill tank use, compute plating setups, and record the out-of-window analysis."""
    for step in LotStep.objects.filter(started_at__isnull=False).select_related("work_center"):
        services.record_tank_use(step, step.started_at)
    computed = 0
    for step in LotStep.objects.exclude(status=LotStep.Status.DONE):
        if services.base_code(step.code) not in services.PLATING_STEPS:
            continue
        if not PlatingSetup.objects.filter(lot_step=step).exists():
            services.compute_plating(person=engineer, lot_step_id=step.pk)
            computed += 1
    bad = 0
    tank = Tank.objects.filter(code="PL-CU1").first()
    if tank is not None and not Analysis.objects.filter(tank=tank, in_window=False).exists():
        # The lab finds the acid copper low in chloride: out of window (below 40 mg/L).
        services.record_analysis(
            person=lab,
            tank_code=tank.code,
            data=services.AnalysisInput(
                parameter="chloride", value="31", unit="mg/L", note="sampled after a drag-out"
            ),
        )
        bad = 1
    services.check_analyses()  # what beat does every few minutes: due and overdue alerts
    return {"plating_setups": computed, "out_of_window": bad}
