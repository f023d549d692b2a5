"""Bath replenishment by mass balance, amp-hour dosing and electroless nickel turnovers.

Why: a lab technician analyses a bath, finds it off target, and must add the right
amount of a concentrate (or dilute, or dump part of the bath first). Done in the head
this goes wrong in two classic ways: forgetting that the addition itself adds volume
(so the bath ends a little under target), and "adding" to a bath whose target is below
the measured value. This module does the arithmetic exactly and refuses what cannot work.

Mass balance for one parameter, concentrations in one unit (g/L, mL/L, ...):

    V·X + a·S = (V + a)·T   =>   a = V·(T − X) / (S − T)

with V the bath volume (L), X measured, T target, S the stock (concentrate) strength and
a the litres of stock to add. When the tank cannot hold V + a (its working volume Vm),
part of the bath (d litres) is dumped first and the addition brings it back to Vm:

    (V − d)·X + a·S = Vm·T  and  V − d + a = Vm
    =>  d = (Vm·T − V·X − (Vm − V)·S) / (S − X),  a = Vm − V + d

To lower a parameter, only water (S = 0) helps: w = V·(X − T) / T, or, when that
overflows, keep K = Vm·T / X litres and top up to Vm with water.

Everything returned is advice for a qualified person, who checks it against the site's
procedures and the safety data sheets before anything goes into a tank.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from shopfloor.core.chemistry.errors import ChemistryInputError, non_negative, positive

MAX_VOLUME_L = 100_000.0  # 100 m³: larger than any PCB line tank


class StockTooWeak(ChemistryInputError):
    """The concentrate is not stronger than the target: no amount of it reaches target."""


@dataclass(frozen=True)
class Addition:
    """What to do to a bath for one parameter, with the volumes in litres.

    action: "none" (already on target), "add", "dump_then_add", "dilute",
    "dump_then_dilute". `add_l` is the stock to add, `water_l` water to add, `dump_l`
    bath to remove first; `new_volume_l` and `new_value` the bath afterwards.
    `notes` are plain sentences for the person (alternatives, cautions).
    """

    action: str
    add_l: float
    water_l: float
    dump_l: float
    new_volume_l: float
    new_value: float
    notes: tuple[str, ...] = field(default=())


def _check(
    volume_l: object, measured: object, target: object, max_volume_l: object | None
) -> tuple[float, float, float, float | None]:
    v = positive("bath volume", volume_l, ceiling=MAX_VOLUME_L, unit=" L")
    x = non_negative("measured value", measured)
    t = positive("target", target)
    vm: float | None = None
    if max_volume_l is not None:
        vm = positive("tank working volume", max_volume_l, ceiling=MAX_VOLUME_L, unit=" L")
        if vm < v:
            raise ChemistryInputError(
                f"bath volume {v:g} L is above the tank's working volume {vm:g} L; "
                "check the level reading"
            )
    return v, x, t, vm


def _on_target(x: float, t: float) -> bool:
    return abs(x - t) <= 1e-9 * max(abs(t), 1.0)


def concentrate_addition(
    volume_l: object,
    measured: object,
    target: object,
    stock: object,
    *,
    max_volume_l: object | None = None,
    high: object | None = None,
) -> Addition:
    """Litres of a liquid concentrate of strength `stock` that bring `measured` to `target`.

    With `high` (the window's upper limit) a value above target but still inside the
    window is left alone: diluting would lower every other parameter of the bath too.

    `measured`, `target` and `stock` are in one unit. The addition's own volume is counted.
    With `max_volume_l` (the tank's working volume) an addition that would overflow
    becomes "dump d litres first, then add". A target below the measured value gives
    dilution advice; a stock no stronger than the target is refused (StockTooWeak).
    """
    v, x, t, vm = _check(volume_l, measured, target, max_volume_l)
    s = non_negative("stock strength", stock)
    if _on_target(x, t):
        return Addition("none", 0.0, 0.0, 0.0, v, x, ("The bath is on target: add nothing.",))
    if t < x:
        if high is not None and x <= non_negative("window high", high):
            return Addition(
                "none",
                0.0,
                0.0,
                0.0,
                v,
                x,
                (
                    "Above target but inside the window: add nothing. Diluting would lower "
                    "every other parameter of the bath too; let use bring it down.",
                ),
            )
        return _lower(v, x, t, vm)
    if s <= t:
        raise StockTooWeak(
            f"the stock ({s:g}) is not stronger than the target ({t:g}): adding it can only "
            "move the bath toward the stock's own strength, never up to the target. Use a "
            "stronger concentrate, or dump part of the bath and make it up fresh."
        )
    a = v * (t - x) / (s - t)
    if vm is None or v + a <= vm:
        return Addition("add", a, 0.0, 0.0, v + a, t)
    d = (vm * t - v * x - (vm - v) * s) / (s - x)
    a = vm - v + d
    return Addition(
        "dump_then_add",
        a,
        0.0,
        d,
        vm,
        t,
        (
            f"Adding {v * (t - x) / (s - t):.3g} L straight away would overflow the tank "
            f"({vm:g} L working volume), so dump {d:.3g} L of bath first.",
        ),
    )


def _lower(v: float, x: float, t: float, vm: float | None) -> Addition:
    """Target below measured: water dilutes; when it would overflow, dump and top up."""
    w = v * (x - t) / t
    keep_same_level = v * t / x
    dump_same_level = v - keep_same_level
    if vm is None or v + w <= vm:
        return Addition(
            "dilute",
            0.0,
            w,
            0.0,
            v + w,
            t,
            (
                "The target is below the measured value: adding concentrate cannot lower "
                "it. Dilute with water (as given), or dump and top up. Diluting also lowers "
                "every other parameter of the bath: re-analyse them.",
                f"Or: dump {dump_same_level:.3g} L and top back up to {v:g} L with water.",
            ),
        )
    keep = vm * t / x
    return Addition(
        "dump_then_dilute",
        0.0,
        vm - keep,
        v - keep,
        vm,
        t,
        (
            "The target is below the measured value: adding concentrate cannot lower it, "
            f"and diluting with {w:.3g} L of water would overflow the tank ({vm:g} L). "
            "Dump first, then top up with water.",
            "Diluting also lowers every other parameter of the bath: re-analyse them.",
        ),
    )


def solid_addition(
    volume_l: object,
    measured: object,
    target: object,
    *,
    assay: object = 1.0,
    displacement_l_per_kg: object = 0.0,
    max_volume_l: object | None = None,
) -> tuple[float, Addition]:
    """Grams of a solid salt that bring a mass concentration (g/L) from measured to target.

    `assay` is the mass fraction of the analysed species in the solid (1.0 when the
    parameter is the salt itself); `displacement_l_per_kg` the volume one kilogram of it
    adds once dissolved (0 to neglect). Mass balance:
    V·X + m·p = (V + k·m/1000)·T  =>  m = V·(T − X) / (p − k·T/1000).
    Returns (grams, the bath afterwards). A target below measured gives dilution advice
    (0 g) like `concentrate_addition`.
    """
    v, x, t, vm = _check(volume_l, measured, target, max_volume_l)
    p = positive("assay", assay)
    if p > 1:
        raise ChemistryInputError(f"assay {p:g} is above 1; give it as a mass fraction (0.98)")
    k = non_negative("displacement", displacement_l_per_kg, unit=" L/kg")
    if _on_target(x, t):
        return 0.0, Addition("none", 0.0, 0.0, 0.0, v, x, ("The bath is on target.",))
    if t < x:
        return 0.0, _lower(v, x, t, vm)
    denominator = p - k * t / 1000.0
    if denominator <= 0:
        raise StockTooWeak(
            f"with an assay of {p:g} and {k:g} L/kg displacement the salt cannot reach "
            f"{t:g} g/L; check the assay and displacement"
        )
    grams = v * (t - x) / denominator
    added_l = k * grams / 1000.0
    if vm is not None and v + added_l > vm:
        raise ChemistryInputError(
            f"dissolving {grams:.4g} g adds {added_l:.3g} L and overflows the tank "
            f"({vm:g} L); lower the level first"
        )
    return grams, Addition("add", 0.0, 0.0, 0.0, v + added_l, t)


@dataclass(frozen=True)
class AmpHourDose:
    """An additive dose from the rectifier's amp-hour counter."""

    amp_hours: float
    dose_ml: float


def amp_hour_dose(
    rate_ml_per_kah: object, counter_now_ah: object, counter_at_last_dose_ah: object
) -> AmpHourDose:
    """mL of additive for the charge passed since the last dose (rate in mL per kAh).

    Additives (brighteners, carriers, levellers) are consumed roughly in proportion to
    the charge passed, so suppliers quote a replenishment rate per kiloampere-hour
    (common practice). A counter that went backwards was reset: refused, with what to do.
    """
    rate = positive("dosing rate", rate_ml_per_kah, ceiling=100_000.0, unit=" mL/kAh")
    now = non_negative("amp-hour counter", counter_now_ah, unit=" Ah")
    last = non_negative("counter at the last dose", counter_at_last_dose_ah, unit=" Ah")
    if now < last:
        raise ChemistryInputError(
            f"the amp-hour counter ({now:g} Ah) is below its reading at the last dose "
            f"({last:g} Ah): it was reset. Record a new starting reading after a reset and "
            "dose from that."
        )
    ah = now - last
    return AmpHourDose(ah, rate * ah / 1000.0)


@dataclass(frozen=True)
class Turnovers:
    """Electroless nickel bath age in metal turnovers (MTO)."""

    turnovers: float
    dump_at: float
    remaining: float
    dump_due: bool
    nickel_per_turnover_g: float


def metal_turnovers(
    nickel_replenished_g: object,
    volume_l: object,
    makeup_nickel_g_per_l: object,
    *,
    dump_at: object = 5.0,
) -> Turnovers:
    """Metal turnovers of an electroless nickel bath and whether it is due to be dumped.

    One metal turnover is the bath's whole make-up nickel content replenished once:
    MTO = nickel replenished (g) / (bath volume (L) × make-up nickel (g/L)). Orthophosphite
    and sulfate build up with every turnover until deposits suffer, so the bath is dumped
    at a set age; supplier sheets typically put it at about 4 to 6 MTO (common practice;
    the site sets its own `dump_at`).
    """
    added = non_negative("nickel replenished", nickel_replenished_g, unit=" g")
    v = positive("bath volume", volume_l, ceiling=MAX_VOLUME_L, unit=" L")
    ni = positive("make-up nickel", makeup_nickel_g_per_l, ceiling=200.0, unit=" g/L")
    limit = positive("dump point", dump_at, ceiling=50.0, unit=" MTO")
    per = v * ni
    mto = added / per
    return Turnovers(mto, limit, max(limit - mto, 0.0), mto >= limit, per)
