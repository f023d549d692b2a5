"""Judge a value against a tolerance window (pure; no Django imports).

A window has an optional lower limit, an optional upper limit and an optional target,
all in the quantity's canonical unit. Limits are inclusive: a reading exactly on a
specification limit conforms (common practice when reading a min/max requirement).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Judgement:
    in_window: bool
    side: str  # "in", "low" or "high"
    margin: float | None  # distance to the nearest limit (negative when outside)
    message: str


def judge(value: float, low: float | None, high: float | None, unit: str = "") -> Judgement:
    if not math.isfinite(value):
        raise ValueError("value must be a finite number")
    suffix = f" {unit}" if unit else ""
    margins: list[float] = []
    if low is not None:
        margins.append(value - low)
        if value < low:
            return Judgement(
                False, "low", value - low, f"{value:g}{suffix} is below the minimum {low:g}{suffix}"
            )
    if high is not None:
        margins.append(high - value)
        if value > high:
            return Judgement(
                False,
                "high",
                high - value,
                f"{value:g}{suffix} is above the maximum {high:g}{suffix}",
            )
    return Judgement(True, "in", min(margins) if margins else None, "in window")


def judge_window(value: float, window: dict[str, Any]) -> Judgement:
    return judge(value, window.get("min"), window.get("max"), window.get("unit", ""))


def describe_window(window: dict[str, Any]) -> str:
    """A window (a plan entry, or a reading's snapshot with all criteria of its quantity)
    in plain words, rounded to the quantity's resolution: 'average of 5 samples ≥ 25 µm;
    each ≥ 20 µm', '33.8 – 57.5 µm (target 41.5 µm)'."""
    from shopfloor.core import judging

    return judging.describe_criteria(judging.criteria_of(window))
