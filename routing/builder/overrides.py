"""Customer overrides of measurement windows on one job.

Why tighter and looser are treated differently: a customer asking for a tighter window
costs yield but cannot ship a worse board, so it is applied at once. A looser window
means shipping something the default would reject; that needs a named process
engineer's approval, and the traveller must show it as a deviation with its reason.

Override values are in the quantity's canonical unit (convert at the edge with
`shopfloor.core.units.to_canonical`). A `None` limit means "keep the default on that side".
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Literal

from shopfloor.core.units import UnitError, canonical_unit, to_canonical

from .build import Routing, Step
from .windows import Window

__all__ = ["Override", "OverrideInvalid", "OverrideRefused", "apply_overrides", "classify_override"]

Classification = Literal["tighter", "same", "looser"]


class OverrideRefused(ValueError):
    """An override that may not be applied; the message says why and what to do."""


class OverrideInvalid(OverrideRefused):
    """An override that is malformed (bad numbers, min above max, no such window)."""


@dataclass(frozen=True)
class Override:
    quantity: str
    step_code: str | None
    min: float | None
    max: float | None
    target: float | None
    reason: str
    approved_by: str | None = None
    #: Which entry of the quantity to change ("mean", "each_reading", ...); None changes
    #: every entry of the quantity (hole copper: the average and the thin-area entry).
    applies_to: str | None = None


def _check(o: Override) -> None:
    try:
        canonical_unit(o.quantity)
    except UnitError as exc:
        raise OverrideInvalid(str(exc)) from None
    if not isinstance(o.reason, str) or not o.reason.strip():
        raise OverrideInvalid(
            f"override of {o.quantity}: a reason is required (e.g. the customer drawing note)"
        )
    for name in ("min", "max", "target"):
        v = getattr(o, name)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v):
            raise OverrideInvalid(f"override of {o.quantity}: {name} must be a finite number")
        try:
            to_canonical(o.quantity, v, canonical_unit(o.quantity))
        except UnitError as exc:
            raise OverrideInvalid(f"override {name}: {exc}") from None
    if o.min is not None and o.max is not None and o.min > o.max:
        raise OverrideInvalid(f"override of {o.quantity}: min {o.min:g} is above max {o.max:g}")
    allowed = ("each_reading", "mean", "minimum", "maximum", "range")
    if o.applies_to is not None and o.applies_to not in allowed:
        raise OverrideInvalid(
            f"override of {o.quantity}: applies_to {o.applies_to!r} is not one of "
            f"{', '.join(allowed)} (leave it out to change every entry of the quantity)"
        )


def _merged(default: Window, o: Override) -> tuple[float | None, float | None, float | None]:
    lo = default.min if o.min is None else float(o.min)
    hi = default.max if o.max is None else float(o.max)
    target = default.target if o.target is None else float(o.target)
    return lo, hi, target


def classify_override(default: Window, o: Override) -> Classification:
    """Is the override tighter than, the same as, or looser than the default window?

    Looser on either side makes the whole override looser, even if the other side is
    tightened: the board could then pass a reading the default would reject.
    """
    lo, hi, _ = _merged(default, o)
    looser = (default.min is not None and (lo is None or lo < default.min)) or (
        default.max is not None and (hi is None or hi > default.max)
    )
    if looser:
        return "looser"
    if lo == default.min and hi == default.max:
        return "same"
    return "tighter"


def _apply_one(w: Window, o: Override) -> Window:
    lo, hi, target = _merged(w, o)
    if lo is not None and hi is not None and lo > hi:
        raise OverrideInvalid(
            f"override of {o.quantity}: the resulting window {lo:g}-{hi:g} {w.unit} is empty"
        )
    if target is not None and (
        (lo is not None and target < lo) or (hi is not None and target > hi)
    ):
        raise OverrideInvalid(
            f"override of {o.quantity}: target {target:g} {w.unit} lies outside the window"
        )
    kind = classify_override(w, o)
    if kind == "looser":
        if not o.approved_by or not o.approved_by.strip():
            raise OverrideRefused(
                f"override of {o.quantity} is looser than the default "
                f"({_describe(w.min, w.max, w.unit)} per {w.source}); it needs a process "
                "engineer's approval (approved_by) before it can go on the traveller"
            )
        return dataclasses.replace(
            w,
            min=lo,
            max=hi,
            target=target,
            source=(
                f"customer deviation approved by {o.approved_by.strip()}: {o.reason.strip()} "
                f"(default {_describe(w.min, w.max, w.unit)} per {w.source})"
            ),
            deviation=True,
            reason=o.reason.strip(),
        )
    if kind == "same" and target == w.target:
        return w
    return dataclasses.replace(
        w, min=lo, max=hi, target=target, source=f"customer spec: {o.reason.strip()}"
    )


def _describe(lo: float | None, hi: float | None, unit: str) -> str:
    if lo is not None and hi is not None:
        return f"{lo:g}-{hi:g} {unit}"
    if lo is not None:
        return f">= {lo:g} {unit}"
    if hi is not None:
        return f"<= {hi:g} {unit}"
    return "no limits"


def apply_overrides(routing: Routing, overrides: list[Override]) -> Routing:
    """Apply every override (in order) and return a new routing; nothing is half-applied.

    An override with `step_code` None applies to every window of that quantity.
    Raises `OverrideRefused` (looser without approval) or `OverrideInvalid`.
    """
    steps = list(routing.steps)
    for o in overrides:
        _check(o)
        hit = False
        for i, step in enumerate(steps):
            if o.step_code is not None and step.code != o.step_code:
                continue
            windows = list(step.measurements)
            for j, w in enumerate(windows):
                if w.quantity == o.quantity and o.applies_to in (None, w.applies_to):
                    windows[j] = _apply_one(w, o)
                    hit = True
            steps[i] = _with_measurements(step, tuple(windows))
        if not hit:
            where = f"step {o.step_code}" if o.step_code else "any step"
            raise OverrideInvalid(
                f"override of {o.quantity}: no {o.quantity} measurement at {where} in this routing"
            )
    return dataclasses.replace(routing, steps=tuple(steps))


def _with_measurements(step: Step, windows: tuple[Window, ...]) -> Step:
    if windows == step.measurements:
        return step
    return dataclasses.replace(step, measurements=windows)
