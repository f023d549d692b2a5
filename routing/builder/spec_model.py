"""The build spec's vocabulary and shape: the allowed values (finishes, sides, profiles,
via kinds, layer counts, ...), the shop's capability limits, and the parsed spec's
dataclasses (BuildSpec and its parts, the lamination plan), with the error types.

Parsing and checking a spec is routing/builder/spec.py; deriving press cycles is
routing/builder/lamination.py.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, Final

FINISHES: Final = (
    "enig",
    "enepig",
    "immersion_silver",
    "immersion_tin",
    "hasl_lead_free",
    "osp",
    "none",
)


SIDES: Final = ("both", "top", "bottom", "none")


PROFILES: Final = ("route", "v_score", "route_and_v_score")


ELECTRICAL_TESTS: Final = ("flying_probe", "fixture")


VIA_KINDS: Final = ("blind", "buried", "through")


DRILLS: Final = ("laser", "mechanical")


STACKUP_KINDS: Final = ("copper", "core", "prepreg")


LAYER_COUNTS: Final = (1, 2, *range(4, 41, 2))


MASK_COLOURS: Final = ("green", "matte_green", "red", "blue", "black", "white", "yellow", "purple")


REQUIRED_KEYS: Final = (
    "layers",
    "ipc_class",
    "board_thickness_mm",
    "outer_copper_base_um",
    "finish",
    "profile",
    "electrical_test",
    "min_hole_mm",
)


OPTIONAL_KEYS: Final = (
    "inner_copper_um",
    "hard_gold_fingers",
    "solder_mask",
    "legend",
    "vias",
    "stackup",
    "outline",
)


#: Summed stack-up thickness may differ from the stated board thickness by this much.
#: Common practice: finished thickness tolerance is ±10 % unless the drawing says less.
STACKUP_TOLERANCE: Final = 0.10


@dataclass(frozen=True)
class ShopCapability:
    """What this shop's lines can plate and drill; parameters, because shops differ.

    Defaults are common practice: through-hole plating is routinely good to 8:1 and
    possible to 10:1 with care; a laser microvia should be no deeper than it is wide
    (1:1, IPC-2226 guidance from memory) and normally spans one dielectric.
    """

    max_aspect_ratio: float = 10.0
    warn_aspect_ratio: float = 8.0
    laser_hole_mm: float = 0.1
    max_microvia_aspect_ratio: float = 1.0
    #: Copper layers a laser via may span without a warning (adjacent layers = 2).
    laser_layers_ok: int = 2
    #: Copper layers a laser via may span at all (3 = a "skip via", warned).
    laser_layers_max: int = 3


@dataclass(frozen=True)
class SpecError:
    """One problem with a spec: where, what was given, what is wrong, what is allowed."""

    field: str
    value: Any
    problem: str
    allowed: str | list[Any] | None = None

    def as_dict(self) -> dict[str, Any]:
        """JSON-safe form for the API (values that are not JSON become their repr)."""
        return {
            "field": self.field,
            "value": json_safe(self.value),
            "problem": self.problem,
            "allowed": self.allowed,
        }


def json_safe(value: Any) -> Any:
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else repr(value)
    if isinstance(value, list | tuple):
        return [json_safe(v) for v in value]
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    return repr(value)


def canonical_choice(value: str) -> str:
    """The stored spelling of an enumerated value: lower case, underscores."""
    return "_".join(value.strip().lower().replace("-", " ").split())


class SpecInvalid(ValueError):
    """Raised with every problem found in a spec, not just the first."""

    def __init__(self, errors: list[SpecError]) -> None:
        self.errors = list(errors)
        lines = "; ".join(f"{e.field}: {e.problem}" for e in self.errors)
        super().__init__(f"{len(self.errors)} problem(s) in build spec: {lines}")

    def as_dicts(self) -> list[dict[str, Any]]:
        return [e.as_dict() for e in self.errors]


@dataclass(frozen=True)
class SolderMask:
    sides: str = "both"
    colour: str = "green"


@dataclass(frozen=True)
class Legend:
    sides: str = "both"


@dataclass(frozen=True)
class Via:
    """A via structure: copper layers `from_layer`..`to_layer` (1 = top), inclusive."""

    from_layer: int
    to_layer: int
    kind: str
    drill: str

    @property
    def span(self) -> tuple[int, int]:
        return (self.from_layer, self.to_layer)

    @property
    def layers_spanned(self) -> int:
        return self.to_layer - self.from_layer + 1

    def label(self) -> str:
        return f"L{self.from_layer}-L{self.to_layer} {self.kind} {self.drill}"


@dataclass(frozen=True)
class StackupLayer:
    kind: str
    thickness_um: float
    material: str = ""


@dataclass(frozen=True)
class Outline:
    """The board's outline size (its profile's bounding box), for panelisation."""

    width_mm: float
    height_mm: float


@dataclass(frozen=True)
class SubAssembly:
    """Layers lo..hi laminated (or a single core) and drilled before the next press."""

    lo: int
    hi: int
    cycle: int
    vias: tuple[Via, ...]

    @property
    def needs_press(self) -> bool:
        """A single core (two adjacent copper layers) is already laminated."""
        return self.hi - self.lo >= 2

    def label(self) -> str:
        return f"L{self.lo}-L{self.hi}"


@dataclass(frozen=True)
class LaminationPlan:
    """Press cycles for a board: sub-assemblies by cycle, then the final cycle."""

    cycles: int
    sub_assemblies: tuple[SubAssembly, ...]
    final_vias: tuple[Via, ...]

    def in_cycle(self, cycle: int) -> tuple[SubAssembly, ...]:
        return tuple(s for s in self.sub_assemblies if s.cycle == cycle)


@dataclass(frozen=True)
class BuildSpec:
    layers: int
    ipc_class: int
    board_thickness_mm: float
    outer_copper_base_um: float
    inner_copper_um: float | None
    finish: str
    hard_gold_fingers: bool
    solder_mask: SolderMask
    legend: Legend
    profile: str
    electrical_test: str
    min_hole_mm: float
    vias: tuple[Via, ...] = ()
    stackup: tuple[StackupLayer, ...] | None = None
    #: Problems that do not stop a build but a process engineer should see.
    warnings: tuple[str, ...] = ()
    lamination: LaminationPlan = field(
        default_factory=lambda: LaminationPlan(cycles=0, sub_assemblies=(), final_vias=())
    )
    microvia_aspect_ratio: float | None = None
    outline: Outline | None = None

    @property
    def aspect_ratio(self) -> float:
        """Board thickness over smallest hole: what limits plating into the hole."""
        return round(self.board_thickness_mm / self.min_hole_mm, 3)

    @property
    def has_mask(self) -> bool:
        return self.solder_mask.sides != "none"

    @property
    def has_legend(self) -> bool:
        return self.legend.sides != "none"
