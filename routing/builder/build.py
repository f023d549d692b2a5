"""Turn a validated build spec into a routing: the ordered steps of a rigid board.

Why the order is fixed in code while the steps are data: the sequence of a rigid
board follows from chemistry and mechanics (you cannot plate before you drill, mask
must be cured before finish chemistry touches it), so it is not something an admin
edit should be able to break. What each step is called, where it runs, its time and
parameters come from the process library, which the process engineer owns.

Order, leaving out what does not apply: engineering review; phototools; for each
lamination cycle: inner-layer clean/image/develop/etch/strip/AOI/punch, bond treatment,
layup, press, X-ray drill, drill (mechanical, laser), desmear, hole metallisation, and
for sub-assemblies panel plating; then outer imaging, pattern plating (copper, tin),
strip/etch/strip, outer AOI; solder mask; legend; final cure; hard-gold fingers;
surface finish; electrical test; profiling; finger bevel; OSP (applied last, after
test and profiling, because probing and routing damage the thin organic coat: common
practice); final inspection; pack.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from .default_library import DEFAULT_PLATING_ALLOWANCE_MM
from .library import ProcessLibrary, StepDefinition
from .spec import BuildSpec, SubAssembly, Via
from .windows import Window, window_rules

__all__ = ["Routing", "Step", "Window", "build_routing"]


@dataclass(frozen=True)
class Step:
    """One line of the traveller. `code` is stable across revisions (diffs key on it)."""

    seq: int
    code: str
    name: str
    work_center: str
    instructions: str
    parameters: dict[str, Any]
    measurements: tuple[Window, ...]
    hazard: str | None
    queue_time_limit_minutes: int | None
    standard_minutes: int
    cycle: int | None


@dataclass(frozen=True)
class Routing:
    steps: tuple[Step, ...]
    warnings: tuple[str, ...]
    lamination_cycles: int
    aspect_ratio: float
    microvia_aspect_ratio: float | None

    def step(self, code: str) -> Step:
        for s in self.steps:
            if s.code == code:
                return s
        raise KeyError(code)

    @property
    def codes(self) -> tuple[str, ...]:
        return tuple(s.code for s in self.steps)

    @property
    def standard_minutes(self) -> int:
        """Total standard time per lot, for due-date risk."""
        return sum(s.standard_minutes for s in self.steps)


_FINISH_STEPS: dict[str, tuple[str, ...]] = {
    "enig": ("enig_clean", "enig_nickel", "enig_gold"),
    "enepig": ("enepig_clean", "enepig_nickel", "enepig_palladium", "enepig_gold"),
    "immersion_silver": ("silver_clean", "silver_immersion"),
    "immersion_tin": ("tin_clean", "tin_immersion"),
    "hasl_lead_free": ("hasl_clean", "hasl_flux", "hasl_level", "hasl_post_clean"),
    "osp": ("osp_clean", "osp_coat"),
    "none": (),
}
_INNER = (
    "inner_clean",
    "inner_image",
    "inner_develop",
    "inner_etch",
    "inner_strip",
    "inner_aoi",
    "post_etch_punch",
)
_PRESS = ("bond_treatment", "layup", "press", "xray_drill_trim")
_OUTER_PLATED = (
    "outer_clean",
    "outer_image",
    "outer_develop",
    "pattern_plate_copper",
    "pattern_plate_tin",
    "outer_resist_strip",
    "outer_etch",
    "tin_strip",
    "outer_aoi",
)
# Print-and-etch for single-sided boards: the resist protects the copper directly.
_OUTER_PRINT_ETCH = (
    "outer_clean",
    "outer_image",
    "outer_develop",
    "outer_etch",
    "outer_resist_strip",
    "outer_aoi",
)
_MASK = ("mask_clean", "mask_coat", "mask_tack_dry", "mask_expose", "mask_develop")
_GOLD = ("gold_tape", "gold_nickel_plate", "gold_plate", "gold_untape")


@dataclass
class _Planned:
    base: str
    cycle: int | None = None
    params: dict[str, Any] = field(default_factory=dict)
    hole: str = "through"
    skip_quantities: frozenset[str] = frozenset()


def _labels(layers: Iterable[int]) -> list[str]:
    return [f"L{n}" for n in layers]


def _hole_context(subs: tuple[SubAssembly, ...]) -> str:
    vias = [v for s in subs for v in s.vias]
    if vias and all(v.drill == "laser" for v in vias):
        return "microvia"
    if subs and all(not s.needs_press for s in subs):
        return "buried_core"
    return "through"


def _cycle_steps(spec: BuildSpec) -> list[_Planned]:
    """Inner layers, presses and drilling per lamination cycle (see `plan_lamination`)."""
    plan = spec.lamination
    n = spec.layers
    out: list[_Planned] = []
    imaged: set[int] = set()
    for cycle in range(1, plan.cycles + 1):
        final = cycle == plan.cycles
        subs = plan.in_cycle(cycle)
        stacks: list[tuple[int, int]] = [(1, n)] if final else [(s.lo, s.hi) for s in subs]
        vias: tuple[Via, ...] = plan.final_vias if final else tuple(v for s in subs for v in s.vias)
        inner = sorted({k for lo, hi in stacks for k in range(lo + 1, hi) if k not in imaged})
        imaged.update(inner)
        if inner:
            for base in _INNER:
                out.append(_Planned(base, cycle, {"layers": _labels(inner)}))
        pressed = [(lo, hi) for lo, hi in stacks if hi - lo >= 2]
        if pressed:
            stack_text = [f"L{lo}-L{hi}" for lo, hi in pressed]
            for base in _PRESS:
                out.append(_Planned(base, cycle, {"stacks": stack_text}))
        stack_labels = [f"L{lo}-L{hi}" for lo, hi in stacks]
        mech = [v.label() for v in vias if v.drill == "mechanical"]
        laser = [v.label() for v in vias if v.drill == "laser"]
        if final or mech:
            params: dict[str, Any] = {"stacks": stack_labels, "vias": mech}
            if final:
                params["finished_hole_mm"] = spec.min_hole_mm
            out.append(_Planned("drill_mechanical", cycle, params))
        if laser:
            out.append(_Planned("drill_laser", cycle, {"stacks": stack_labels, "vias": laser}))
        out.append(_Planned("desmear", cycle, {"stacks": stack_labels}))
        out.append(_Planned("hole_metallisation", cycle, {"stacks": stack_labels}))
        if not final:
            out.append(
                _Planned("panel_plate", cycle, {"stacks": stack_labels}, hole=_hole_context(subs))
            )
    return out


def _plan(spec: BuildSpec) -> list[_Planned]:
    steps = [_Planned("engineering_review"), _Planned("phototool_prep")]
    if spec.layers == 1:
        steps += [
            _Planned(
                "drill_mechanical", params={"finished_hole_mm": spec.min_hole_mm, "plated": False}
            ),
            _Planned("deburr"),
        ]
        steps += [_Planned(b) for b in _OUTER_PRINT_ETCH]
    elif spec.layers == 2:
        steps += [
            _Planned("drill_mechanical", params={"finished_hole_mm": spec.min_hole_mm}),
            _Planned("desmear"),
            _Planned("hole_metallisation"),
        ]
        steps += [_Planned(b) for b in _OUTER_PLATED]
    else:
        steps += _cycle_steps(spec)
        steps += [_Planned(b) for b in _OUTER_PLATED]
    if spec.has_mask:
        mask = {"sides": spec.solder_mask.sides, "colour": spec.solder_mask.colour}
        steps += [_Planned(b, params=dict(mask)) for b in _MASK]
    if spec.has_legend:
        steps.append(_Planned("legend_print", params={"sides": spec.legend.sides}))
    if spec.has_mask or spec.has_legend:
        skip = frozenset() if spec.has_mask else frozenset({"mask_thickness"})
        steps.append(_Planned("final_cure", skip_quantities=skip))
    if spec.hard_gold_fingers:
        steps += [_Planned(b) for b in _GOLD]
    finish = _FINISH_STEPS[spec.finish]
    if spec.finish != "osp":
        extra = {"protect_gold_fingers": True} if spec.hard_gold_fingers and finish else {}
        steps += [_Planned(b, params=dict(extra)) for b in finish]
    steps.append(_Planned(f"etest_{spec.electrical_test}"))
    if spec.profile in ("route", "route_and_v_score"):
        steps.append(_Planned("profile_route"))
    if spec.profile in ("v_score", "route_and_v_score"):
        steps.append(_Planned("profile_vscore"))
    if spec.hard_gold_fingers:
        steps.append(_Planned("finger_bevel"))
    if spec.finish == "osp":
        extra = {"protect_gold_fingers": True} if spec.hard_gold_fingers else {}
        steps += [_Planned(b, params=dict(extra)) for b in finish]
    steps += [_Planned("final_inspection"), _Planned("pack")]
    return steps


def _code(p: _Planned) -> str:
    return p.base if p.cycle is None else f"{p.base}_c{p.cycle}"


def _windows(
    spec: BuildSpec,
    p: _Planned,
    d: StepDefinition,
    design_conductor_um: float | None,
    surface_mount: bool,
) -> tuple[Window, ...]:
    out: list[Window] = []
    for quantity, override in d.measurements.items():
        if quantity in p.skip_quantities:
            continue
        defaults = [
            r.window
            for r in window_rules(
                quantity,
                spec,
                step_code=p.base,
                hole=p.hole,
                design_conductor_um=design_conductor_um,
                surface_mount=surface_mount,
            )
        ]
        if override.sets_limits:
            # The library's own window replaces the default entries of this quantity.
            w = defaults[0]
            out.append(
                Window(
                    quantity=w.quantity,
                    unit=w.unit,
                    min=override.min,
                    max=override.max,
                    target=override.target,
                    samples=override.samples if override.samples is not None else w.samples,
                    source=f"process library: {override.source}",
                    attribute=w.attribute,
                    applies_to=override.applies_to or "each_reading",
                )
            )
            continue
        for w in defaults:
            if override.samples is not None and not w.attribute:
                w = dataclasses.replace(w, samples=override.samples)
            out.append(w)
    return tuple(out)


def drill_size(params: Mapping[str, Any]) -> dict[str, Any]:
    """The drill to load for the smallest hole: its finished size plus the plating
    allowance of the library's drill step (none for unplated holes).

    The drill step used to be handed the finished hole size, which would leave a plated
    hole undersize by twice the wall copper. The allowance comes from the process
    library (`plating_allowance_mm`, shop practice; DEFAULT_PLATING_ALLOWANCE_MM when a
    stored library predates it).
    """
    finished = float(params["finished_hole_mm"])
    plated = params.get("plated", True) is not False
    allowance = params.get("plating_allowance_mm", DEFAULT_PLATING_ALLOWANCE_MM)
    if not plated:
        allowance = 0.0
    return {
        "plating_allowance_mm": allowance,
        "drill_diameter_mm": round(finished + float(allowance), 3),
    }


def build_routing(
    spec: BuildSpec,
    library: ProcessLibrary | None = None,
    *,
    design_conductor_um: float | None = None,
    surface_mount: bool = True,
) -> Routing:
    """Build the routing for `spec` from `library` (the built-in one by default).

    `design_conductor_um` (the narrowest design conductor, from CAM data) sets the
    conductor-width window; without it the window has no limits and a warning says so.
    `surface_mount` picks the IPC-6012 bow-and-twist limit (0.75 % or 1.5 %).
    """
    lib = library or ProcessLibrary.default()
    planned = _plan(spec)
    codes = [_code(p) for p in planned]
    steps: list[Step] = []
    for i, p in enumerate(planned):
        d = lib.steps[p.base]
        params = dict(d.parameters)
        params.update(p.params)
        if "finished_hole_mm" in params:
            params.update(drill_size(params))
        if d.queue_time_limit_minutes is not None and d.queue_time_until:
            params["queue_time_until"] = _resolve_until(d.queue_time_until, planned, codes, i)
        steps.append(
            Step(
                seq=i + 1,
                code=codes[i],
                name=d.name if p.cycle is None else f"{d.name} (cycle {p.cycle})",
                work_center=d.work_center,
                instructions=d.instructions,
                parameters=params,
                measurements=_windows(spec, p, d, design_conductor_um, surface_mount),
                hazard=d.hazard,
                queue_time_limit_minutes=d.queue_time_limit_minutes,
                standard_minutes=d.standard_minutes,
                cycle=p.cycle,
            )
        )
    warnings = list(spec.warnings)
    if design_conductor_um is None:
        warnings.append(
            "conductor_width has no limits yet: enter the narrowest design conductor width "
            "at engineering review"
        )
    return Routing(
        steps=tuple(steps),
        warnings=tuple(warnings),
        lamination_cycles=spec.lamination.cycles,
        aspect_ratio=spec.aspect_ratio,
        microvia_aspect_ratio=spec.microvia_aspect_ratio,
    )


def _resolve_until(until: str, planned: list[_Planned], codes: list[str], i: int) -> str:
    """The concrete step code a queue-time limit runs to (the next matching step)."""
    for j in range(i + 1, len(planned)):
        base = planned[j].base
        if until == "next_plating" and base in ("panel_plate", "pattern_plate_copper"):
            return codes[j]
        if base == until:
            return codes[j]
    return until
