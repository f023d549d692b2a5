"""Good boards into and out of each step of a lot, and the yield of each step.

Why a pure function: the lot history, the job page and the API all show the same figures.
Each step's scrap (boards crossed out, panels scrapped, boards a disposition scrapped) is
recorded at that step; the boards entering the lot are the good boards now plus every
board ever scrapped, so the counts add up whichever way they are read.

Yield of a step = boards out / boards in (first-pass yield per operation, the usual
definition in fab reporting: common practice). A step nothing entered has no yield.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass


@dataclass(frozen=True)
class StepScrap:
    """One step of a lot in route order with the boards and panels scrapped there."""

    key: int
    name: str
    boards_scrapped: int
    panels_scrapped: int


@dataclass(frozen=True)
class StepYield:
    key: int
    name: str
    boards_in: int
    boards_scrapped: int
    boards_out: int
    panels_scrapped: int

    @property
    def yield_pct(self) -> float | None:
        if self.boards_in == 0:
            return None
        return 100.0 * self.boards_out / self.boards_in


def step_yields(good_now: int, steps: Sequence[StepScrap]) -> list[StepYield]:
    """Walk the route: in_1 = good_now + all scrap; out_i = in_i - scrap_i."""
    if good_now < 0:
        raise ValueError("good_now cannot be negative")
    total = sum(s.boards_scrapped for s in steps)
    running = good_now + total
    out: list[StepYield] = []
    for s in steps:
        if s.boards_scrapped < 0 or s.panels_scrapped < 0:
            raise ValueError(f"negative scrap at step {s.name}")
        after = running - s.boards_scrapped
        out.append(StepYield(s.key, s.name, running, s.boards_scrapped, after, s.panels_scrapped))
        running = after
    return out


def overall_yield(yields: Sequence[StepYield]) -> float | None:
    """Rolled yield of the route: boards out of the last step / boards into the first."""
    if not yields or yields[0].boards_in == 0:
        return None
    return 100.0 * yields[-1].boards_out / yields[0].boards_in
