"""shopfloor.core.units against outside facts; each check names where the fact comes from."""

from __future__ import annotations

import math

import pytest

from shopfloor.core import units
from shopfloor.core.units import (
    COPPER_OZ_UM,
    ImplausibleValue,
    NegativeValue,
    NotANumber,
    NotFinite,
    NotWholeCount,
    UnitError,
    UnknownQuantity,
    UnknownUnit,
    WrongDimension,
    allowed_units,
    canonical_unit,
    format_value,
    to_canonical,
)


def test_mil_is_exactly_25_4_um():
    # by definition: 1 in = 25.4 mm (international yard and pound agreement, 1959),
    # and a mil (thou) is 1/1000 in, so 1 mil = 25.4 um exactly
    assert to_canonical("hole_wall_copper", 1, "mil") == pytest.approx(25.4, abs=1e-9)
    assert to_canonical("hole_wall_copper", 1, "thou") == pytest.approx(25.4, abs=1e-9)


def test_inch_is_25_4_mm():
    # by definition: 1 in = 25.4 mm (international yard and pound agreement, 1959)
    assert to_canonical("board_thickness", 0.062, "in") == pytest.approx(1.5748, abs=1e-9)
    assert to_canonical("board_thickness", 0.5, "inch") == pytest.approx(12.7, abs=1e-9)


def test_microinch_is_0_0254_um():
    # by definition: 1 uin = 1e-6 in = 25.4e-6 mm = 0.0254 um
    for spelling in ("µin", "μin", "uin", "microinch"):
        assert to_canonical("gold_thickness", 1, spelling) == pytest.approx(0.0254, abs=1e-12)
    # ENIG gold is often specified as 2 uin minimum (a common drawing note): 0.0508 um
    assert to_canonical("gold_thickness", 2, "uin") == pytest.approx(0.0508, abs=1e-12)


def test_micro_sign_and_greek_mu_both_mean_micrometre():
    # Unicode: U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU are both typed for "micro"
    assert "\u00b5m" != "\u03bcm"
    assert to_canonical("nickel_thickness", 4.5, "\u00b5m") == 4.5
    assert to_canonical("nickel_thickness", 4.5, "\u03bcm") == 4.5
    assert to_canonical("nickel_thickness", 4.5, "um") == 4.5


def test_millimetre_to_micrometre():
    # SI prefixes: 1 mm = 1000 um (by definition of milli and micro)
    assert to_canonical("mask_thickness", 0.02, "mm") == pytest.approx(20.0)
    assert to_canonical("board_thickness", 1600, "um") == pytest.approx(1.6)


def test_copper_ounce_factor_against_first_principles():
    # by definition: 1 oz avoirdupois = 28.349523125 g; 1 ft = 0.3048 m (1959 agreement);
    # copper density 8.96 g/cm3 (handbook value, common practice).
    areal = 28.349523125 / (30.48**2)  # g/cm2
    computed_um = areal / 8.96 * 1e4
    assert computed_um == pytest.approx(34.06, abs=0.01)
    # The customary factor (1.37 mil, common practice) sits within 2.5 % of the physics,
    # and below the rounded 35 um used in everyday shop speech.
    assert abs(COPPER_OZ_UM - computed_um) / computed_um < 0.025
    assert COPPER_OZ_UM == pytest.approx(1.37 * 25.4, abs=0.02)
    assert COPPER_OZ_UM < 35.0


def test_copper_weights_are_linear_and_spelled_many_ways():
    one = to_canonical("surface_copper", 1, "oz")
    for spelling in ("oz/ft2", "oz/ft²", "oz/ft^2"):
        assert to_canonical("surface_copper", 1, spelling) == one
    # half-ounce foil: half of the one-ounce thickness
    assert to_canonical("hole_wall_copper", 0.5, "oz") == pytest.approx(one / 2)
    assert to_canonical("surface_copper", 2, "oz") == pytest.approx(2 * one)


def test_copper_weight_refused_for_non_copper():
    with pytest.raises(WrongDimension) as exc:
        to_canonical("nickel_thickness", 1, "oz/ft²")
    assert "nickel_thickness" in str(exc.value) and "'um'" in str(exc.value)


def test_percent_and_count():
    assert canonical_unit("bow_twist") == "percent"
    assert to_canonical("bow_twist", 0.75, "%") == 0.75
    assert to_canonical("bow_twist", "0.75", "percent") == 0.75
    assert to_canonical("aoi_defects", 3, "count") == 3.0
    assert to_canonical("etest_opens", "0", "") == 0.0


@pytest.mark.parametrize(
    ("quantity", "unit"),
    [
        ("hole_wall_copper", "um"),
        ("surface_copper", "um"),
        ("nickel_thickness", "um"),
        ("gold_thickness", "um"),
        ("palladium_thickness", "um"),
        ("silver_thickness", "um"),
        ("tin_thickness", "um"),
        ("osp_thickness", "um"),
        ("mask_registration", "um"),
        ("mask_thickness", "um"),
        ("conductor_width", "um"),
        ("board_thickness", "mm"),
        ("vscore_web", "mm"),
        ("vscore_depth", "mm"),
        ("finished_hole_diameter", "mm"),
        ("bow_twist", "percent"),
        ("aoi_defects", "count"),
        ("etest_opens", "count"),
        ("etest_shorts", "count"),
    ],
)
def test_canonical_units(quantity, unit):
    assert canonical_unit(quantity) == unit
    assert allowed_units(quantity)[0] == unit


def test_unknown_quantity_lists_allowed():
    with pytest.raises(UnknownQuantity) as exc:
        canonical_unit("copper")
    assert "hole_wall_copper" in str(exc.value)
    assert isinstance(exc.value, UnitError) and isinstance(exc.value, ValueError)


@pytest.mark.parametrize(
    ("quantity", "value", "unit", "error", "fragment"),
    [
        ("board_thickness", "abc", "mm", NotANumber, "not a number"),
        ("board_thickness", "1,6", "mm", NotANumber, "decimal separator"),
        ("board_thickness", True, "mm", NotANumber, "not a number"),
        ("board_thickness", None, "mm", NotANumber, "not a number"),
        ("board_thickness", float("nan"), "mm", NotFinite, "finite"),
        ("board_thickness", "inf", "mm", NotFinite, "finite"),
        ("board_thickness", 1.6, "furlongs", UnknownUnit, "allowed"),
        ("aoi_defects", 1, "um", WrongDimension, "'count'"),
        ("bow_twist", 1, "mm", WrongDimension, "percent"),
        ("board_thickness", 1, "%", WrongDimension, "'mm'"),
        ("hole_wall_copper", -1, "um", NegativeValue, "negative"),
        ("bow_twist", -0.1, "%", NegativeValue, "negative"),
        ("etest_shorts", -1, "count", NegativeValue, "negative"),
        ("aoi_defects", 1.5, "count", NotWholeCount, "whole"),
        ("nickel_thickness", 10_001, "um", ImplausibleValue, "10000"),
        ("nickel_thickness", 0.5, "in", ImplausibleValue, "plausible"),
        ("board_thickness", 21, "mm", ImplausibleValue, "20"),
        ("aoi_defects", 1_000_001, "count", ImplausibleValue, "plausible"),
    ],
)
def test_refusals_say_what_is_wrong(quantity, value, unit, error, fragment):
    with pytest.raises(error) as exc:
        to_canonical(quantity, value, unit)
    assert quantity in str(exc.value)
    assert fragment in str(exc.value)


def test_ceilings_are_inclusive():
    assert to_canonical("nickel_thickness", 10_000, "um") == 10_000
    assert to_canonical("board_thickness", 20, "mm") == 20
    assert to_canonical("aoi_defects", 1_000_000, "count") == 1_000_000


def test_format_value():
    assert format_value("hole_wall_copper", 20.0) == "20 µm"
    assert format_value("gold_thickness", 0.04) == "0.04 µm"
    assert format_value("board_thickness", 1.6) == "1.6 mm"
    assert format_value("bow_twist", 0.75) == "0.75 %"
    assert format_value("aoi_defects", 3.0) == "3"
    assert format_value("nickel_thickness", -0.0) == "0 µm"


def test_every_quantity_round_trips_through_its_own_unit():
    for q in units.quantities():
        unit = canonical_unit(q)
        assert math.isclose(to_canonical(q, 1, unit), 1.0)
