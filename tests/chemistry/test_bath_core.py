"""Mass-balance additions, dilution edge cases, amp-hour dosing, electroless nickel turnovers.

Each expected number is worked out by hand in the comment beside it from the mass balance
V·X + a·S = (V + a)·T (conservation of the dissolved species, closed form).
"""

from __future__ import annotations

import pytest

from shopfloor.core.chemistry import bath
from shopfloor.core.chemistry.errors import ChemistryInputError


def test_simple_addition_counts_the_additions_own_volume():
    # Acid copper sulfate bath, 1000 L at 60 g/L, target 75 g/L, stock solution 250 g/L.
    # a = V (T − X) / (S − T) = 1000 × 15 / 175 = 85.714 L; new volume 1085.714 L.
    # Check: (1000 × 60 + 85.714 × 250) / 1085.714 = (60000 + 21428.6) / 1085.714 = 75.0.
    # The naive figure that ignores the addition's volume, V (T − X) / S = 60 L, leaves
    # the bath at (60000 + 15000) / 1060 = 70.75 g/L: 4.25 g/L short.
    r = bath.concentrate_addition(1000, 60, 75, 250)
    assert r.action == "add"
    assert r.add_l == pytest.approx(85.7142857, rel=1e-9)
    assert r.new_volume_l == pytest.approx(1085.7142857, rel=1e-9)
    assert (1000 * 60 + r.add_l * 250) / r.new_volume_l == pytest.approx(75.0)


def test_liquid_additive_in_ml_per_l():
    # Brightener, 800 L at 2.0 mL/L, target 3.0 mL/L, added as the neat product
    # (1000 mL/L): a = 800 × 1.0 / 997 = 0.80241 L (802 mL).
    r = bath.concentrate_addition(800, 2.0, 3.0, 1000)
    assert r.add_l == pytest.approx(0.802407, rel=1e-5)


def test_dump_first_when_the_addition_would_overflow():
    # 1000 L at 60 g/L, target 75, stock 250, tank working volume 1050 L. The plain
    # addition (85.7 L) would reach 1085.7 L > 1050 L, so dump d first and refill to 1050:
    # d = (Vm T − V X − (Vm − V) S) / (S − X) = (78750 − 60000 − 12500) / 190 = 32.895 L;
    # a = Vm − V + d = 50 + 32.895 = 82.895 L.
    # Check: (1000 − 32.895) × 60 + 82.895 × 250 = 58026.3 + 20723.7 = 78750 = 1050 × 75.
    r = bath.concentrate_addition(1000, 60, 75, 250, max_volume_l=1050)
    assert r.action == "dump_then_add"
    assert r.dump_l == pytest.approx(6250 / 190, rel=1e-9)
    assert r.add_l == pytest.approx(50 + 6250 / 190, rel=1e-9)
    assert r.new_volume_l == pytest.approx(1050)
    assert ((1000 - r.dump_l) * 60 + r.add_l * 250) / 1050 == pytest.approx(75.0)


def test_full_tank_replaces_part_of_the_bath_with_stock():
    # V = Vm = 500 L, X = 40, T = 50, S = 200: d = a = Vm (T − X) / (S − X) = 5000 / 160
    # = 31.25 L (take out 31.25 L of bath, put in 31.25 L of stock).
    r = bath.concentrate_addition(500, 40, 50, 200, max_volume_l=500)
    assert r.dump_l == pytest.approx(31.25)
    assert r.add_l == pytest.approx(31.25)


def test_target_below_measured_gives_dilute_or_dump_advice():
    # 1000 L at 80 g/L, target 75: concentrate cannot lower it. Water w = V (X − T) / T
    # = 1000 × 5 / 75 = 66.667 L (80000 g / 1066.667 L = 75 g/L). Or keep V T / X =
    # 937.5 L, i.e. dump 62.5 L and top back up to 1000 L with water.
    r = bath.concentrate_addition(1000, 80, 75, 250)
    assert r.action == "dilute"
    assert r.add_l == 0.0
    assert r.water_l == pytest.approx(66.6667, rel=1e-5)
    assert "cannot lower" in r.notes[0]
    assert "dump 62.5 L" in r.notes[1]


def test_target_below_measured_in_a_full_tank_dumps_then_tops_up():
    # Same bath in a 1050 L tank: 66.7 L of water would overflow (1066.7 > 1050). Keep
    # K = Vm T / X = 1050 × 75 / 80 = 984.375 L: dump 1000 − 984.375 = 15.625 L, add
    # 1050 − 984.375 = 65.625 L of water. Check: 984.375 × 80 / 1050 = 75.0.
    r = bath.concentrate_addition(1000, 80, 75, 250, max_volume_l=1050)
    assert r.action == "dump_then_dilute"
    assert r.dump_l == pytest.approx(15.625)
    assert r.water_l == pytest.approx(65.625)


@pytest.mark.parametrize("stock", [75, 70, 0])
def test_stock_not_stronger_than_target_is_refused(stock):
    # a = V (T − X) / (S − T) has no positive solution for S <= T: mixing in a weaker
    # (or equal) solution can only move the bath toward S.
    with pytest.raises(bath.StockTooWeak, match="not stronger than the target"):
        bath.concentrate_addition(1000, 60, 75, stock)


def test_on_target_adds_nothing():
    r = bath.concentrate_addition(1000, 75, 75, 250)
    assert (r.action, r.add_l, r.new_volume_l) == ("none", 0.0, 1000)


@pytest.mark.parametrize(
    ("args", "kwargs", "words"),
    [
        ((0, 60, 75, 250), {}, "bath volume must be above zero"),
        ((1000, -1, 75, 250), {}, "cannot be negative"),
        ((1000, 60, "x", 250), {}, "must be a number"),
        ((1200, 60, 75, 250), {"max_volume_l": 1000}, "above the tank's working volume"),
    ],
)
def test_bad_input_is_refused(args, kwargs, words):
    with pytest.raises(ChemistryInputError, match=words):
        bath.concentrate_addition(*args, **kwargs)


def test_solid_salt_with_assay_and_displacement():
    # 1000 L nickel bath raised by 5 g/L of nickel with a salt that is 22.3 % nickel
    # (nickel sulfate hexahydrate: 58.693 / 262.85 = 0.2233, IUPAC atomic weights) and
    # no displacement: m = 1000 × 5 / 0.2233 = 22 392 g. With 0.5 L/kg displacement at
    # T = 80: m = 5000 / (0.2233 − 0.5 × 80 / 1000) = 5000 / 0.1833 = 27 278 g.
    p = 58.6934 / 262.85
    grams, _ = bath.solid_addition(1000, 75, 80, assay=p)
    assert grams == pytest.approx(5000 / p, rel=1e-9)
    grams, after = bath.solid_addition(1000, 75, 80, assay=p, displacement_l_per_kg=0.5)
    assert grams == pytest.approx(5000 / (p - 0.04), rel=1e-9)
    assert after.new_volume_l == pytest.approx(1000 + 0.5 * grams / 1000)


def test_amp_hour_dose():
    # 150 mL/kAh, counter 12 400 Ah now, 9 800 Ah at the last dose: 2 600 Ah = 2.6 kAh,
    # 2.6 × 150 = 390 mL.
    d = bath.amp_hour_dose(150, 12_400, 9_800)
    assert d.amp_hours == pytest.approx(2600)
    assert d.dose_ml == pytest.approx(390)


def test_amp_hour_counter_reset_is_refused():
    with pytest.raises(ChemistryInputError, match="it was reset"):
        bath.amp_hour_dose(150, 100, 9_800)


def test_electroless_nickel_turnovers_and_dump_point():
    # One metal turnover = the make-up nickel replenished once (common practice).
    # 200 L at 6 g/L nickel holds 1200 g; 4 800 g replenished = 4.0 MTO; with a dump
    # point of 5 MTO, 1.0 MTO (1200 g) remain. 6 000 g = 5.0 MTO: dump due.
    t = bath.metal_turnovers(4800, 200, 6.0, dump_at=5)
    assert t.turnovers == pytest.approx(4.0)
    assert t.remaining == pytest.approx(1.0)
    assert not t.dump_due
    assert t.nickel_per_turnover_g == pytest.approx(1200)
    assert bath.metal_turnovers(6000, 200, 6.0, dump_at=5).dump_due


def test_above_target_but_inside_the_window_adds_nothing():
    # Brightener 1.037 mL/L, target 1.0, window up to 1.5: water would cost 4000 × 0.037 / 1
    # = 148 L and dilute every other parameter; inside the window the advice is to wait
    # (common practice). Above the window (1.6) the dilution advice stands.
    r = bath.concentrate_addition(4000, 1.037, 1.0, 1000, high=1.5)
    assert (r.action, r.add_l, r.water_l) == ("none", 0.0, 0.0)
    assert "inside the window" in r.notes[0]
    assert bath.concentrate_addition(4000, 1.6, 1.0, 1000, high=1.5).action == "dilute"
