"""The panel rules checked against closed-form arithmetic and worked examples."""

from __future__ import annotations

import math

import pytest

from shopfloor.core import panelise
from tests.factories import SPEC_4L_ENIG


@pytest.mark.parametrize(
    ("quantity", "per_panel", "allowance", "expected"),
    [
        # Closed form ceil(q / b x (1 + a)), worked by hand:
        (400, 6, 8, 72),  # 400 / 6 = 66.67 x 1.08 = 72.0 exactly -> 72
        (400, 6, 0, 67),  # ceil(66.67)
        (100, 4, 10, 28),  # 25 x 1.1 = 27.5 -> 28
        (25, 3, 8, 9),  # 25 / 3 x 1.08 = 9 exactly; binary floats give 9.000000000000002
        (1, 50, 8, 1),
        (24, 6, 0, 4),  # exact fit, no allowance: no extra panel
    ],
)
def test_panels_needed_closed_form(quantity, per_panel, allowance, expected):
    assert panelise.panels_needed(quantity, per_panel, allowance) == expected


def test_float_ceiling_would_overshoot():
    # The reason the rule is computed in decimal (IEEE 754 double arithmetic):
    assert math.ceil(25 / 3 * (1 + 8 / 100)) == 10
    assert panelise.panels_needed(25, 3, 8) == 9


@pytest.mark.parametrize("bad", [(0, 4, 8), (10, 0, 8), (10, 4, -1), (10, 4, 101)])
def test_panels_needed_refuses_nonsense(bad):
    with pytest.raises(ValueError):
        panelise.panels_needed(*bad)


@pytest.mark.parametrize(
    ("panels", "most", "expected"),
    [(14, 12, [7, 7]), (25, 12, [9, 8, 8]), (12, 12, [12]), (1, 12, [1]), (5, 2, [2, 2, 1])],
)
def test_lot_sizes_fewest_and_even(panels, most, expected):
    sizes = panelise.lot_sizes(panels, most)
    assert sizes == expected
    assert sum(sizes) == panels and len(sizes) == math.ceil(panels / most)


def test_makeup_covers_shortfall():
    # 364 boards short at 6 per panel, 8 %: 364 / 6 x 1.08 = 65.52 -> 66 panels
    assert panelise.makeup_panels(364, 6, 8) == 66
    assert panelise.makeup_panels(0, 6, 8) == 0


def test_compatible_and_incompatible_specs():
    a = panelise.SharedImage("J1", 2, SPEC_4L_ENIG)
    same = panelise.SharedImage("J2", 3, {**SPEC_4L_ENIG, "ipc_class": 3, "profile": "v_score"})
    assert panelise.incompatibilities([a, same]) == []
    assert panelise.strictest_class([a, same]) == 3
    other = panelise.SharedImage(
        "J3", 2, {**SPEC_4L_ENIG, "finish": "osp", "board_thickness_mm": 1.0, "inner_copper_um": 70}
    )
    reasons = panelise.incompatibilities([a, other])
    assert len(reasons) == 3
    assert any("finishes (enig vs osp)" in r for r in reasons)
    assert any("thicknesses" in r for r in reasons)
    assert any("stack-ups" in r for r in reasons)
