"""Per-step and rolled yield (shopfloor.core.yields).

Closed form: the rolled yield of a route equals the product of its step yields
(rolled throughput yield, textbook definition: RTY = product of first-pass yields), and
boards out of a step equal boards in minus boards scrapped there.
"""

from __future__ import annotations

import math

import pytest

from shopfloor.core.yields import StepScrap, overall_yield, step_yields


def test_worked_example_100_boards():
    # 100 boards enter; 5 scrapped at AOI, 3 at electrical test, 0 at inspection.
    steps = [
        StepScrap(1, "AOI", 5, 0),
        StepScrap(2, "Electrical test", 3, 1),
        StepScrap(3, "Final inspection", 0, 0),
    ]
    ys = step_yields(92, steps)
    assert [y.boards_in for y in ys] == [100, 95, 92]
    assert [y.boards_out for y in ys] == [95, 92, 92]
    assert ys[0].yield_pct == pytest.approx(95.0)
    assert ys[1].yield_pct == pytest.approx(100 * 92 / 95)
    rolled = overall_yield(ys)
    assert rolled == pytest.approx(92.0)
    assert rolled == pytest.approx(100 * math.prod(y.yield_pct / 100 for y in ys))


def test_nothing_entered_has_no_yield():
    ys = step_yields(0, [StepScrap(1, "Drill", 0, 0)])
    assert ys[0].yield_pct is None and overall_yield(ys) is None


def test_negative_counts_are_refused():
    with pytest.raises(ValueError):
        step_yields(-1, [])
    with pytest.raises(ValueError):
        step_yields(1, [StepScrap(1, "Drill", -2, 0)])
