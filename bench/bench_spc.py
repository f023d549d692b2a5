"""Benchmark: cost per reading of the incremental run-rule evaluation.

Builds a rule state from 100 and from 100,000 readings of history, then times the same
batch of further readings from each. Because :func:`shopfloor.core.spc.step` keeps
only bounded bit masks and counters, the two figures should be the same within noise.

    python bench/bench_spc.py            # prints JSON
"""

from __future__ import annotations

import gc
import json
import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from shopfloor.core.spc import RuleState, fixed_limits, step

LIMITS = fixed_limits(10.0, 13.0, 7.0, sigma=1.0)
TIMED_READINGS = 20_000
REPEATS = 5


def _history(length: int, rng: random.Random) -> RuleState:
    state = RuleState()
    for _ in range(length):
        state, _ = step(state, rng.gauss(10.0, 1.0), LIMITS, "nelson")
    return state


def _seconds(state: RuleState, readings: list[float]) -> float:
    """One timed pass starting from a copy of the stored state (as the service would:
    load the state, step the new reading, save the state)."""
    current = RuleState.from_dict(state.to_dict())
    gc.collect()
    gc.disable()
    try:
        start = time.perf_counter()
        for x in readings:
            current, _ = step(current, x, LIMITS, "nelson")
        return time.perf_counter() - start
    finally:
        gc.enable()


def run() -> dict[str, float]:
    """Return microseconds per reading after 100 and after 100,000 readings of history.

    The two histories are timed alternately and the best pass of each is kept, so that
    warm-up and machine noise affect both figures alike.
    """
    rng = random.Random(20240601)
    readings = [rng.gauss(10.0, 1.0) for _ in range(TIMED_READINGS)]
    states = {
        "spc_us_per_reading_100": _history(100, random.Random(1)),
        "spc_us_per_reading_100000": _history(100_000, random.Random(2)),
    }
    best = dict.fromkeys(states, float("inf"))
    for _ in range(REPEATS):
        for key, state in states.items():
            best[key] = min(best[key], _seconds(state, readings))
    return {key: seconds / len(readings) * 1e6 for key, seconds in best.items()}


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
