"""The certificate of conformance in the customer's words (pure; no Django imports).

Why a pure module: what a customer reads must be decided in one place and checked by
tests without a database. It turns the shop's records into plain statements:

* each measured characteristic with its requirement and that requirement's standard,
  and what was measured (count, lowest, highest) against it;
* the standard named as a customer reads it: the document and requirement, without the
  shop's notes on how a value was sourced ("from memory", "confirm against ...", shop
  derivations), which are for engineers, not customers;
* no internal record ids or step codes.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

#: Characteristic names as a customer's drawing or IPC-6012 would call them.
CHARACTERISTICS: dict[str, str] = {
    "hole_wall_copper": "Plated hole wall copper thickness",
    "surface_copper": "Surface copper thickness (base foil plus plating)",
    "nickel_thickness": "Nickel thickness",
    "gold_thickness": "Gold thickness",
    "palladium_thickness": "Palladium thickness",
    "silver_thickness": "Immersion silver thickness",
    "tin_thickness": "Immersion tin thickness",
    "osp_thickness": "Organic solderability preservative thickness",
    "mask_registration": "Solder mask registration",
    "mask_thickness": "Solder mask thickness",
    "vscore_web": "V-score remaining web",
    "vscore_depth": "V-score depth per side",
    "board_thickness": "Board thickness",
    "bow_twist": "Bow and twist",
    "finished_hole_diameter": "Finished hole diameter",
    "conductor_width": "Conductor width",
    "aoi_defects": "Automated optical inspection: defects",
    "etest_opens": "Electrical test: opens",
    "etest_shorts": "Electrical test: shorts",
    "etest_failed": "Electrical test: boards failed (of boards tested)",
}

FINISHES: dict[str, str] = {
    "enig": "Electroless nickel / immersion gold (ENIG)",
    "enepig": "Electroless nickel / electroless palladium / immersion gold (ENEPIG)",
    "immersion_silver": "Immersion silver",
    "immersion_tin": "Immersion tin",
    "hasl_lead_free": "Lead-free hot-air solder levelling (HASL)",
    "osp": "Organic solderability preservative (OSP)",
    "none": "No surface finish (bare copper)",
}

_UNIT_TEXT = {"um": "µm", "count": "", "percent": "%", "mm": "mm"}
#: Parenthesised notes about how a value was sourced, and the phrases themselves.
_SOURCING_NOTE = re.compile(
    r"\s*\((?=[^)]*(?:memory|confirm|practice|recall|assumed|default))[^)]*\)", re.IGNORECASE
)
_SOURCING_WORDS = re.compile(r",?\s*\b(?:from memory|common practice|as recalled)\b", re.IGNORECASE)


def customer_standard(source: str) -> str:
    """The standard a requirement comes from, as the customer should read it."""
    text = (source or "").strip()
    low = text.lower()
    if not text:
        return "Manufacturer's process requirement"
    if low.startswith("customer deviation"):
        return "Customer-approved deviation (listed under Deviations)"
    if low.startswith("customer"):
        _, _, reason = text.partition(":")
        reason = _clean(reason)
        return f"Customer specification ({reason})" if reason else "Customer specification"
    if low.startswith(("shop practice", "process library")):
        return "Manufacturer's process requirement"
    first = _SOURCING_NOTE.sub("", text).split(";")[0]
    return _clean(first) or "Manufacturer's process requirement"


def _clean(text: str) -> str:
    text = _SOURCING_NOTE.sub("", text)
    text = _SOURCING_WORDS.sub("", text)
    text = re.sub(r"(\d) ?um\b", "\\1 µm", text)
    return re.sub(r"\s{2,}", " ", text).strip(" ;,")


def requirement_text(window: dict[str, Any]) -> str:
    """'≥ 20 µm', '0.79 – 0.99 mm', 'none allowed' for a customer."""
    unit = _UNIT_TEXT.get(str(window.get("unit", "")), str(window.get("unit", "")))
    lo, hi = window.get("min"), window.get("max")
    suffix = f" {unit}" if unit else ""
    if window.get("attribute") or (lo is None and hi == 0):
        return "none allowed"
    if lo is not None and hi is not None:
        return f"{lo:g} – {hi:g}{suffix}"
    if lo is not None:
        return f"≥ {lo:g}{suffix}"
    if hi is not None:
        return f"≤ {hi:g}{suffix}"
    return "recorded for information"


@dataclass(frozen=True)
class MeasuredValue:
    """One current (not superseded) reading of an included lot."""

    quantity: str
    value: float
    unit: str
    window: dict[str, Any]
    in_window: bool
    accepted_by: str = ""  # the disposition or deviation that covers an out-of-window value


@dataclass(frozen=True)
class CharacteristicRow:
    characteristic: str
    requirement: str
    standard: str
    count: int
    lowest: str
    highest: str
    result: str

    def as_dict(self) -> dict[str, Any]:
        return {
            "characteristic": self.characteristic,
            "requirement": self.requirement,
            "standard": self.standard,
            "count": self.count,
            "lowest": self.lowest,
            "highest": self.highest,
            "result": self.result,
        }


def _fmt(value: float, unit: str) -> str:
    u = _UNIT_TEXT.get(unit, unit)
    return f"{value:.4g} {u}".strip()


def characteristic_rows(values: Iterable[MeasuredValue]) -> list[CharacteristicRow]:
    """One row per characteristic and requirement, in the order quantities are listed."""
    groups: dict[tuple[str, str, str], list[MeasuredValue]] = {}
    for v in values:
        key = (
            v.quantity,
            requirement_text(v.window),
            customer_standard(v.window.get("source", "")),
        )
        groups.setdefault(key, []).append(v)
    order = {q: i for i, q in enumerate(CHARACTERISTICS)}
    rows = []
    for (quantity, requirement, standard), vs in sorted(
        groups.items(), key=lambda kv: (order.get(kv[0][0], 99), kv[0][1])
    ):
        outside = [v for v in vs if not v.in_window]
        if not outside:
            result = "Conforms"
        else:
            result = f"{len(outside)} value(s) outside, accepted by deviation (see Deviations)"
        unit = vs[0].unit
        rows.append(
            CharacteristicRow(
                characteristic=CHARACTERISTICS.get(quantity, quantity.replace("_", " ")),
                requirement=requirement,
                standard=standard,
                count=len(vs),
                lowest=_fmt(min(v.value for v in vs), unit),
                highest=_fmt(max(v.value for v in vs), unit),
                result=result,
            )
        )
    return rows


def specification_line(spec: dict[str, Any], ipc_class: int) -> str:
    """'IPC-6012 performance class 2; 4 layers, 1.6 mm, ENIG finish, green solder mask'."""
    parts = [f"{spec.get('layers', '?')} layers"]
    if spec.get("board_thickness_mm"):
        parts.append(f"{spec['board_thickness_mm']:g} mm thick")
    finish = FINISHES.get(str(spec.get("finish", "")).lower())
    if finish:
        parts.append(f"finish: {finish}")
    mask = spec.get("solder_mask") or {}
    if isinstance(mask, dict) and mask.get("sides") not in (None, "none"):
        parts.append(f"{mask.get('colour', '')} solder mask".strip())
    return f"IPC-6012 performance class {ipc_class}; " + ", ".join(parts)


def forbidden_words(text: str) -> list[str]:
    """Phrases that must never reach a customer (tests and the issuer check the output)."""
    low = text.lower()
    return [w for w in ("from memory", "confirm against", "shop practice") if w in low]


def page_count_ok(pages: int) -> bool:
    """A certificate is one or two pages: the customer reads it at goods-in."""
    return 1 <= pages <= 2


def summarise_lots(lots: Sequence[tuple[str, int]]) -> str:
    return ", ".join(f"{code} ({n} boards)" for code, n in lots)
