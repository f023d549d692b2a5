"""The build spec: what a customer's board is, as the routing builder needs to know it.

Why a hand-written validator instead of a schema library: a sales engineer pastes or
types a spec and needs every problem at once, each tied to the field it came from
("vias[2].to"), with the allowed values beside it. A schema error list does not know
shop rules (plating aspect ratio, microvia depth, lamination sequence), so we check
types and shop rules in one pass and collect everything.

The vocabulary and the parsed spec's dataclasses are in spec_model.py (re-exported here,
see __all__); the lamination plan (how many press cycles a via structure needs) is
derived in lamination.py and checked here, because a via structure no press sequence can
build is a spec error, not a build error. The JSON Schema is spec_schema.py, the example
specs examples.py.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Mapping
from typing import Any, Final

from shopfloor.core import units

from .lamination import Unbuildable, plan_lamination
from .spec_model import (
    DRILLS,
    ELECTRICAL_TESTS,
    FINISHES,
    LAYER_COUNTS,
    MASK_COLOURS,
    OPTIONAL_KEYS,
    PROFILES,
    REQUIRED_KEYS,
    SIDES,
    STACKUP_KINDS,
    STACKUP_TOLERANCE,
    VIA_KINDS,
    BuildSpec,
    LaminationPlan,
    Legend,
    Outline,
    ShopCapability,
    SolderMask,
    SpecError,
    SpecInvalid,
    StackupLayer,
    SubAssembly,
    Via,
    canonical_choice,
    json_safe,
)

__all__ = [
    "DRILLS",
    "ELECTRICAL_TESTS",
    "FINISHES",
    "LAYER_COUNTS",
    "MASK_COLOURS",
    "OPTIONAL_KEYS",
    "PROFILES",
    "REQUIRED_KEYS",
    "SIDES",
    "STACKUP_KINDS",
    "STACKUP_TOLERANCE",
    "VIA_KINDS",
    "BuildSpec",
    "LaminationPlan",
    "Legend",
    "Outline",
    "ShopCapability",
    "SolderMask",
    "SpecError",
    "SpecInvalid",
    "StackupLayer",
    "SubAssembly",
    "Via",
    "canonical_choice",
    "normalise_spec",
    "parse_spec",
    "plan_lamination",
]


_THICKNESS_ALLOWED: Final = {
    True: "a number in um, or text such as '1 oz', '0.5oz', '35 um', '1.4 mil'",
    False: "a number in um, or text such as '100 um', '4 mil', '0.1 mm'",
}
_NUMBER_AND_UNIT: Final = re.compile(r"^\s*([0-9]+(?:\.[0-9]*)?|\.[0-9]+)\s*(\S*)\s*$")


def _thickness_text(text: str, copper: bool) -> float | str:
    """Text like "1 oz" as um, or the reason it is not a thickness."""

    match = _NUMBER_AND_UNIT.match(text)
    if match is None:
        return "not a thickness: give a number and a unit"
    number, unit = float(match.group(1)), match.group(2) or "um"
    if not copper and unit.lower().startswith("oz"):
        return "copper weight (oz) is only for copper; give a length"
    try:
        return units.to_canonical("surface_copper", number, unit)
    except units.UnitError as exc:
        return str(exc).replace("surface_copper: ", "")


# --------------------------------------------------------------------------- helpers


class _Collector:
    def __init__(self) -> None:
        self.errors: list[SpecError] = []
        self.warnings: list[str] = []

    def add(
        self, field_: str, value: Any, problem: str, allowed: str | list[Any] | None = None
    ) -> None:
        self.errors.append(SpecError(field_, value, problem, allowed))

    def keys(
        self,
        where: str,
        data: Mapping[str, Any],
        required: tuple[str, ...],
        optional: tuple[str, ...],
    ) -> None:
        prefix = f"{where}." if where else ""
        allowed = sorted([*required, *optional])
        for key in data:
            if key not in required and key not in optional:
                self.add(f"{prefix}{key}", data[key], "unknown key", allowed)
        for key in required:
            if key not in data:
                self.add(f"{prefix}{key}", None, "missing required key", allowed)

    def number(
        self,
        field_: str,
        value: Any,
        *,
        low: float,
        high: float,
        low_inclusive: bool = False,
        unit: str = "",
    ) -> float | None:
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.add(field_, value, f"must be a number ({unit})".replace(" ()", ""))
            return None
        number = float(value)
        span = f"{'>=' if low_inclusive else '>'} {low:g} and <= {high:g} {unit}".strip()
        if not math.isfinite(number):
            self.add(field_, value, "must be a finite number", span)
            return None
        too_low = number < low if low_inclusive else number <= low
        if too_low:
            problem = "must be greater than zero" if low == 0 and not low_inclusive else "too small"
            self.add(field_, value, problem, span)
            return None
        if number > high:
            self.add(field_, value, "implausibly large; check the value and its unit", span)
            return None
        return number

    def integer(self, field_: str, value: Any, allowed: list[int] | tuple[int, ...]) -> int | None:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                self.add(field_, value, "must be a whole number", list(allowed))
                return None
        if value not in allowed:
            return None
        return int(value)

    def choice(self, field_: str, value: Any, allowed: tuple[str, ...]) -> str | None:
        """One of `allowed`, in any case and with spaces or hyphens for underscores
        ("ENIG", "Flying probe", "route-and-v-score"): people type what the drawing says."""
        if not isinstance(value, str):
            self.add(field_, value, "must be text", list(allowed))
            return None
        canonical = canonical_choice(value)
        if canonical not in allowed:
            self.add(field_, value, "not one of the allowed values", list(allowed))
            return None
        return canonical

    def thickness(self, field_: str, value: Any, *, high: float, copper: bool) -> float | None:
        """A thickness in um, or text with a unit: "35 um", "1.4 mil", "1 oz", "0.5oz".

        The conversion is shopfloor.core.units (the one conversion module; 1 oz/ft² of copper
        = 34.79 um, common practice); copper weight is accepted only for copper.
        """
        if isinstance(value, str):
            converted = _thickness_text(value, copper)
            if isinstance(converted, str):
                self.add(field_, value, converted, _THICKNESS_ALLOWED[copper])
                return None
            value = converted
        return self.number(field_, value, low=0, high=high, unit="um")


# --------------------------------------------------------------------------- parse


def parse_spec(data: object, capability: ShopCapability | None = None) -> BuildSpec:
    """Validate a JSON-decoded spec and return it as frozen dataclasses.

    Raises `SpecInvalid` listing every problem found. Rules that only make a job risky
    (aspect ratio above the comfortable limit, a laser skip via, a microvia depth
    estimated without a stack-up) become `BuildSpec.warnings` instead.
    """
    cap = capability or ShopCapability()
    c = _Collector()
    if not isinstance(data, Mapping):
        c.add(
            "(spec)",
            data,
            "the spec must be a JSON object",
            "an object with keys " + ", ".join(REQUIRED_KEYS),
        )
        raise SpecInvalid(c.errors)
    d: Mapping[str, Any] = data
    c.keys("", d, REQUIRED_KEYS, OPTIONAL_KEYS)

    layers: int | None = None
    if "layers" in d:
        layers = c.integer("layers", d["layers"], LAYER_COUNTS)
        if layers is None and not any(e.field == "layers" for e in c.errors):
            v = d["layers"]
            odd = isinstance(v, int) and 3 <= v <= 40 and v % 2
            c.add(
                "layers",
                v,
                "a multilayer board has an even number of copper layers"
                if odd
                else "layer count out of range",
                "1, 2 or an even number from 4 to 40",
            )

    ipc_class: int | None = None
    if "ipc_class" in d:
        ipc_class = c.integer("ipc_class", d["ipc_class"], (1, 2, 3))
        if ipc_class is None and not any(e.field == "ipc_class" for e in c.errors):
            c.add("ipc_class", d["ipc_class"], "IPC class must be 1, 2 or 3", [1, 2, 3])

    thickness = (
        c.number(
            "board_thickness_mm",
            d["board_thickness_mm"],
            low=0.1,
            high=10.0,
            low_inclusive=True,
            unit="mm",
        )
        if "board_thickness_mm" in d
        else None
    )
    outer_cu = (
        c.thickness("outer_copper_base_um", d["outer_copper_base_um"], high=420.0, copper=True)
        if "outer_copper_base_um" in d
        else None
    )
    inner_cu: float | None = None
    if "inner_copper_um" in d and not (d["inner_copper_um"] is None and (layers or 0) < 4):
        inner_cu = c.thickness("inner_copper_um", d["inner_copper_um"], high=420.0, copper=True)
    elif layers is not None and layers >= 4:
        c.add(
            "inner_copper_um",
            None,
            "required for boards with inner layers (4 or more)",
            "a number > 0 and <= 420 um",
        )

    finish = c.choice("finish", d["finish"], FINISHES) if "finish" in d else None
    profile = c.choice("profile", d["profile"], PROFILES) if "profile" in d else None
    etest = (
        c.choice("electrical_test", d["electrical_test"], ELECTRICAL_TESTS)
        if "electrical_test" in d
        else None
    )
    min_hole = (
        c.number(
            "min_hole_mm", d["min_hole_mm"], low=0.05, high=10.0, low_inclusive=True, unit="mm"
        )
        if "min_hole_mm" in d
        else None
    )

    gold = False
    if "hard_gold_fingers" in d:
        if not isinstance(d["hard_gold_fingers"], bool):
            c.add(
                "hard_gold_fingers", d["hard_gold_fingers"], "must be true or false", [True, False]
            )
        else:
            gold = d["hard_gold_fingers"]

    mask = _parse_mask(c, d.get("solder_mask", {}))
    legend = _parse_legend(c, d.get("legend", {}))
    vias = _parse_vias(c, d.get("vias", []), layers)
    stackup = (
        _parse_stackup(c, d["stackup"]) if "stackup" in d and d["stackup"] is not None else None
    )
    outline = (
        _parse_outline(c, d["outline"]) if "outline" in d and d["outline"] is not None else None
    )

    if layers is not None and stackup is not None:
        _check_stackup(c, stackup, layers, thickness, outer_cu)

    aspect: float | None = None
    if thickness is not None and min_hole is not None and layers is not None and layers >= 2:
        aspect = thickness / min_hole
        allowed = f"<= {cap.max_aspect_ratio:g}:1 (shop plating capability)"
        if aspect > cap.max_aspect_ratio:
            c.add(
                "min_hole_mm",
                d["min_hole_mm"],
                f"aspect ratio {aspect:.1f}:1 (board thickness / smallest hole) is beyond "
                "what the plating line can plate reliably",
                allowed,
            )
        elif aspect > cap.warn_aspect_ratio:
            c.warnings.append(
                f"aspect ratio {aspect:.1f}:1 is above {cap.warn_aspect_ratio:g}:1; "
                "expect slower plating and extra cross-sections"
            )

    plan: LaminationPlan | None = None
    microvia_ar: float | None = None
    via_errors_before = len(c.errors)
    if layers is not None and not any(e.field.startswith("vias") for e in c.errors):
        _check_laser_depth(c, cap, vias)
        microvia_ar = _microvia_aspect_ratio(
            c, cap, vias, layers, thickness, outer_cu, inner_cu, stackup
        )
        if len(c.errors) == via_errors_before:
            plan = _plan_or_error(c, layers, vias)

    if c.errors:
        raise SpecInvalid(c.errors)
    assert layers is not None and ipc_class is not None and thickness is not None
    assert outer_cu is not None and finish is not None and profile is not None
    assert etest is not None and min_hole is not None and plan is not None
    return BuildSpec(
        layers=layers,
        ipc_class=ipc_class,
        board_thickness_mm=thickness,
        outer_copper_base_um=outer_cu,
        inner_copper_um=inner_cu,
        finish=finish,
        hard_gold_fingers=gold,
        solder_mask=mask or SolderMask(),
        legend=legend or Legend(),
        profile=profile,
        electrical_test=etest,
        min_hole_mm=min_hole,
        vias=vias,
        stackup=stackup,
        warnings=tuple(c.warnings),
        lamination=plan,
        microvia_aspect_ratio=microvia_ar,
        outline=outline,
    )


def normalise_spec(data: object, capability: ShopCapability | None = None) -> dict[str, Any]:
    """The spec as it is stored: validated by `parse_spec` (SpecInvalid otherwise), with
    enumerated values in their stored spelling ("ENIG" -> "enig") and thicknesses typed
    with a unit converted to um ("1 oz" -> 34.79). The keys given stay the keys stored;
    a spec already in stored form comes back equal, so normalising twice changes nothing.
    """
    spec = parse_spec(data, capability)
    assert isinstance(data, Mapping)
    out: dict[str, Any] = dict(data)
    out["layers"] = spec.layers
    out["ipc_class"] = spec.ipc_class
    out["finish"] = spec.finish
    out["profile"] = spec.profile
    out["electrical_test"] = spec.electrical_test
    out["outer_copper_base_um"] = _number_as_given(
        data["outer_copper_base_um"], spec.outer_copper_base_um
    )
    if data.get("inner_copper_um") is not None and spec.inner_copper_um is not None:
        out["inner_copper_um"] = _number_as_given(data["inner_copper_um"], spec.inner_copper_um)
    if "solder_mask" in data:
        out["solder_mask"] = {"sides": spec.solder_mask.sides, "colour": spec.solder_mask.colour}
    if "legend" in data:
        out["legend"] = {"sides": spec.legend.sides}
    if "vias" in data:
        out["vias"] = [
            {"from": v.from_layer, "to": v.to_layer, "kind": v.kind, "drill": v.drill}
            for v in spec.vias
        ]
    if data.get("stackup") is not None and spec.stackup is not None:
        rows = []
        for raw, layer in zip(data["stackup"], spec.stackup, strict=True):
            row: dict[str, Any] = {
                "kind": layer.kind,
                "thickness_um": _number_as_given(raw["thickness_um"], layer.thickness_um),
            }
            if "material" in raw:
                row["material"] = layer.material
            rows.append(row)
        out["stackup"] = rows
    return out


def _number_as_given(raw: Any, parsed: float) -> Any:
    """Keep a number as typed (35 stays 35); text with a unit becomes um, rounded to 0.01."""
    if isinstance(raw, int | float) and not isinstance(raw, bool):
        return raw
    return round(parsed, 2)


def _parse_outline(c: _Collector, raw: Any) -> Outline | None:
    """Optional outline size (a design import fills it from the file's board profile)."""
    if not isinstance(raw, Mapping):
        c.add("outline", raw, "must be an object", "{'width_mm': ..., 'height_mm': ...}")
        return None
    c.keys("outline", raw, ("width_mm", "height_mm"), ())
    sizes = [
        c.number(f"outline.{k}", raw[k], low=0, high=2000.0, unit="mm") if k in raw else None
        for k in ("width_mm", "height_mm")
    ]
    if sizes[0] is None or sizes[1] is None:
        return None
    return Outline(width_mm=sizes[0], height_mm=sizes[1])


def _parse_mask(c: _Collector, raw: Any) -> SolderMask | None:
    if not isinstance(raw, Mapping):
        c.add("solder_mask", raw, "must be an object", "{'sides': ..., 'colour': ...}")
        return None
    c.keys("solder_mask", raw, (), ("sides", "colour"))
    sides = c.choice("solder_mask.sides", raw.get("sides", "both"), SIDES)
    if sides == "none":
        # No mask: the colour may be left out or be "none"; anything else is a mistake.
        given = raw.get("colour", "none")
        if given is None or (isinstance(given, str) and canonical_choice(given) == "none"):
            return SolderMask(sides="none", colour="none")
        c.add(
            "solder_mask.colour",
            given,
            "a board without solder mask has no mask colour",
            "leave it out, or 'none'",
        )
        return None
    colour = c.choice("solder_mask.colour", raw.get("colour", "green"), MASK_COLOURS)
    if sides is None or colour is None:
        return None
    return SolderMask(sides=sides, colour=colour)


def _parse_legend(c: _Collector, raw: Any) -> Legend | None:
    if not isinstance(raw, Mapping):
        c.add("legend", raw, "must be an object", "{'sides': ...}")
        return None
    c.keys("legend", raw, (), ("sides",))
    sides = c.choice("legend.sides", raw.get("sides", "both"), SIDES)
    return Legend(sides=sides) if sides is not None else None


def _parse_vias(c: _Collector, raw: Any, layers: int | None) -> tuple[Via, ...]:
    if not isinstance(raw, list):
        c.add("vias", raw, "must be a list", "a list of {'from', 'to', 'kind', 'drill'}")
        return ()
    out: list[Via] = []
    if layers == 1 and raw:
        c.add("vias", raw, "a single-sided board has no plated vias", "[]")
        return ()
    for i, item in enumerate(raw):
        where = f"vias[{i}]"
        if not isinstance(item, Mapping):
            c.add(where, item, "must be an object", "{'from', 'to', 'kind', 'drill'}")
            continue
        n_before = len(c.errors)
        c.keys(where, item, ("from", "to", "kind", "drill"), ())
        ends: dict[str, int | None] = {}
        for end in ("from", "to"):
            if end not in item:
                ends[end] = None
                continue
            v = item[end]
            if isinstance(v, bool) or not isinstance(v, int):
                c.add(f"{where}.{end}", v, "must be a whole layer number", f"1 to {layers or 40}")
                ends[end] = None
            elif layers is not None and not 1 <= v <= layers:
                c.add(
                    f"{where}.{end}",
                    v,
                    f"layer {v} does not exist on a {layers}-layer board",
                    f"1 to {layers}",
                )
                ends[end] = None
            else:
                ends[end] = v
        kind = c.choice(f"{where}.kind", item["kind"], VIA_KINDS) if "kind" in item else None
        drill = c.choice(f"{where}.drill", item["drill"], DRILLS) if "drill" in item else None
        lo, hi = ends.get("from"), ends.get("to")
        if lo is not None and hi is not None and lo >= hi:
            c.add(
                f"{where}.to",
                hi,
                f"must be greater than 'from' ({lo}); layers count from the top",
                f"{lo + 1} to {layers or 40}",
            )
        elif lo is not None and hi is not None and kind is not None and layers is not None:
            _check_kind(c, where, lo, hi, kind, layers)
        if len(c.errors) == n_before:
            assert lo is not None and hi is not None and kind is not None and drill is not None
            out.append(Via(lo, hi, kind, drill))
    return tuple(out)


def _check_kind(c: _Collector, where: str, lo: int, hi: int, kind: str, layers: int) -> None:
    top, bottom = lo == 1, hi == layers
    if top and bottom:
        actual = "through"
    elif top or bottom:
        actual = "blind"
    else:
        actual = "buried"
    if kind != actual:
        c.add(
            f"{where}.kind",
            kind,
            f"a via from layer {lo} to {hi} on a {layers}-layer board is {actual}, not {kind}",
            [actual],
        )


def _check_laser_depth(c: _Collector, cap: ShopCapability, vias: tuple[Via, ...]) -> None:
    for i, v in enumerate(vias):
        if v.drill != "laser":
            continue
        if v.layers_spanned > cap.laser_layers_max:
            c.add(
                f"vias[{i}].drill",
                "laser",
                f"a laser via spanning {v.layers_spanned} copper layers is too deep to drill "
                "and plate reliably; stack microvias instead (one per level) or drill mechanically",
                f"laser vias span at most {cap.laser_layers_max} copper layers",
            )
        elif v.layers_spanned > cap.laser_layers_ok:
            c.warnings.append(
                f"vias[{i}] {v.label()}: a laser skip via spans two dielectrics; "
                "check the microvia depth and plating with a cross-section"
            )


def _dielectric_depth_um(
    v: Via,
    layers: int,
    thickness: float | None,
    outer_cu: float | None,
    inner_cu: float | None,
    stackup: tuple[StackupLayer, ...] | None,
) -> tuple[float | None, bool]:
    """Dielectric between the via's end layers; (depth, estimated?)."""
    if stackup is not None and sum(1 for s in stackup if s.kind == "copper") == layers:
        depth = 0.0
        copper_index = 0
        for s in stackup:
            if s.kind == "copper":
                copper_index += 1
            elif v.from_layer <= copper_index < v.to_layer:
                depth += s.thickness_um
        return depth, False
    if thickness is None or outer_cu is None or layers < 2:
        return None, True
    copper = 2 * outer_cu + (layers - 2) * (inner_cu or 0.0)
    gap = max(thickness * 1000.0 - copper, 0.0) / (layers - 1)
    return gap * (v.to_layer - v.from_layer), True


def _microvia_aspect_ratio(
    c: _Collector,
    cap: ShopCapability,
    vias: tuple[Via, ...],
    layers: int,
    thickness: float | None,
    outer_cu: float | None,
    inner_cu: float | None,
    stackup: tuple[StackupLayer, ...] | None,
) -> float | None:
    worst: float | None = None
    for i, v in enumerate(vias):
        if v.drill != "laser":
            continue
        depth, estimated = _dielectric_depth_um(v, layers, thickness, outer_cu, inner_cu, stackup)
        if depth is None:
            continue
        ratio = round(depth / (cap.laser_hole_mm * 1000.0), 3)
        worst = ratio if worst is None else max(worst, ratio)
        if ratio <= cap.max_microvia_aspect_ratio:
            continue
        text = (
            f"microvia aspect ratio {ratio:.2f}:1 (dielectric {depth:.0f} um over a "
            f"{cap.laser_hole_mm:g} mm laser hole) exceeds {cap.max_microvia_aspect_ratio:g}:1"
        )
        limit_um = cap.max_microvia_aspect_ratio * cap.laser_hole_mm * 1000
        if estimated:
            c.warnings.append(
                f"vias[{i}] {v.label()}: {text}, estimated from evenly spaced layers; "
                "give a stack-up to check it properly"
            )
        else:
            c.add(
                f"vias[{i}]",
                json_safe({"from": v.from_layer, "to": v.to_layer}),
                text + " (IPC-2226 guidance, from memory; common practice)",
                f"dielectric depth <= {limit_um:g} um",
            )
    return worst


def _parse_stackup(c: _Collector, raw: Any) -> tuple[StackupLayer, ...] | None:
    if not isinstance(raw, list) or not raw:
        c.add(
            "stackup",
            raw,
            "must be a non-empty list, top to bottom",
            "a list of {'kind', 'thickness_um', 'material'}",
        )
        return None
    out: list[StackupLayer] = []
    ok = True
    for i, item in enumerate(raw):
        where = f"stackup[{i}]"
        if not isinstance(item, Mapping):
            c.add(where, item, "must be an object", "{'kind', 'thickness_um', 'material'}")
            ok = False
            continue
        n_before = len(c.errors)
        c.keys(where, item, ("kind", "thickness_um"), ("material",))
        kind = c.choice(f"{where}.kind", item["kind"], STACKUP_KINDS) if "kind" in item else None
        t = (
            c.thickness(
                f"{where}.thickness_um",
                item["thickness_um"],
                high=5000.0,
                copper=kind == "copper",
            )
            if "thickness_um" in item
            else None
        )
        material = item.get("material", "")
        if not isinstance(material, str) or len(material) > 80:
            c.add(
                f"{where}.material",
                material,
                "must be text of at most 80 characters",
                "e.g. 'FR-4 high-Tg core'",
            )
        if len(c.errors) != n_before:
            ok = False
            continue
        assert kind is not None and t is not None
        out.append(StackupLayer(kind, t, material if isinstance(material, str) else ""))
    return tuple(out) if ok else None


def _check_stackup(
    c: _Collector,
    stackup: tuple[StackupLayer, ...],
    layers: int,
    thickness: float | None,
    outer_cu: float | None,
) -> None:
    coppers = [i for i, s in enumerate(stackup) if s.kind == "copper"]
    if len(coppers) != layers:
        c.add(
            "stackup",
            f"{len(coppers)} copper layers",
            f"the stack-up has {len(coppers)} copper layers but 'layers' is {layers}",
            f"exactly {layers} copper entries",
        )
    if stackup[0].kind != "copper" or (layers > 1 and stackup[-1].kind != "copper"):
        c.add(
            "stackup",
            [stackup[0].kind, stackup[-1].kind],
            "a stack-up starts and ends with copper (outer layers)",
            "copper first and last",
        )
    for a, b in itertools.pairwise(coppers):
        if b == a + 1:
            c.add(
                f"stackup[{b}]",
                "copper",
                "two copper layers touch; a dielectric (core or prepreg) must separate them",
                "core or prepreg between copper layers",
            )
    if outer_cu is not None and coppers:
        for idx in {coppers[0], coppers[-1]}:
            if abs(stackup[idx].thickness_um - outer_cu) > 0.5:
                c.add(
                    f"stackup[{idx}].thickness_um",
                    stackup[idx].thickness_um,
                    "outer copper in the stack-up disagrees with outer_copper_base_um",
                    f"{outer_cu:g} um",
                )
    if thickness is not None:
        total_mm = sum(s.thickness_um for s in stackup) / 1000.0
        lo, hi = thickness * (1 - STACKUP_TOLERANCE), thickness * (1 + STACKUP_TOLERANCE)
        if not lo <= total_mm <= hi:
            c.add(
                "stackup",
                f"{total_mm:.3f} mm",
                f"summed stack-up thickness {total_mm:.3f} mm is outside board_thickness_mm "
                f"{thickness:g} mm ±10 % (common practice)",
                f"{lo:.3f} to {hi:.3f} mm",
            )


# --------------------------------------------------------------------------- lamination


def _plan_or_error(c: _Collector, layers: int, vias: tuple[Via, ...]) -> LaminationPlan | None:
    try:
        return plan_lamination(layers, vias)
    except Unbuildable as exc:
        c.add(
            "vias",
            [v.label() for v in vias],
            str(exc),
            "buried spans that nest inside each other or do not touch",
        )
        return None


# --------------------------------------------------------------------------- schema


# --------------------------------------------------------------------------- examples
