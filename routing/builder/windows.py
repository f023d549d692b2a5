"""Default tolerance windows, by IPC class and finish, each with where it comes from.

Why every window carries a source: an operator who sees a reading rejected, or a
customer who questions a limit, must be able to see whether it comes from a published
standard, from the customer, or from this shop's own practice. Values recalled rather
than looked up in the standard are marked "from memory" so a process engineer knows to
confirm them against the revision named in the purchase order. Where no standard fixes
a number the source says "shop practice".

All values are in the canonical unit of `shopfloor.core.units` (µm, mm, percent, count).
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum
from typing import TYPE_CHECKING, Final

from shopfloor.core.units import canonical_unit

if TYPE_CHECKING:
    from routing.builder.spec import BuildSpec

__all__ = [
    "ATTRIBUTE_QUANTITIES",
    "QUANTITIES",
    "Provenance",
    "Window",
    "WindowRule",
    "hole_copper_rule",
    "provenance_of",
    "window_rule",
    "window_rules",
]

QUANTITIES: Final = (
    "hole_wall_copper",
    "surface_copper",
    "nickel_thickness",
    "gold_thickness",
    "palladium_thickness",
    "silver_thickness",
    "tin_thickness",
    "osp_thickness",
    "mask_registration",
    "mask_thickness",
    "vscore_web",
    "vscore_depth",
    "board_thickness",
    "bow_twist",
    "finished_hole_diameter",
    "conductor_width",
    "aoi_defects",
    "etest_opens",
    "etest_shorts",
    "etest_failed",
)
ATTRIBUTE_QUANTITIES: Final = frozenset(
    {"aoi_defects", "etest_opens", "etest_shorts", "etest_failed"}
)

#: Readings per measurement. Common practice: five readings (holes on a coupon, XRF
#: spots, points on a panel) give a usable average and show spread.
SAMPLES: Final = 5


class Provenance(StrEnum):
    """How far to trust a window's numbers."""

    STANDARD = "standard"  # looked up in the named standard
    FROM_MEMORY = "standard_from_memory"  # a standard's value as recalled; confirm it
    SHOP_PRACTICE = "shop_practice"  # no standard fixes it; this shop's practice
    LIBRARY = "library"  # set by a process engineer in the process library
    CUSTOMER = "customer"  # customer override on the job


@dataclass(frozen=True)
class Window:
    """What a measurement must read, in `unit`; `None` means no limit on that side.

    `attribute` windows count defects (max 0). `deviation` marks a customer-approved
    window looser than the default, with `reason`. `samples` None means every board.
    `applies_to` says what the limits bound (see `shopfloor.core.judging`): every reading
    ("each_reading"), or the sample set's "mean", "minimum", "maximum" or "range". One
    quantity may carry several windows (hole copper: mean and each reading).
    """

    quantity: str
    unit: str
    min: float | None
    max: float | None
    target: float | None
    samples: int | None
    source: str
    attribute: bool
    deviation: bool = False
    reason: str | None = None
    applies_to: str = "each_reading"


@dataclass(frozen=True)
class WindowRule:
    """A default window plus its provenance word (kept out of `Window` on purpose:
    the traveller shows the source text; the provenance is for reviews and reports)."""

    window: Window
    provenance: Provenance


def _round(v: float | None) -> float | None:
    """Four decimals: enough for 0.001 um gold, and free of float noise in the API."""
    return None if v is None else round(float(v), 4)


def _w(
    quantity: str,
    *,
    min: float | None = None,
    max: float | None = None,
    target: float | None = None,
    samples: int | None = SAMPLES,
    source: str,
    provenance: Provenance,
    applies_to: str = "each_reading",
) -> WindowRule:
    attribute = quantity in ATTRIBUTE_QUANTITIES
    window = Window(
        quantity=quantity,
        unit=canonical_unit(quantity),
        min=_round(min),
        max=_round(max),
        target=_round(target),
        samples=None if attribute else samples,
        source=source,
        attribute=attribute,
        applies_to=applies_to,
    )
    return WindowRule(window, provenance)


# IPC-6012, plated copper in holes, average / thin-area minimum in µm, by class
# (from memory; the table of surface and hole copper plating requirements).
_THROUGH_HOLE_CU: Final = {1: (20.0, 18.0), 2: (20.0, 18.0), 3: (25.0, 20.0)}
# Buried via cores (two-layer cores drilled and plated before lamination), from memory.
_BURIED_CORE_CU: Final = {1: (13.0, 11.0), 2: (13.0, 11.0), 3: (13.0, 11.0)}
# Microvias (blind, laser), class 2 and 3 from memory; class 1 not recalled, class 2
# applied as the conservative choice.
_MICROVIA_CU: Final = {1: (12.0, 10.0), 2: (12.0, 10.0), 3: (12.0, 10.0)}

# IPC-6012 final finish table, edge-board contacts (hard gold over nickel), from memory.
_HARD_GOLD_AU: Final = {1: 0.8, 2: 0.8, 3: 1.25}
_HARD_GOLD_NI: Final = {1: 2.0, 2: 2.5, 3: 2.5}

#: Base foil removed by cleaning and microetching before and during plating; shop
#: practice, consistent (from memory) with the allowance in the IPC-6012 table of
#: external conductor thickness after plating.
PROCESS_ALLOWANCE_UM: Final = 2.0
#: Copper normally added to the surface by panel and pattern plating (shop practice):
#: 17.5 µm base foil finishes near 40-42 µm.
TYPICAL_SURFACE_PLATING_UM: Final = 24.0
#: Over-plating beyond this makes fine lines hard to etch (shop practice).
MAX_SURFACE_PLATING_UM: Final = 40.0


def hole_copper_rules(ipc_class: int, hole: str = "through") -> tuple[WindowRule, WindowRule]:
    """Plated copper in holes: the class average for the mean of the set, and the
    thin-area minimum for every reading. `hole` is "through", "buried_core" or "microvia".

    IPC-6012 states the first figure for the *average* of the hole-wall measurements and
    the second for any thin area (table of surface and hole copper plating minimum
    requirements, Table 3-4 in revision D; from memory). Judging single readings
    against the average would hold good lots, so the two are separate entries.
    """
    table, what = {
        "through": (_THROUGH_HOLE_CU, "plated-through holes"),
        "buried_core": (_BURIED_CORE_CU, "buried via cores"),
        "microvia": (_MICROVIA_CU, "microvias"),
    }[hole]
    average, thin = table[ipc_class]
    clause = (
        f"IPC-6012 table of hole copper plating (Table 3-4 in rev. D) for {what}, class "
        f"{ipc_class}: average >= {average:g} um, thin area >= {thin:g} um (from memory; "
        "confirm against the revision on the order)"
    )
    return (
        _w(
            "hole_wall_copper",
            min=average,
            source=clause,
            provenance=Provenance.FROM_MEMORY,
            applies_to="mean",
        ),
        _w(
            "hole_wall_copper",
            min=thin,
            source=clause,
            provenance=Provenance.FROM_MEMORY,
            applies_to="each_reading",
        ),
    )


def hole_copper_rule(ipc_class: int, hole: str = "through") -> WindowRule:
    """The average (mean) entry of `hole_copper_rules` (kept for callers wanting one)."""
    return hole_copper_rules(ipc_class, hole)[0]


def _surface_copper(spec: BuildSpec) -> WindowRule:
    base = spec.outer_copper_base_um
    hole_avg, _ = _THROUGH_HOLE_CU[spec.ipc_class]
    low = 0.9 * base + hole_avg - PROCESS_ALLOWANCE_UM
    return _w(
        "surface_copper",
        min=low,
        max=base + MAX_SURFACE_PLATING_UM,
        target=base + TYPICAL_SURFACE_PLATING_UM,
        source=(
            f"shop practice, derived from {base:g} um base foil: minimum = 90 % of foil + "
            f"class {spec.ipc_class} hole plating ({hole_avg:g} um) - {PROCESS_ALLOWANCE_UM:g} "
            "um processing allowance (the IPC-6012 after-plating table follows the same "
            "method, from memory); target foil + 24 um; maximum foil + 40 um"
        ),
        provenance=Provenance.SHOP_PRACTICE,
    )


def _unplated_single_sided(spec: BuildSpec) -> bool:
    return spec.layers == 1


def window_rules(
    quantity: str,
    spec: BuildSpec,
    *,
    step_code: str = "",
    hole: str = "through",
    design_conductor_um: float | None = None,
    surface_mount: bool = True,
) -> tuple[WindowRule, ...]:
    """Every default window (entry) of `quantity` at this step: one for most quantities,
    two for hole copper (the class average for the mean, the thin area for each reading).
    """
    if quantity == "hole_wall_copper":
        return hole_copper_rules(spec.ipc_class, hole)
    return (
        window_rule(
            quantity,
            spec,
            step_code=step_code,
            hole=hole,
            design_conductor_um=design_conductor_um,
            surface_mount=surface_mount,
        ),
    )


def window_rule(
    quantity: str,
    spec: BuildSpec,
    *,
    step_code: str = "",
    hole: str = "through",
    design_conductor_um: float | None = None,
    surface_mount: bool = True,
) -> WindowRule:
    """The default window for `quantity` on this board, at the step (base code) given.

    `step_code` only matters where one quantity is measured in different processes
    (nickel and gold: ENIG, ENEPIG or hard-gold fingers).
    """
    cls = spec.ipc_class
    t = spec.board_thickness_mm
    hard_gold = step_code.startswith("gold_")
    if quantity == "hole_wall_copper":
        return hole_copper_rule(cls, hole)
    if quantity == "surface_copper":
        return _surface_copper(spec)
    if quantity == "nickel_thickness":
        if hard_gold:
            ni = _HARD_GOLD_NI[cls]
            return _w(
                quantity,
                min=ni,
                source=(
                    f"IPC-6012 final finish table, nickel under edge-board contact gold, class "
                    f"{cls}: >= {ni:g} um (from memory)"
                ),
                provenance=Provenance.FROM_MEMORY,
            )
        std = "IPC-4556 (ENEPIG)" if step_code.startswith("enepig") else "IPC-4552A (ENIG)"
        return _w(
            quantity,
            min=3.0,
            max=6.0,
            source=(
                f"{std} electroless nickel 3-6 um (from memory)"
                "; limits stated at +/-4 sigma of the measured population, so each "
                "reading is held to them and the series' capability checks the population"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "gold_thickness":
        if hard_gold:
            au = _HARD_GOLD_AU[cls]
            return _w(
                quantity,
                min=au,
                source=(
                    f"IPC-6012 final finish table, hard gold on edge-board contacts, class {cls}: "
                    f">= {au:g} um (from memory)"
                ),
                provenance=Provenance.FROM_MEMORY,
            )
        if step_code.startswith("enepig"):
            return _w(
                quantity,
                min=0.030,
                source=(
                    "IPC-4556 (ENEPIG) immersion gold >= 0.030 um (from memory)"
                    "; limits stated at +/-4 sigma of the measured population, so each "
                    "reading is held to them and the series' capability checks the population"
                ),
                provenance=Provenance.FROM_MEMORY,
            )
        return _w(
            quantity,
            min=0.040,
            max=0.100,
            source=(
                "IPC-4552A (ENIG) immersion gold 0.040-0.100 um (from memory)"
                "; limits stated at +/-4 sigma of the measured population, so each "
                "reading is held to them and the series' capability checks the population"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "palladium_thickness":
        return _w(
            quantity,
            min=0.05,
            max=0.30,
            source=(
                "IPC-4556 (ENEPIG) electroless palladium 0.05-0.30 um (from memory)"
                "; limits stated at +/-4 sigma of the measured population, so each "
                "reading is held to them and the series' capability checks the population"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "silver_thickness":
        return _w(
            quantity,
            min=0.12,
            max=0.40,
            source=(
                "IPC-4553A immersion silver, minimum 0.12 um (from memory); "
                "upper limit 0.40 um shop practice"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "tin_thickness":
        return _w(
            quantity,
            min=1.0,
            source=("IPC-4554 immersion tin >= 1.0 um (from memory)"),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "osp_thickness":
        return _w(
            quantity,
            min=0.2,
            max=0.5,
            source=(
                "shop practice for OSP 0.2-0.5 um (no thickness in a general standard; "
                "follow the chemistry supplier's data)"
            ),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity == "mask_registration":
        return _w(
            quantity,
            max=50.0,
            source=("shop practice: solder mask registration within 50 um of the pad"),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity == "mask_thickness":
        return _w(
            quantity,
            min=10.0,
            max=40.0,
            target=20.0,
            source=(
                "shop practice: mask over conductor 10-40 um (IPC-SM-840 sets no thickness "
                "unless the drawing does, from memory)"
            ),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity in {"vscore_web", "vscore_depth"}:
        web = t / 3.0
        tol = min(0.1, web * 0.3)
        if quantity == "vscore_web":
            return _w(
                quantity,
                min=web - tol,
                max=web + tol,
                target=web,
                source=(
                    f"shop practice: V-score web about one third of board thickness "
                    f"({t:g} mm / 3) ±{tol:.3g} mm"
                ),
                provenance=Provenance.SHOP_PRACTICE,
            )
        depth = (t - web) / 2.0
        return _w(
            quantity,
            min=depth - tol,
            max=depth + tol,
            target=depth,
            source=(f"shop practice: V-score depth per side = (thickness - web) / 2 ±{tol:.3g} mm"),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity == "board_thickness":
        return _w(
            quantity,
            min=t * 0.9,
            max=t * 1.1,
            target=t,
            source=(
                f"shop practice: board thickness {t:g} mm ±10 % unless the drawing states otherwise"
            ),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity == "bow_twist":
        limit, what = (0.75, "with") if surface_mount else (1.5, "without")
        other = "1.5 % applies to boards without" if surface_mount else "0.75 % with"
        return _w(
            quantity,
            max=limit,
            samples=2,
            source=(
                f"IPC-6012 bow and twist, boards {what} surface-mount parts: <= {limit:g} % "
                f"(from memory; {other})"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "finished_hole_diameter":
        d = spec.min_hole_mm
        tol = 0.05 if _unplated_single_sided(spec) else 0.075
        kind = "unplated" if _unplated_single_sided(spec) else "plated"
        return _w(
            quantity,
            min=max(d - tol, 0.0),
            max=d + tol,
            target=d,
            source=(f"shop practice: smallest {kind} finished hole {d:g} mm ±{tol:g} mm"),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity == "conductor_width":
        reduction = 0.30 if cls == 1 else 0.20
        rule = (
            f"IPC-6012 conductor width: no more than {reduction:.0%} below the design "
            f"width for class {cls} (from memory); upper limit +20 % shop practice"
        )
        if design_conductor_um is None:
            return _w(
                quantity,
                source=rule + "; limits are set from the design width at engineering review",
                provenance=Provenance.FROM_MEMORY,
            )
        w = design_conductor_um
        return _w(
            quantity,
            min=w * (1 - reduction),
            max=w * 1.2,
            target=w,
            source=rule + f"; design width {w:g} um",
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "aoi_defects":
        return _w(
            quantity,
            max=0,
            source=(
                "shop practice: every AOI call verified and repaired or scrapped before the "
                "lot moves (0 open defects)"
            ),
            provenance=Provenance.SHOP_PRACTICE,
        )
    if quantity in {"etest_opens", "etest_shorts"}:
        what = "opens" if quantity == "etest_opens" else "shorts"
        return _w(
            quantity,
            max=0,
            source=(
                f"IPC-9252 electrical test of bare boards: a board passes with no {what} "
                "(from memory)"
            ),
            provenance=Provenance.FROM_MEMORY,
        )
    if quantity == "etest_failed":
        # One count per lot: the boards that failed, out of the boards tested (the lot's
        # good boards unless the operator says fewer were tested). No per-lot limit:
        # failed boards are repaired and retested or scrapped one by one (the opens and
        # shorts windows judge each), and the p / np chart of the series watches the
        # failure rate (a point beyond its limit raises a drift alert).
        return _w(
            quantity,
            source=(
                "shop practice: every board is tested (100 % electrical test of bare "
                "boards, common practice); the failure rate is watched on a p chart, "
                "no per-lot limit"
            ),
            provenance=Provenance.SHOP_PRACTICE,
        )
    raise KeyError(f"no default window for quantity {quantity!r}; known: {', '.join(QUANTITIES)}")


def provenance_of(source: str) -> Provenance:
    """Best guess of a window's provenance from its source text (for reports)."""
    text = source.lower()
    if text.startswith("customer"):
        return Provenance.CUSTOMER
    if text.startswith("process library"):
        return Provenance.LIBRARY
    if "from memory" in text and text.startswith(("ipc", "j-std")):
        return Provenance.FROM_MEMORY
    if text.startswith("shop practice"):
        return Provenance.SHOP_PRACTICE
    return Provenance.STANDARD
