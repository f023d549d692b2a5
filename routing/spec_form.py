"""The build spec authoring form: spec dict <-> flat form fields, and problems -> fields.

Why a hand-made form: the spec has repeated rows (stack-up, vias, overrides) that a
person adds, removes and reorders, and its one validator is `routing.services.
validate_spec`; this module only moves values between the JSON shape and named inputs,
so the form never has a rule of its own. `form_values` takes any spec dict, so a design
import (or anything else) can pre-fill the form, naming the inputs it filled.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from routing.builder import spec as spec_core

#: Top-level inputs in the README's key order, with the choices of enumerated ones.
SIMPLE_FIELDS: tuple[tuple[str, str, tuple[Any, ...]], ...] = (
    ("layers", "Copper layers", spec_core.LAYER_COUNTS),
    ("ipc_class", "IPC class", (1, 2, 3)),
    ("board_thickness_mm", "Board thickness (mm)", ()),
    ("outer_copper_base_um", "Outer copper base (µm, or '0.5 oz')", ()),
    ("inner_copper_um", "Inner copper (µm, or '1 oz'; 4+ layers)", ()),
    ("finish", "Surface finish", spec_core.FINISHES),
    ("solder_mask_sides", "Solder mask sides", spec_core.SIDES),
    ("solder_mask_colour", "Solder mask colour", (*spec_core.MASK_COLOURS, "none")),
    ("legend_sides", "Legend sides", spec_core.SIDES),
    ("profile", "Profile", spec_core.PROFILES),
    ("electrical_test", "Electrical test", spec_core.ELECTRICAL_TESTS),
    ("min_hole_mm", "Smallest finished hole (mm)", ()),
    ("outline_width_mm", "Outline width (mm, optional)", ()),
    ("outline_height_mm", "Outline height (mm, optional)", ()),
)
STACKUP_COLUMNS = ("kind", "thickness_um", "material")
VIA_COLUMNS = ("from", "to", "kind", "drill")
OVERRIDE_COLUMNS = ("quantity", "step_code", "min", "max", "target", "reason")
ROWS = {"stackup": STACKUP_COLUMNS, "vias": VIA_COLUMNS, "ov": OVERRIDE_COLUMNS}

_ROW_NAME = re.compile(r"^(stackup|vias|ov)-(\d+)-(\w+)$")


@dataclass
class FormState:
    """What the template shows: flat values, rows, which inputs came from an import."""

    values: dict[str, Any]
    stackup: list[dict[str, Any]]
    vias: list[dict[str, Any]]
    overrides: list[dict[str, Any]]
    imported: set[str] = field(default_factory=set)
    errors: dict[str, list[str]] = field(default_factory=dict)
    #: Spec fields a design import could not fill ("finish", "solder_mask.colour"): kept
    #: required until filled (`routing.services.check_filled`).
    to_fill: list[str] = field(default_factory=list)

    @property
    def to_fill_inputs(self) -> set[str]:
        return {_input_for(p) for p in self.to_fill}


def _mapping(value: Any) -> Mapping[str, Any]:
    """A nested spec object, or an empty one when the key is missing or not an object."""
    return value if isinstance(value, Mapping) else {}


def _list(value: Any) -> list[Any]:
    """A spec list (stack-up rows, vias), or an empty one when missing or not a list."""
    return value if isinstance(value, list) else []


def _text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value)) if abs(value) < 1e15 else str(value)
    return str(value)


def form_values(
    spec: Mapping[str, Any] | None,
    overrides: Iterable[Mapping[str, Any]] = (),
    *,
    imported: Iterable[str] = (),
) -> FormState:
    """A form pre-filled from a spec dict (any spec; nothing is validated here).

    `imported` names the spec keys an import filled ("finish", "stackup",
    "solder_mask.colour"); the form marks those inputs so the engineer checks them.
    """
    spec = spec or {}
    mask = _mapping(spec.get("solder_mask"))
    legend = _mapping(spec.get("legend"))
    outline = _mapping(spec.get("outline"))
    values = {
        "layers": _text(spec.get("layers")),
        "ipc_class": _text(spec.get("ipc_class")),
        "board_thickness_mm": _text(spec.get("board_thickness_mm")),
        "outer_copper_base_um": _text(spec.get("outer_copper_base_um")),
        "inner_copper_um": _text(spec.get("inner_copper_um")),
        "finish": _text(spec.get("finish")),
        "hard_gold_fingers": bool(spec.get("hard_gold_fingers")),
        "solder_mask_sides": _text(mask.get("sides", "both" if spec else "")),
        "solder_mask_colour": _text(mask.get("colour", "")),
        "legend_sides": _text(legend.get("sides", "both" if spec else "")),
        "profile": _text(spec.get("profile")),
        "electrical_test": _text(spec.get("electrical_test")),
        "min_hole_mm": _text(spec.get("min_hole_mm")),
        "outline_width_mm": _text(outline.get("width_mm")),
        "outline_height_mm": _text(outline.get("height_mm")),
    }
    stack = _list(spec.get("stackup"))
    vias = _list(spec.get("vias"))
    state = FormState(
        values=values,
        stackup=[
            {c: _text(r.get(c)) for c in STACKUP_COLUMNS} for r in stack if isinstance(r, Mapping)
        ],
        vias=[{c: _text(r.get(c)) for c in VIA_COLUMNS} for r in vias if isinstance(r, Mapping)],
        overrides=[{c: _text(o.get(c)) for c in OVERRIDE_COLUMNS} for o in overrides],
    )
    for key in imported:
        state.imported.add(_input_for(key))
    return state


def _number_or_text(text: str) -> Any:
    text = text.strip()
    if re.fullmatch(r"[+-]?\d+", text):
        return int(text)
    try:
        return float(text)
    except ValueError:
        return text  # the validator says what is wrong with it ("1 oz" is fine for copper)


def _rows(post: Mapping[str, Any], prefix: str) -> list[dict[str, str]]:
    found: dict[int, dict[str, str]] = {}
    for name in post:
        m = _ROW_NAME.match(name)
        if m and m.group(1) == prefix and m.group(3) in ROWS[prefix]:
            found.setdefault(int(m.group(2)), {})[m.group(3)] = str(post.get(name, "")).strip()
    return [found[i] for i in sorted(found) if any(found[i].values())]


def spec_from_form(post: Mapping[str, Any]) -> dict[str, Any]:
    """The spec dict the form describes (blank optional fields left out)."""

    def get(name: str) -> str:
        return str(post.get(name, "") or "").strip()

    spec: dict[str, Any] = {}
    for name in (
        "layers",
        "ipc_class",
        "board_thickness_mm",
        "outer_copper_base_um",
        "inner_copper_um",
        "min_hole_mm",
    ):
        if get(name):
            spec[name] = _number_or_text(get(name))
    for name in ("finish", "profile", "electrical_test"):
        if get(name):
            spec[name] = get(name)
    spec["hard_gold_fingers"] = get("hard_gold_fingers") in ("on", "true", "1", "yes")
    mask: dict[str, Any] = {}
    if get("solder_mask_sides"):
        mask["sides"] = get("solder_mask_sides")
    if get("solder_mask_colour"):
        mask["colour"] = get("solder_mask_colour")
    if mask:
        spec["solder_mask"] = mask
    if get("legend_sides"):
        spec["legend"] = {"sides": get("legend_sides")}
    if get("outline_width_mm") or get("outline_height_mm"):
        spec["outline"] = {
            k: _number_or_text(get(f"outline_{k}"))
            for k in ("width_mm", "height_mm")
            if get(f"outline_{k}")
        }
    spec["vias"] = [
        {k: (_number_or_text(v) if k in ("from", "to") else v) for k, v in row.items() if v}
        for row in _rows(post, "vias")
    ]
    stack = _rows(post, "stackup")
    if stack:
        spec["stackup"] = [
            {
                **{
                    "kind": row.get("kind", ""),
                    "thickness_um": _number_or_text(row.get("thickness_um", "")),
                },
                **({"material": row["material"]} if row.get("material") else {}),
            }
            for row in stack
        ]
    return spec


def overrides_from_form(post: Mapping[str, Any]) -> list[dict[str, Any]]:
    """Customer window overrides typed in the overrides editor (blank rows ignored)."""
    out: list[dict[str, Any]] = []
    for row in _rows(post, "ov"):
        item: dict[str, Any] = {
            "quantity": row.get("quantity", ""),
            "reason": row.get("reason", ""),
        }
        if row.get("step_code"):
            item["step_code"] = row["step_code"]
        for key in ("min", "max", "target"):
            if row.get(key):
                item[key] = _number_or_text(row[key])
        out.append(item)
    return out


def state_from_post(post: Mapping[str, Any]) -> FormState:
    """The form as typed, for showing it again with its problems."""
    return FormState(
        values={name: str(post.get(name, "")) for name, _, _ in SIMPLE_FIELDS}
        | {"hard_gold_fingers": str(post.get("hard_gold_fingers", "")) in ("on", "true", "1")},
        stackup=_rows(post, "stackup"),
        vias=_rows(post, "vias"),
        overrides=_rows(post, "ov"),
        imported={n for n in str(post.get("imported", "")).split(",") if n},
        to_fill=to_fill_from(post),
    )


def to_fill_from(post: Mapping[str, Any]) -> list[str]:
    """The to-fill list an imported form carries in its hidden `to_fill` input."""
    return [n for n in str(post.get("to_fill", "")).split(",") if n]


def _input_for(field_path: str) -> str:
    """The form input a validator field path points at ("stackup[2].kind" -> "stackup-2-kind")."""
    m = re.fullmatch(r"(stackup|vias)\[(\d+)\](?:\.(\w+))?", field_path)
    if m:
        return f"{m.group(1)}-{m.group(2)}-{m.group(3) or ''}".rstrip("-")
    return field_path.replace(".", "_")


def errors_by_input(problems: Iterable[Mapping[str, Any]]) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    for p in problems:
        out.setdefault(_input_for(str(p.get("field", ""))), []).append(str(p.get("problem", "")))
    return out
