"""Panelisation: how many production panels a job needs, how they split into lots, and
whether several jobs' images may share one panel.

Pure functions on plain data (no Django), so the planning rules carry their own tests.

Why these rules:

- Panels needed = ceil(quantity / boards per panel x (1 + scrap allowance)). A fab
  starts more boards than ordered because some are lost along the way; the allowance
  is the expected loss (common practice: a few per cent to ten per cent, more for a
  new or difficult part), set per part or for the whole site.
- A lot is the panels that travel together; plating racks, press openings and the
  etcher's conveyor load limit it, so a site sets a maximum panels per lot and a release
  spreads its panels over as few lots as that allows, as evenly as possible (a lot of
  12 and a lot of 1 would make the second lot's set-ups cost as much as the first's).
- Several jobs' images may share a panel only when the panel can be built one way:
  the same stack-up (layer count, copper, dielectric build), the same surface finish
  and the same finished thickness. The panel then follows the strictest IPC class among
  the jobs, because a class 3 board on a class 2 routing would miss class 3 windows
  (IPC-6012 acceptance differs by class; common practice).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from decimal import ROUND_CEILING, Decimal
from typing import Any, Final

__all__ = [
    "MAX_BOARDS_PER_PANEL",
    "MAX_SCRAP_ALLOWANCE_PCT",
    "SharedImage",
    "incompatibilities",
    "lot_sizes",
    "makeup_panels",
    "panels_needed",
    "strictest_class",
]

#: Sanity ceiling: a production panel of 18 x 24 in carries a few hundred tiny boards
#: at most; anything above this is a typing error (shop practice).
MAX_BOARDS_PER_PANEL: Final = 2000
#: An allowance above this is more likely a typo (50 for 5.0) than a plan.
MAX_SCRAP_ALLOWANCE_PCT: Final = 100


def panels_needed(quantity: int, boards_per_panel: int, scrap_allowance_pct: float) -> int:
    """ceil(quantity / boards_per_panel x (1 + allowance)), computed in decimal.

    Decimal arithmetic, because in binary floating point 25 / 3 x 1.08 is
    9.000000000000002, not 9: a float ceiling would start a panel more than the rule
    asks for.
    """
    if quantity < 1:
        raise ValueError("quantity must be at least 1")
    if not 1 <= boards_per_panel <= MAX_BOARDS_PER_PANEL:
        raise ValueError(f"boards per panel must be 1 to {MAX_BOARDS_PER_PANEL}")
    if not 0 <= scrap_allowance_pct <= MAX_SCRAP_ALLOWANCE_PCT:
        raise ValueError(f"scrap allowance must be 0 to {MAX_SCRAP_ALLOWANCE_PCT} %")
    factor = 1 + Decimal(str(scrap_allowance_pct)) / 100
    exact = Decimal(quantity) / Decimal(boards_per_panel) * factor
    return int(exact.to_integral_value(rounding=ROUND_CEILING))


def makeup_panels(shortfall: int, boards_per_panel: int, scrap_allowance_pct: float) -> int:
    """Panels to start so that the boards still missing are covered, allowance included."""
    if shortfall < 1:
        return 0
    return panels_needed(shortfall, boards_per_panel, scrap_allowance_pct)


def lot_sizes(panels: int, max_per_lot: int) -> list[int]:
    """Split panels into the fewest lots of at most `max_per_lot`, sizes differing by <= 1.

    Larger lots first: 14 panels at 12 per lot -> [7, 7]; 25 at 12 -> [9, 8, 8].
    """
    if panels < 1:
        raise ValueError("at least one panel")
    if max_per_lot < 1:
        raise ValueError("a lot holds at least one panel")
    lots = math.ceil(panels / max_per_lot)
    base, extra = divmod(panels, lots)
    return [base + 1 if i < extra else base for i in range(lots)]


@dataclass(frozen=True)
class SharedImage:
    """One job's part of a panel: its label, IPC class and build spec (a JSON dict)."""

    label: str
    ipc_class: int
    spec: Mapping[str, Any]


def _stackup_signature(spec: Mapping[str, Any]) -> tuple[Any, ...]:
    """What must match for one press cycle to build every image: the copper and
    dielectric build, layer by layer when given, else layer count and copper weights."""
    stack = spec.get("stackup")
    if isinstance(stack, Sequence) and stack:
        rows = []
        for row in stack:
            if isinstance(row, Mapping):
                rows.append(
                    (
                        str(row.get("kind", "")).lower(),
                        _num(row.get("thickness_um")),
                        str(row.get("material", "")).strip().lower(),
                    )
                )
        return ("layers", spec.get("layers"), "stack", tuple(rows))
    return (
        "layers",
        spec.get("layers"),
        "outer",
        _num(spec.get("outer_copper_base_um")),
        "inner",
        _num(spec.get("inner_copper_um")),
    )


def _num(value: Any) -> Any:
    if isinstance(value, bool):
        return value
    if isinstance(value, int | float):
        return round(float(value), 3)
    return value


def incompatibilities(images: Sequence[SharedImage]) -> list[str]:
    """Why these images cannot share a panel (empty when they can).

    Each reason names the two jobs and the differing values, so the planner can pick
    another partner or run the jobs on panels of their own.
    """
    if len(images) < 2:
        return []
    first = images[0]
    reasons: list[str] = []
    for other in images[1:]:
        a, b = first.spec, other.spec
        if _stackup_signature(a) != _stackup_signature(b):
            reasons.append(
                f"{first.label} and {other.label} have different stack-ups "
                f"({_describe_stack(a)} vs {_describe_stack(b)})"
            )
        fa, fb = str(a.get("finish", "")).lower(), str(b.get("finish", "")).lower()
        if fa != fb:
            reasons.append(
                f"{first.label} and {other.label} have different finishes ({fa} vs {fb})"
            )
        ta, tb = _num(a.get("board_thickness_mm")), _num(b.get("board_thickness_mm"))
        if ta != tb:
            reasons.append(
                f"{first.label} and {other.label} have different board thicknesses "
                f"({ta} mm vs {tb} mm)"
            )
    return reasons


def _describe_stack(spec: Mapping[str, Any]) -> str:
    stack = spec.get("stackup")
    if isinstance(stack, Sequence) and stack:
        return f"{spec.get('layers')} layers, {len(stack)} stack-up rows"
    return (
        f"{spec.get('layers')} layers, outer {spec.get('outer_copper_base_um')} um, "
        f"inner {spec.get('inner_copper_um')} um"
    )


def strictest_class(images: Sequence[SharedImage]) -> int:
    """The highest IPC class among the images: the class the shared panel is built to."""
    if not images:
        raise ValueError("no images")
    return max(i.ipc_class for i in images)
