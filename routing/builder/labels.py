"""Labels people read for the process library's parameter and quantity keys.

Why this module exists: the library and the builder name things by code
(`current_density_a_per_dm2`, `stacks`, `hole_wall_copper`) and pages used to show those
codes with the underscores replaced ("Current Density A Per Dm2"). This is the one table
of what a person reads instead: a label written by hand and the unit symbol as the trade
writes it (µm, A/dm², °C). The tablet, the traveller, the lot history and the API's
display fields all read it. A new parameter key in the library gets a row here
(`tests/routing/test_labels.py` fails until it has one).

Pure Python (no Django). Labels are English source text marked with `gettext_noop` (a
local no-op, so makemessages finds them); Django code translates them when it shows them
(`shopfloor.floor.words`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any, Final

__all__ = [
    "PARAMETER_LABELS",
    "QUANTITY_LABELS",
    "Label",
    "parameter_label",
    "parameter_rows",
    "parameter_value",
    "quantity_label",
    "quantity_unit",
]


def gettext_noop(text: str) -> str:
    """Marks `text` for the translation catalogue; returns it unchanged."""
    return text


@dataclass(frozen=True)
class Label:
    """What a person reads for one key: the words and the unit symbol (may be empty)."""

    text: str
    unit: str = ""


_ = gettext_noop

#: Step parameters: every key the built-in library, the routing builder and the plating
#: calculator write (the test lists them). Units as the trade writes them.
PARAMETER_LABELS: Final[dict[str, Label]] = {
    "air_knife_temperature_c": Label(_("Air knife temperature"), "°C"),
    "backup": Label(_("Backup board")),
    "bevel_angle_deg": Label(_("Bevel angle"), "°"),
    "blade_angle_deg": Label(_("Blade angle"), "°"),
    "cathode_efficiency": Label(_("Cathode efficiency")),
    "colour": Label(_("Colour")),
    "conveyor_speed_m_per_min": Label(_("Conveyor speed"), "m/min"),
    "current_density_a_per_dm2": Label(_("Current density"), "A/dm²"),
    "cycle_profile": Label(_("Press cycle")),
    "developer": Label(_("Developer")),
    "drill_diameter_mm": Label(_("Drill diameter"), "mm"),
    "dwell_min": Label(_("Dwell time"), "min"),
    "dwell_s": Label(_("Dwell time"), "s"),
    "entry": Label(_("Entry board")),
    "etchant": Label(_("Etchant")),
    "exposure_mj_per_cm2": Label(_("Exposure energy"), "mJ/cm²"),
    "finished_hole_mm": Label(_("Smallest finished hole"), "mm"),
    "laser_hole_mm": Label(_("Laser hole diameter"), "mm"),
    "layers": Label(_("Layers")),
    "max_temperature_c": Label(_("Maximum temperature"), "°C"),
    "method": Label(_("Method")),
    "microetch_um": Label(_("Micro-etch depth"), "µm"),
    "permanganate_temperature_c": Label(_("Permanganate temperature"), "°C"),
    "plated": Label(_("Plated holes")),
    "plated_area_dm2": Label(_("Plated area"), "dm²"),
    "plating_allowance_mm": Label(_("Plating allowance"), "mm"),
    "pressure_kpa": Label(_("Pressure"), "kPa"),
    "protect_gold_fingers": Label(_("Protect gold fingers")),
    "queue_time_until": Label(_("Queue time limit until")),
    "rectifier_current_a": Label(_("Rectifier current"), "A"),
    "sides": Label(_("Sides")),
    "solder_temperature_c": Label(_("Solder temperature"), "°C"),
    "spindle_rpm": Label(_("Spindle speed"), "rpm"),
    "stacks": Label(_("Layer stacks")),
    "stripper": Label(_("Stripper")),
    "target_thickness_um": Label(_("Target thickness"), "µm"),
    "temperature_c": Label(_("Temperature"), "°C"),
    "time_min": Label(_("Time"), "min"),
    "time_s": Label(_("Time"), "s"),
    "vias": Label(_("Vias")),
}

#: Measured quantities (the keys of `routing.builder.windows.QUANTITIES`), short enough
#: for a tablet heading; the unit is the stored one (µm, mm, %, none for counts).
QUANTITY_LABELS: Final[dict[str, Label]] = {
    "hole_wall_copper": Label(_("Hole wall copper"), "µm"),
    "surface_copper": Label(_("Surface copper"), "µm"),
    "nickel_thickness": Label(_("Nickel thickness"), "µm"),
    "gold_thickness": Label(_("Gold thickness"), "µm"),
    "palladium_thickness": Label(_("Palladium thickness"), "µm"),
    "silver_thickness": Label(_("Silver thickness"), "µm"),
    "tin_thickness": Label(_("Tin thickness"), "µm"),
    "osp_thickness": Label(_("OSP thickness"), "µm"),
    "mask_registration": Label(_("Solder mask registration"), "µm"),
    "mask_thickness": Label(_("Solder mask thickness"), "µm"),
    "conductor_width": Label(_("Conductor width"), "µm"),
    "board_thickness": Label(_("Board thickness"), "mm"),
    "vscore_web": Label(_("V-score remaining web"), "mm"),
    "vscore_depth": Label(_("V-score depth"), "mm"),
    "finished_hole_diameter": Label(_("Finished hole diameter"), "mm"),
    "bow_twist": Label(_("Bow and twist"), "%"),
    "aoi_defects": Label(_("AOI defects")),
    "etest_opens": Label(_("Electrical test opens")),
    "etest_shorts": Label(_("Electrical test shorts")),
    "etest_failed": Label(_("Boards failed at electrical test")),
}

YES: Final = _("yes")
NO: Final = _("no")
del _

#: Unit suffixes of keys a process engineer adds without a label row (a fallback only:
#: the test keeps the built-in library fully labelled).
_SUFFIX_UNITS: Final = (
    ("_a_per_dm2", "A/dm²"),
    ("_m_per_min", "m/min"),
    ("_mj_per_cm2", "mJ/cm²"),
    ("_dm2", "dm²"),
    ("_um", "µm"),
    ("_mm", "mm"),
    ("_kpa", "kPa"),
    ("_rpm", "rpm"),
    ("_deg", "°"),
    ("_min", "min"),
    ("_c", "°C"),
    ("_s", "s"),
    ("_a", "A"),
)

Translate = Callable[[str], str]


def _same(text: str) -> str:
    return text


def _from_key(key: str) -> Label:
    for suffix, unit in _SUFFIX_UNITS:
        words = key[: -len(suffix)].replace("_", " ").strip()
        if key.endswith(suffix) and words and not words.endswith((" per", " l")):
            return Label(words[:1].upper() + words[1:], unit)
    words = key.replace("_", " ").strip()
    return Label(words[:1].upper() + words[1:])


def parameter_label(key: str) -> Label:
    """The label of a step parameter; a key without a row is read from its spelling."""
    return PARAMETER_LABELS.get(key) or _from_key(key)


def quantity_label(quantity: str) -> str:
    """The heading of a measured quantity ('Hole wall copper')."""
    known = QUANTITY_LABELS.get(quantity)
    return known.text if known else _from_key(quantity).text


def quantity_unit(quantity: str) -> str:
    """The stored unit's symbol for a quantity ('µm'; '' for counts)."""
    known = QUANTITY_LABELS.get(quantity)
    return known.unit if known else ""


def _number(value: float, decimal: str) -> str:
    if not math.isfinite(value):
        return str(value)
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    text = "0" if text in {"-0", ""} else text
    return text.replace(".", decimal)


def parameter_value(key: str, value: Any, *, tr: Translate = _same, decimal: str = ".") -> str:
    """A parameter's value as text with its unit: '2 A/dm²', 'L3-L6, L1-L8', 'yes'."""
    unit = parameter_label(key).unit
    if isinstance(value, bool):
        return tr(YES) if value else tr(NO)
    if isinstance(value, int | float):
        text = _number(float(value), decimal)
        return f"{text} {unit}" if unit and unit != "°" else f"{text}{unit}"
    if isinstance(value, list | tuple):
        return ", ".join(parameter_value(key, v, tr=tr, decimal=decimal) for v in value)
    if value is None:
        return "—"
    return str(value)


def parameter_rows(
    params: Mapping[str, Any], *, tr: Translate = _same, decimal: str = "."
) -> list[tuple[str, str]]:
    """(label, value with unit) for each parameter, in the library's order."""
    return [
        (tr(parameter_label(k).text), parameter_value(k, v, tr=tr, decimal=decimal))
        for k, v in params.items()
    ]
