"""`manage.py chemistry addition|plating ...`: the bath and plating calculators for outside checks.

Thin wrappers around shopfloor.core.chemistry. Bad input exits with status 2 and one
message on stderr (what was wrong, what is allowed); never a traceback. The results are
advice: a qualified person confirms them against the site's procedures and the SDS.
"""

from __future__ import annotations

import json
from argparse import ArgumentParser
from dataclasses import asdict
from typing import Any

from django.core.management.base import BaseCommand, CommandError

from shopfloor.core import units
from shopfloor.core.chemistry import bath, plating
from shopfloor.core.chemistry.constants import METALS
from shopfloor.core.chemistry.errors import ChemistryInputError

EXIT_BAD_INPUT = 2
CAUTION = (
    "Advice only: a qualified person confirms it. Wear the protective equipment the SDS "
    "names, add acid to water (never water to acid), ventilate; follow the site's "
    "procedures, safety data sheets and local codes."
)


def efficiency_fraction(raw: float) -> float:
    """0.95 or 95 both mean 95 %: values above 1 (up to 100) are read as percent."""
    if 1 < raw <= 100:
        return raw / 100.0
    return raw


def concentration_measure(unit: str) -> str:
    """The bath measure a concentration unit belongs to (mass or volume concentration)."""
    for measure in ("mass_concentration", "volume_concentration"):
        try:
            units.bath_to_canonical(measure, 1, unit)
        except units.UnitError:
            continue
        return measure
    allowed = units.bath_allowed_units("mass_concentration") + units.bath_allowed_units(
        "volume_concentration"
    )
    raise CommandError(
        f"unit {unit!r} is not a concentration unit; allowed: {', '.join(allowed)}",
        returncode=EXIT_BAD_INPUT,
    )


class Command(BaseCommand):
    help = "Bath addition and plating (Faraday) calculators; results are advice to confirm."

    def add_arguments(self, parser: ArgumentParser) -> None:
        sub = parser.add_subparsers(dest="action", required=True, title="actions")
        add = sub.add_parser(
            "addition",
            help="litres of concentrate that bring a bath parameter to target (mass balance)",
        )
        add.add_argument("--volume-l", type=float, required=True, help="bath volume now, L")
        add.add_argument("--measured", type=float, required=True, help="measured value")
        add.add_argument("--target", type=float, required=True, help="target value")
        add.add_argument("--stock", type=float, required=True, help="concentrate strength")
        add.add_argument(
            "--unit", default="g/L", help="unit of measured, target and stock (g/L, mL/L, ...)"
        )
        add.add_argument(
            "--max-volume-l",
            type=float,
            default=None,
            help="tank working volume, L: an addition that would overflow dumps first",
        )
        add.add_argument("--format", choices=("json", "text"), default="text")

        plate = sub.add_parser(
            "plating", help="Faraday's law: thickness from current density and time, or back"
        )
        plate.add_argument("--metal", required=True, choices=sorted(METALS))
        plate.add_argument("--current-density-asd", type=float, help="current density, A/dm²")
        plate.add_argument("--minutes", type=float, help="plating time, min")
        plate.add_argument(
            "--thickness-um", type=float, help="target thickness, µm (gives the inverse)"
        )
        plate.add_argument(
            "--efficiency",
            type=float,
            default=1.0,
            help="cathode efficiency: a fraction (0.95) or percent (95); default 1",
        )
        plate.add_argument("--area-dm2", type=float, help="plated area, dm² (adds the amps)")
        plate.add_argument("--format", choices=("json", "text"), default="text")

    def handle(self, *args: Any, **options: Any) -> None:
        try:
            if options["action"] == "addition":
                result = self._addition(options)
            else:
                result = self._plating(options)
        except (ChemistryInputError, units.UnitError) as exc:
            raise CommandError(str(exc), returncode=EXIT_BAD_INPUT) from exc
        if options["format"] == "json":
            self.stdout.write(json.dumps(result, ensure_ascii=False))
        else:
            for key, value in result.items():
                shown = f"{value:.4g}" if isinstance(value, float) else value
                self.stdout.write(f"{key}: {shown}")

    def _addition(self, o: dict[str, Any]) -> dict[str, Any]:
        unit = o["unit"]
        measure = concentration_measure(unit)
        measured = units.bath_to_canonical(measure, o["measured"], unit)
        target = units.bath_to_canonical(measure, o["target"], unit)
        stock = units.bath_to_canonical(measure, o["stock"], unit)
        advice = bath.concentrate_addition(
            o["volume_l"], measured, target, stock, max_volume_l=o["max_volume_l"]
        )
        out = asdict(advice)
        new_value = units.bath_from_canonical(measure, advice.new_value, unit)
        return {
            "add_l": out.pop("add_l"),
            "new_volume_l": out.pop("new_volume_l"),
            **{k: v for k, v in out.items() if k not in ("new_value", "notes")},
            "new_value": new_value,
            "unit": unit,
            "notes": list(advice.notes),
            "caution": CAUTION,
        }

    def _plating(self, o: dict[str, Any]) -> dict[str, Any]:
        metal = o["metal"]
        eff = efficiency_fraction(o["efficiency"])
        j, minutes, target = o["current_density_asd"], o["minutes"], o["thickness_um"]
        if target is None:
            if j is None or minutes is None:
                raise CommandError(
                    "give --current-density-asd and --minutes (for the thickness), or "
                    "--thickness-um with one of them (for the other)",
                    returncode=EXIT_BAD_INPUT,
                )
            result: dict[str, Any] = {
                "thickness_um": plating.thickness_um(metal, j, minutes, eff),
                "current_density_asd": j,
                "minutes": minutes,
            }
        elif j is not None and minutes is None:
            result = {
                "minutes": plating.minutes_for(metal, target, j, eff),
                "thickness_um": target,
                "current_density_asd": j,
            }
        elif minutes is not None and j is None:
            result = {
                "current_density_asd": plating.current_density_for(metal, target, minutes, eff),
                "thickness_um": target,
                "minutes": minutes,
            }
        else:
            raise CommandError(
                "with --thickness-um give exactly one of --current-density-asd (gives the "
                "minutes) or --minutes (gives the current density)",
                returncode=EXIT_BAD_INPUT,
            )
        result["efficiency"] = plating.efficiency(eff)
        result["metal"] = metal
        if o["area_dm2"] is not None:
            area = plating.setup_for(
                metal,
                area_dm2=o["area_dm2"],
                current_density_asd=result["current_density_asd"],
                target_um=result["thickness_um"],
                eff=eff,
            ).area_dm2
            result["area_dm2"] = area
            result["current_a"] = result["current_density_asd"] * area
        return result
