"""Set-up for the bath chemistry tests: a lab technician and an acid copper tank."""

from __future__ import annotations

from typing import Any

from shopfloor.chemistry.models import PlanParameter, Tank
from shopfloor.plant.models import Role, WorkCenter
from tests.factories import make_person


def lab_tech() -> Any:
    return make_person(Role.LAB_TECHNICIAN, "1010", "Lia Lab")


def copper_tank(**extra: Any) -> Tank:
    """4000 L acid copper at the plating line with a copper sulfate and a chloride row.
    Windows: common practice (a supplier sheet's typical range), as in the demo."""
    tank = Tank.objects.create(
        work_center=WorkCenter.objects.get(code="plating"),
        code="T-CU",
        name="Acid copper",
        kind="acid_copper",
        volume_l=4000,
        max_volume_l=4200,
        step_codes=["pattern_plate_copper", "panel_plate"],
        **extra,
    )
    PlanParameter.objects.create(
        tank=tank, code="copper_sulfate", name="Copper sulfate", measure="mass_concentration",
        unit="g/L", low=60, target=75, high=90, source="common practice", frequency="daily",
        method="EDTA titration", stock_strength=300, stock_name="copper sulfate solution",
    )  # fmt: skip
    PlanParameter.objects.create(
        tank=tank, code="chloride", name="Chloride", measure="mass_concentration", unit="mg/L",
        low=0.040, target=0.060, high=0.080, source="common practice", frequency="per_shift",
        method="silver nitrate titration", stock_strength=428, position=1,
    )  # fmt: skip
    return tank
