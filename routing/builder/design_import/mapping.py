"""From what an IPC-2581 file states to a draft build spec, what is left to fill in, and why.

Rules, each chosen so the spec says only what the file says:

- The board's stack-up is the stackup with the most copper layers (the rigid one of a
  rigid-flex; the flex zones' stackups are listed, not merged). Layers are ordered by
  `sequence` (gaps allowed), file order breaking ties, top copper first.
- Copper is a layer whose function conducts (SIGNAL, CONDUCTOR, PLANE, MIXED,
  POWER_GROUND, CONDFOIL, CONDFILM). Dielectrics between the outer coppers become core or
  prepreg rows: the material text decides when it names one ("PP-017" is prepreg,
  "Core-039" is core), otherwise the function (DIELCORE, DIELBASE core; DIELPREG,
  DIELADHV, DIELBONDPLY prepreg). An exporter that calls every dielectric a core (or
  every one a prepreg) is flagged: no multilayer board is built that way.
- Board thickness is the copper-to-copper stack plus the solder mask and coatings
  outside it ("over mask") when the file gives them a thickness, else copper to copper
  ("over metal"). Paste, legend, document and drill layers are never counted, though
  some exporters add them to their stated overall thickness; a difference of more than
  10 % from the stated overall is a warning (common practice: finished thickness is
  held to +/-10 % unless the drawing says less).
- Vias come from drill spans: a DRILL layer's Span with the holes drawn on that layer,
  or each padstack hole's own Span. Through, blind or buried follows from the ends.
  A blind or buried span is a microvia, so laser-drilled, when its smallest plated hole
  is at least as wide as the span is deep and the span is at most 0.25 mm deep
  (IPC-T-50M definition of a microvia, from memory; laser drilling for microvias is
  common practice). Everything else is mechanically drilled.
- Holes in a panel's own step (tooling holes) are not the board's; when a step repeats
  another, the repeated step is the board.
- Finish, IPC class, mask colour, profile and electrical test are rarely in a design
  file: unless a Spec states them they are listed "to fill in", and the draft spec
  cannot pass the build spec validator until they are.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any, Final

from routing.builder.spec import FINISHES, MASK_COLOURS

from .reader import Design, HoleStats, Stackup, StackupLayer, Step

__all__ = [
    "MICROVIA_MAX_DEPTH_MM",
    "MICROVIA_RULE",
    "TO_FILL_MARK",
    "ImportResult",
    "Row",
    "ViaSpan",
    "import_design",
    "missing_fields",
]

CONDUCTOR: Final = frozenset(
    {"SIGNAL", "CONDUCTOR", "PLANE", "MIXED", "POWER_GROUND", "CONDFOIL", "CONDFILM"}
)
CORE_FUNCTIONS: Final = frozenset({"DIELCORE", "DIELBASE"})
PREPREG_FUNCTIONS: Final = frozenset({"DIELPREG", "DIELADHV", "DIELBONDPLY"})
DIELECTRIC: Final = CORE_FUNCTIONS | PREPREG_FUNCTIONS
MASK: Final = frozenset({"SOLDERMASK"})
COATING: Final = frozenset({"COATINGCOND", "COATINGNONCOND", "DIELCOVERLAY"})
LEGEND: Final = frozenset({"LEGEND", "SILKSCREEN"})
PASTE: Final = frozenset({"PASTEMASK", "SOLDERPASTE"})
DRILL: Final = frozenset({"DRILL"})

#: A microvia is at most this deep (IPC-T-50M definition, from memory).
MICROVIA_MAX_DEPTH_MM: Final = 0.25
#: ... and no deeper than its hole is wide (aspect ratio <= 1:1, same source).
MICROVIA_MAX_ASPECT: Final = 1.0
MICROVIA_RULE: Final = (
    "a blind or buried span is a microvia, laser-drilled, when its smallest plated hole is "
    "at least as wide as the span is deep (aspect ratio <= 1:1) and the span is at most "
    "0.25 mm deep: IPC-T-50M definition of a microvia (from memory); laser drilling of "
    "microvias is common practice"
)
#: Finished thickness differing from the stated overall by more than this is flagged.
THICKNESS_TOLERANCE: Final = 0.10
#: 1 oz of copper over 1 ft^2 is 34.8 um thick (copper density 8.96 g/cm^3; common practice).
UM_PER_OZ: Final = 34.8

#: IPC-6012 finish designators (as IPC-2581 Finish types) to this shop's finish names.
FINISH_TYPES: Final[dict[str, str]] = {
    "ENIG-N": "enig",
    "ENIG-G": "enig",
    "ENIG": "enig",
    "ENEPIG-N": "enepig",
    "ENEPIG-G": "enepig",
    "ENEPIG-P": "enepig",
    "ENEPIG": "enepig",
    "IAG": "immersion_silver",
    "ISN": "immersion_tin",
    "OSP": "osp",
    "HT_OSP": "osp",
    "S": "hasl_lead_free",
    "HASL": "hasl_lead_free",
    "N": "none",
    "NONE": "none",
}

#: What a to-fill field holds in the draft a person edits: the validator refuses it (with
#: the allowed values beside it), so the draft cannot be drafted or released until filled.
TO_FILL_MARK: Final = "(to fill in)"
#: Key order of the draft a person edits (the README's order).
DRAFT_ORDER: Final = (
    "layers",
    "ipc_class",
    "board_thickness_mm",
    "outer_copper_base_um",
    "inner_copper_um",
    "finish",
    "hard_gold_fingers",
    "solder_mask",
    "legend",
    "profile",
    "electrical_test",
    "min_hole_mm",
    "outline",
    "vias",
    "stackup",
)

ALWAYS_TO_FILL: Final = ("finish", "ipc_class", "solder_mask.colour", "profile", "electrical_test")

_PREPREG_WORDS = re.compile(r"PREPREG|BOND\s*PLY|(^|[^A-Z])PP([^A-Z]|$)")
_CORE_WORDS = re.compile(r"CORE|LAMINATE|(^|[^A-Z])CCL([^A-Z]|$)")
_OZ = re.compile(r"(\d+(?:\.\d+)?)\s*OZ")


@dataclass(frozen=True)
class Row:
    """One stack-up layer as the page shows it: what it is and whether it counts."""

    name: str
    function: str
    role: str  # copper, core, prepreg, mask, coating, legend, paste, drill, other
    thickness_um: float | None
    material: str
    counted: bool
    copper_index: int | None = None
    kind_from: str = ""  # "material" or "function" for dielectrics
    tol_plus_um: float | None = None
    tol_minus_um: float | None = None

    def tolerance(self) -> str:
        """ "+2.5/-2.5 um" when the file states a non-zero tolerance, else ""."""
        if not (self.tol_plus_um or self.tol_minus_um):
            return ""
        return f"+{self.tol_plus_um or 0:g}/-{self.tol_minus_um or 0:g} um"


@dataclass(frozen=True)
class ViaSpan:
    """One drill span: its copper ends, kind, drill, holes, depth and where it came from."""

    from_layer: int
    to_layer: int
    kind: str
    drill: str
    holes: int
    min_hole_mm: float | None
    depth_mm: float | None
    source: str
    reason: str


@dataclass
class ImportResult:
    """The draft spec with its provenance; `as_dict` is the command and API shape."""

    spec: dict[str, Any]
    to_fill: list[str]
    warnings: list[str]
    source: dict[str, Any]
    from_file: list[str]
    rows: list[Row] = field(default_factory=list)
    vias: list[ViaSpan] = field(default_factory=list)
    other_stackups: list[str] = field(default_factory=list)

    def draft(self) -> dict[str, Any]:
        """The spec with every to-fill field present as TO_FILL_MARK, in the README order.

        This is what the engineer edits: each mark must be replaced before the validator
        accepts the spec, so nothing unfilled can become a routing.
        """
        spec: dict[str, Any] = {k: v for k, v in self.spec.items()}
        for path in self.to_fill:
            head, _, tail = path.partition(".")
            if tail:
                spec[head] = {**spec.get(head, {}), tail: TO_FILL_MARK}
            else:
                spec[head] = TO_FILL_MARK
        ordered: dict[str, Any] = {k: spec[k] for k in DRAFT_ORDER if k in spec}
        ordered.update({k: v for k, v in spec.items() if k not in ordered})
        return ordered

    def as_dict(self) -> dict[str, Any]:
        return {
            "spec": self.spec,
            "to_fill": list(self.to_fill),
            "warnings": list(self.warnings),
            "source": dict(self.source),
        }


def _um(mm: float | None) -> float | None:
    """Micrometres rounded to 0.1 um: exporters write 0.017501 mm for 17.5 um."""
    return None if mm is None else round(mm * 1000.0, 1)


def _mm(mm: float, places: int = 3) -> float:
    value = round(mm, places)
    return value + 0.0  # no "-0.0"


def _role(function: str) -> str:
    if function in CONDUCTOR:
        return "copper"
    if function in DIELECTRIC:
        return "dielectric"
    if function in MASK:
        return "mask"
    if function in COATING:
        return "coating"
    if function in LEGEND:
        return "legend"
    if function in PASTE:
        return "paste"
    if function in DRILL:
        return "drill"
    return "other"


def _dielectric_kind(function: str, material: str) -> tuple[str, str]:
    text = material.upper()
    if _PREPREG_WORDS.search(text):
        return "prepreg", "material"
    if _CORE_WORDS.search(text):
        return "core", "material"
    return ("core" if function in CORE_FUNCTIONS else "prepreg"), "function"


def _material(design: Design, layer: StackupLayer) -> str:
    for ref in [*layer.spec_refs, layer.ref]:
        spec = design.specs.get(ref)
        if spec is not None and spec.material and spec.material.lower() != "undefined":
            return spec.material
    return ""


def _ordered(layers: list[StackupLayer]) -> list[StackupLayer]:
    if layers and all(sl.sequence is not None for sl in layers):
        return sorted(layers, key=lambda sl: (sl.sequence, sl.order))
    return sorted(layers, key=lambda sl: sl.order)


def _copper_count(design: Design, stackup: Stackup) -> int:
    return sum(
        1
        for g in stackup.groups
        for sl in g.layers
        if (lay := design.layers.get(sl.ref)) is not None and lay.function in CONDUCTOR
    )


def _signature(design: Design, layers: list[StackupLayer]) -> tuple[tuple[str, float | None], ...]:
    out = []
    for sl in _ordered(layers):
        lay = design.layers.get(sl.ref)
        role = _role(lay.function) if lay else "other"
        if role in ("copper", "dielectric"):
            out.append((role, _um(sl.thickness_mm)))
    return tuple(out)


def _board_steps(design: Design) -> list[Step]:
    """The board's steps: what a panel step repeats, else every step."""
    repeated = {ref for s in design.steps for ref, _ in s.repeats}
    if repeated:
        return [s for s in design.steps if s.name in repeated] or design.steps
    return design.steps


def import_design(design: Design) -> ImportResult:
    """Map a read design to a draft build spec (see the module docstring for the rules)."""
    warnings: list[str] = []
    spec: dict[str, Any] = {}
    from_file: list[str] = []
    to_fill: list[str] = []
    source: dict[str, Any] = {
        "revision": design.revision,
        "units": design.units,
        "exporter": design.exporter,
    }

    # ---------------------------------------------------------------- stack-up choice
    stackup: Stackup | None = None
    other: list[str] = []
    if design.stackups:
        stackup = max(design.stackups, key=lambda s: _copper_count(design, s))
        other = [s.name for s in design.stackups if s is not stackup]
    layers_in: list[StackupLayer] = []
    if stackup is not None:
        source["stackup"] = stackup.name
        groups = [g for g in stackup.groups if g.layers]
        signatures = {_signature(design, g.layers) for g in groups}
        if len(groups) > 1 and len(signatures) == 1:
            layers_in = groups[0].layers
            names = ", ".join(g.name for g in groups)
            warnings.append(
                f"stackup {stackup.name} has {len(groups)} groups ({names}) describing the same "
                f"layers; the board is read from {groups[0].name}"
            )
        else:
            layers_in = [sl for g in groups for sl in g.layers]
    if other:
        zones = sum(len(s.zones) for s in design.steps)
        warnings.append(
            f"{len(design.stackups)} stackups in the file ({', '.join(other)} besides "
            f"{stackup.name if stackup else ''}), used by {zones} zone(s): the spec is built "
            "from the one with the most copper layers; check the flex or other zones' "
            "construction by hand"
        )

    rows: list[Row] = []
    missing_thickness: list[str] = []
    ordered = _ordered(layers_in)
    unknown = [sl.ref for sl in ordered if sl.ref not in design.layers]
    if unknown:
        warnings.append(
            "stack-up rows name layers the Layer list does not have (not counted): "
            + ", ".join(unknown[:8])
        )
    # Orientation: the first copper should be the top one.
    coppers = [
        sl
        for sl in ordered
        if sl.ref in design.layers and design.layers[sl.ref].function in CONDUCTOR
    ]
    if coppers and design.layers[coppers[0].ref].side == "BOTTOM":
        ordered.reverse()
        coppers.reverse()
    copper_refs = [sl.ref for sl in coppers]
    first = ordered.index(coppers[0]) if coppers else -1
    last = ordered.index(coppers[-1]) if coppers else -1
    all_dielectric_functions: list[str] = []
    dielectric_kinds: list[str] = []
    for i, sl in enumerate(ordered):
        lay = design.layers.get(sl.ref)
        if lay is None:
            continue
        role = _role(lay.function)
        material = _material(design, sl)
        inside = first <= i <= last
        kind_from = ""
        counted = False
        shown_role = role
        if role == "copper":
            counted = True
        elif role == "dielectric" and inside:
            shown_role, kind_from = _dielectric_kind(lay.function, material)
            all_dielectric_functions.append(lay.function)
            dielectric_kinds.append(shown_role)
            counted = True
        elif role == "dielectric":
            shown_role = "coating"
            counted = bool(sl.thickness_mm)
        elif role in ("mask", "coating") and not inside:
            counted = bool(sl.thickness_mm)
        if counted and role in ("copper", "dielectric") and inside and not sl.thickness_mm:
            missing_thickness.append(sl.ref)
        rows.append(
            Row(
                name=sl.ref,
                function=lay.function,
                role=shown_role,
                thickness_um=_um(sl.thickness_mm),
                material=material,
                counted=counted,
                copper_index=copper_refs.index(sl.ref) + 1 if role == "copper" else None,
                kind_from=kind_from,
                tol_plus_um=_um(sl.tol_plus_mm),
                tol_minus_um=_um(sl.tol_minus_mm),
            )
        )

    # ---------------------------------------------------------------- layers and copper
    if coppers:
        spec["layers"] = len(coppers)
        from_file.append("layers")
    else:
        conductor_layers = [lay for lay in design.layers.values() if lay.function in CONDUCTOR]
        if conductor_layers:
            spec["layers"] = len(conductor_layers)
            from_file.append("layers")
            warnings.append(
                "the file has no stack-up with copper layers; the layer count comes from the "
                "Layer list and every thickness must be filled in"
            )
        else:
            to_fill.append("layers")
    count = spec.get("layers", 0)
    if count and count not in (1, 2) and count % 2:
        warnings.append(
            f"{count} copper layers: an odd count; the build spec takes 1, 2 or an even number"
        )

    copper_um = [_um(sl.thickness_mm) for sl in coppers]
    if copper_um and copper_um[0]:
        spec["outer_copper_base_um"] = copper_um[0]
        from_file.append("outer_copper_base_um")
        if len(copper_um) > 1 and copper_um[-1] and abs(copper_um[-1] - copper_um[0]) > 0.5:
            warnings.append(
                f"top copper {copper_um[0]:g} um and bottom copper {copper_um[-1]:g} um differ; "
                "the build spec has one outer copper value (the top's is used)"
            )
    else:
        to_fill.append("outer_copper_base_um")
    inner = [t for t in copper_um[1:-1] if t]
    if count >= 4:
        if inner and len(inner) == len(copper_um) - 2:
            spec["inner_copper_um"] = max(inner)
            from_file.append("inner_copper_um")
            if len(set(inner)) > 1:
                warnings.append(
                    "inner copper layers differ ("
                    + ", ".join(f"{t:g}" for t in inner)
                    + f" um); the build spec has one inner value ({max(inner):g} um, the thickest)"
                )
        else:
            to_fill.append("inner_copper_um")
    _check_copper_weights(design, coppers, warnings)

    # ---------------------------------------------------------------- thickness
    metal_rows = [r for r in rows if r.counted and r.role in ("copper", "core", "prepreg")]
    outside_rows = [r for r in rows if r.counted and r.role in ("mask", "coating")]
    if missing_thickness:
        warnings.append(
            "no thickness in the file for " + ", ".join(missing_thickness) + "; the stack-up "
            "is left out of the spec"
        )
    stated = stackup.overall_mm if stackup is not None else None
    basis = ""
    if metal_rows and not missing_thickness:
        metal_mm = sum(r.thickness_um or 0.0 for r in metal_rows) / 1000.0
        mask_mm = metal_mm + sum(r.thickness_um or 0.0 for r in outside_rows) / 1000.0
        basis = "over mask" if outside_rows else "over metal"
        thickness = mask_mm if outside_rows else metal_mm
        spec["board_thickness_mm"] = _mm(thickness)
        from_file.append("board_thickness_mm")
        spec["stackup"] = [
            {
                "kind": r.role,
                "thickness_um": r.thickness_um,
                **({"material": r.material[:80]} if r.material else {}),
            }
            for r in metal_rows
        ]
        from_file.append("stackup")
        if stated:
            _check_stated(stated, thickness, basis, rows, stackup, warnings)
    elif stated:
        spec["board_thickness_mm"] = _mm(stated)
        from_file.append("board_thickness_mm")
        where = stackup.where_measured if stackup is not None else ""
        basis = {
            "MASK": "over mask",
            "METAL": "over metal",
            "LAMINATE": "over laminate",
        }.get(where, "as stated (the file does not say where it is measured)")
        warnings.append(
            f"board thickness {stated:.3f} mm is the file's stated overall thickness, not a "
            "sum of layers; check it against the fabrication drawing"
        )
    else:
        to_fill.append("board_thickness_mm")
    if basis:
        source["thickness_basis"] = basis
    if stated:
        source["stated_thickness_mm"] = _mm(stated, 4)
        if stackup is not None and (stackup.tol_plus_mm or stackup.tol_minus_mm):
            source["stated_tolerance_mm"] = {
                "plus": _mm(stackup.tol_plus_mm or 0.0, 4),
                "minus": _mm(stackup.tol_minus_mm or 0.0, 4),
            }
    _check_dielectrics(all_dielectric_functions, dielectric_kinds, warnings)

    # ---------------------------------------------------------------- holes and vias
    vias, min_hole = _vias(design, rows, copper_refs, warnings)
    if vias:
        spec["vias"] = [
            {"from": v.from_layer, "to": v.to_layer, "kind": v.kind, "drill": v.drill} for v in vias
        ]
        from_file.append("vias")
        source["microvia_rule"] = MICROVIA_RULE
    if min_hole is not None:
        spec["min_hole_mm"] = _mm(min_hole)
        from_file.append("min_hole_mm")
    else:
        to_fill.append("min_hole_mm")

    # ---------------------------------------------------------------- mask, legend, finish
    board_steps = _board_steps(design)
    mask_sides = _sides(lay.side for lay in design.layers.values() if lay.function in MASK)
    spec["solder_mask"] = {"sides": mask_sides}
    from_file.append("solder_mask.sides")
    colour = _stated_colour(design)
    if colour and mask_sides != "none":
        spec["solder_mask"]["colour"] = colour
        from_file.append("solder_mask.colour")
    legend_layers = [lay for lay in design.layers.values() if lay.function in LEGEND]
    used = [lay for lay in legend_layers if any(s.features.get(lay.name) for s in board_steps)]
    spec["legend"] = {"sides": _sides(lay.side for lay in used)}
    from_file.append("legend.sides")
    empty = [lay.name for lay in legend_layers if lay not in used]
    if empty:
        warnings.append("legend layer(s) with nothing drawn, not counted: " + ", ".join(empty))
    finish = _stated_finish(design, warnings)
    if finish:
        spec["finish"] = finish
        from_file.append("finish")
    impedance = [s for s in design.specs.values() if s.impedance_ohm]
    if impedance:
        warnings.append(
            "the file states controlled impedance ("
            + ", ".join(f"{s.name}: {s.impedance_ohm:g} ohm" for s in impedance[:4])
            + "); the build spec has no impedance field: add the coupon test by hand"
        )

    # ---------------------------------------------------------------- outline
    board = next((s for s in board_steps if s.size_mm), None)
    if board is not None and board.size_mm is not None:
        w, h = board.size_mm
        spec["outline"] = {"width_mm": _mm(w, 2), "height_mm": _mm(h, 2)}
        from_file.append("outline")
        source["board_step"] = board.name
    for panel in design.steps:
        if panel.repeats and panel.size_mm:
            pw, ph = panel.size_mm
            source["panel"] = {
                "step": panel.name,
                "width_mm": _mm(pw, 2),
                "height_mm": _mm(ph, 2),
                "boards": sum(n for _, n in panel.repeats),
            }
            break

    for key in ALWAYS_TO_FILL:
        no_mask = mask_sides == "none"
        if key == "solder_mask.colour" and (no_mask or "solder_mask.colour" in from_file):
            continue
        if key == "finish" and "finish" in from_file:
            continue
        to_fill.append(key)
    source["from_file"] = list(from_file)
    return ImportResult(
        spec=spec,
        to_fill=sorted(_unique(to_fill), key=lambda f: DRAFT_ORDER.index(f.split(".")[0])),
        warnings=warnings,
        source=source,
        from_file=from_file,
        rows=rows,
        vias=vias,
        other_stackups=other,
    )


def _unique(items: list[str]) -> list[str]:
    seen: list[str] = []
    for item in items:
        if item not in seen:
            seen.append(item)
    return seen


def _sides(sides: Any) -> str:
    found = set(sides)
    top = bool(found & {"TOP", "BOTH", "ALL"})
    bottom = bool(found & {"BOTTOM", "BOTH", "ALL"})
    return {(True, True): "both", (True, False): "top", (False, True): "bottom"}.get(
        (top, bottom), "none"
    )


def _check_stated(
    stated: float,
    thickness: float,
    basis: str,
    rows: list[Row],
    stackup: Stackup | None,
    warnings: list[str],
) -> None:
    difference = abs(thickness - stated) / stated
    everything = sum(r.thickness_um or 0.0 for r in rows) / 1000.0
    extras = [r.name for r in rows if not r.counted and r.thickness_um]
    groups = len(stackup.groups) if stackup is not None else 1
    why = ""
    if extras and abs(everything - stated) <= 0.01 * stated:
        why = "the stated figure also counts " + ", ".join(extras) + ", which are not board"
    elif groups > 1 and abs(thickness * groups - stated) <= 0.02 * stated:
        why = f"the stated figure is the sum of the stackup's {groups} groups"
    if difference > THICKNESS_TOLERANCE:
        text = (
            f"board thickness {thickness:.3f} mm ({basis}) differs from the file's stated "
            f"overall thickness {stated:.3f} mm by {difference * 100:.0f} % (more than 10 %)"
        )
        warnings.append(f"{text}; {why}" if why else text)
    elif why and difference > 0.005:
        warnings.append(
            f"the file's stated overall thickness {stated:.3f} mm is {difference * 100:.0f} % "
            f"above the board's {thickness:.3f} mm ({basis}): {why}"
        )


def _check_dielectrics(functions: list[str], kinds: list[str], warnings: list[str]) -> None:
    if len(functions) < 2:
        return
    if all(f in CORE_FUNCTIONS for f in functions):
        corrected = sum(1 for k in kinds if k == "prepreg")
        tail = (
            f"; {corrected} taken as prepreg from the material name"
            if corrected
            else "; no material name says otherwise, so all are kept as cores"
        )
        warnings.append(
            f"the exporter calls every dielectric a core ({len(functions)} of "
            f"{len(functions)}){tail}: check the build with the fabrication drawing"
        )
    elif all(f in PREPREG_FUNCTIONS for f in functions) and "core" not in kinds:
        warnings.append(
            f"the file calls every dielectric a prepreg ({len(functions)} of {len(functions)}); "
            "a multilayer board is built on at least one core: mark the cores before release"
        )


def _check_copper_weights(design: Design, coppers: list[StackupLayer], warnings: list[str]) -> None:
    for sl in coppers:
        oz: float | None = None
        for ref in [*sl.spec_refs, sl.ref]:
            spec = design.specs.get(ref)
            if spec is None:
                continue
            if spec.copper_weight_oz:
                oz = spec.copper_weight_oz
            elif match := _OZ.search(spec.material.upper()):
                oz = float(match.group(1))
            if oz:
                break
        if not oz or not sl.thickness_mm:
            continue
        expected = oz * UM_PER_OZ
        actual = sl.thickness_mm * 1000.0
        if abs(actual - expected) > 0.2 * expected:
            warnings.append(
                f"{sl.ref}: the file says {oz:g} oz copper ({expected:.1f} um) but gives "
                f"{actual:.1f} um thickness"
            )


def _stated_finish(design: Design, warnings: list[str]) -> str | None:
    for spec in design.specs.values():
        if not spec.finish:
            continue
        key = spec.finish.strip().upper().replace(" ", "_")
        finish = FINISH_TYPES.get(key)
        if finish in FINISHES:
            return finish
        warnings.append(
            f"the file states finish {spec.finish!r} (spec {spec.name}), which this shop's "
            "build spec does not list; fill in the finish"
        )
        return None
    return None


def _stated_colour(design: Design) -> str | None:
    for spec in design.specs.values():
        if spec.colour:
            colour = spec.colour.strip().lower().replace(" ", "_")
            if colour in MASK_COLOURS:
                return colour
    return None


def _vias(
    design: Design, rows: list[Row], copper_refs: list[str], warnings: list[str]
) -> tuple[list[ViaSpan], float | None]:
    """Via spans (merged by their copper ends) and the smallest plated hole."""
    steps = _board_steps(design)
    spans: dict[tuple[str, str], tuple[HoleStats, str]] = {}

    def merge(key: tuple[str, str], stats: HoleStats, where: str) -> None:
        if key in spans:
            have, src = spans[key]
            have.merge(stats)
            spans[key] = (have, src if where in src else f"{src}; {where}")
        else:
            spans[key] = (HoleStats().merged(stats), where)

    min_hole: float | None = None
    for step in steps:
        for (frm, to), stats in step.padstack_holes.items():
            if frm and to:
                merge((frm, to), stats, "padstack holes")
            elif stats.plated:
                merge(("", ""), stats, "padstack holes without a span")
        for layer_name, stats in step.drill_holes.items():
            layer = design.layers.get(layer_name)
            span = layer.span if layer is not None else None
            if span and span[0] and span[1]:
                merge(span, stats, f"drill layer {layer_name}")
            elif stats.plated and not any(s.padstack_holes for s in steps):
                merge(("", ""), stats, f"drill layer {layer_name} (no span)")
        for stats in [*step.padstack_holes.values(), *step.drill_holes.values()]:
            if stats.min_plated_mm is not None:
                min_hole = (
                    stats.min_plated_mm if min_hole is None else min(min_hole, stats.min_plated_mm)
                )
    out: dict[tuple[int, int], ViaSpan] = {}
    n = len(copper_refs)
    for (frm, to), (stats, where) in spans.items():
        if not stats.plated:
            continue  # non-plated holes are not vias
        if not frm:
            if n < 2:
                continue
            warnings.append(f"{where}: plated holes with no span are taken as through holes")
            lo, hi = 1, n
        else:
            if frm not in copper_refs or to not in copper_refs:
                warnings.append(
                    f"{where}: span {frm} to {to} does not end on copper layers of the "
                    "stack-up; not imported"
                )
                continue
            a, b = copper_refs.index(frm) + 1, copper_refs.index(to) + 1
            lo, hi = min(a, b), max(a, b)
        if lo == hi:
            continue
        kind = "through" if (lo == 1 and hi == n) else "blind" if (lo == 1 or hi == n) else "buried"
        depth = _depth_mm(rows, lo, hi)
        drill, reason = "mechanical", "through hole" if kind == "through" else ""
        d = stats.min_plated_mm
        if kind != "through":
            if depth is None or d is None:
                reason = "depth unknown (missing thickness); taken as mechanical"
            elif depth <= MICROVIA_MAX_DEPTH_MM and depth <= MICROVIA_MAX_ASPECT * d:
                drill = "laser"
                reason = (
                    f"microvia: {depth:.3f} mm deep, {d:.3f} mm hole (aspect {depth / d:.2f}:1)"
                )
            else:
                reason = (
                    f"not a microvia: {depth:.3f} mm deep, {d:.3f} mm hole "
                    f"(aspect {depth / d:.2f}:1)"
                )
        key = (lo, hi)
        previous = out.get(key)
        holes = stats.plated + (previous.holes if previous else 0)
        out[key] = ViaSpan(
            from_layer=lo,
            to_layer=hi,
            kind=kind,
            drill=drill,
            holes=holes,
            min_hole_mm=None if d is None else _mm(d),
            depth_mm=None if depth is None else _mm(depth),
            source=where,
            reason=reason,
        )
    vias = sorted(out.values(), key=lambda v: (v.kind != "through", v.from_layer, v.to_layer))
    return vias, min_hole


def _depth_mm(rows: list[Row], lo: int, hi: int) -> float | None:
    """Dielectric and copper strictly between copper layers lo and hi."""
    depth = 0.0
    inside = False
    for r in rows:
        if r.copper_index == lo:
            inside = True
            continue
        if r.copper_index == hi:
            return depth / 1000.0
        if inside and r.counted and r.role in ("copper", "core", "prepreg"):
            if r.thickness_um is None:
                return None
            depth += r.thickness_um
    return None


def missing_fields(spec: Any, to_fill: list[str]) -> list[str]:
    """The to-fill fields a spec still lacks (dotted paths like "solder_mask.colour")."""
    out: list[str] = []
    for path in to_fill:
        node: Any = spec
        for part in path.split("."):
            node = node.get(part) if isinstance(node, dict) else None
            if node is None:
                break
        if node is None or (isinstance(node, str) and not node.strip()):
            out.append(path)
    return out
