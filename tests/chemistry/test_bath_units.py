"""Bath analysis units against their definitions (NIST SP 811 appendix B, SI prefixes)."""

from __future__ import annotations

import pytest

from shopfloor.core import units


def test_oz_per_gallon_is_7_489_g_per_l():
    # NIST SP 811 / Handbook 44: 1 oz (avoirdupois) = 28.349 523 125 g exactly;
    # 1 US gallon = 231 in³ = 3.785 411 784 L exactly. 28.349523125 / 3.785411784 =
    # 7.489 151 7 g/L.
    assert units.bath_to_canonical("mass_concentration", 1, "oz/gal") == pytest.approx(
        28.349523125 / 3.785411784, rel=1e-12
    )


def test_troy_ounce_per_gallon_for_gold():
    # 1 troy ounce = 31.103 476 8 g exactly (NIST SP 811); gold salts are sold and
    # specified per troy ounce (common practice). 31.1034768 / 3.785411784 = 8.2167 g/L.
    assert units.bath_to_canonical("mass_concentration", 1, "troy oz/gal") == pytest.approx(
        31.1034768 / 3.785411784, rel=1e-12
    )


def test_percent_by_volume_and_milligrams():
    # 1 % v/v = 1 mL per 100 mL = 10 mL/L; 1 mg/L = 0.001 g/L (SI prefixes).
    assert units.bath_to_canonical("volume_concentration", 10, "% v/v") == pytest.approx(100)
    assert units.bath_to_canonical("volume_concentration", 4, "mL/L") == 4
    assert units.bath_to_canonical("mass_concentration", 60, "mg/L") == pytest.approx(0.06)
    # 1 US fluid ounce = 1/128 US gallon (NIST SP 811): 1 fl oz/gal = 7.8125 mL/L exactly.
    assert units.bath_to_canonical("volume_concentration", 1, "fl oz/gal") == pytest.approx(7.8125)


def test_temperature_in_fahrenheit():
    # °C = (°F − 32) × 5/9 (definition of the Fahrenheit scale): 185 °F = 85 °C.
    assert units.bath_to_canonical("temperature", 185, "°F") == pytest.approx(85.0)
    assert units.bath_from_canonical("temperature", 85, "°F") == pytest.approx(185.0)


def test_back_conversion_for_display():
    assert units.bath_from_canonical("mass_concentration", 7.4891517, "oz/gal") == pytest.approx(
        1.0, rel=1e-6
    )


@pytest.mark.parametrize(
    ("measure", "value", "unit", "error", "words"),
    [
        ("mass_concentration", 10, "mL/L", units.UnknownUnit, "allowed: 'g/L'"),
        ("volume_concentration", 10, "g/L", units.UnknownUnit, "allowed: 'mL/L'"),
        ("ph", 15, "pH", units.ImplausibleValue, "plausible maximum"),
        ("mass_concentration", -1, "g/L", units.NegativeValue, "negative"),
        ("mass_concentration", "12,5", "g/L", units.NotANumber, "decimal separator"),
        ("salinity", 1, "g/L", units.UnknownQuantity, "allowed: mass_concentration"),
    ],
)
def test_bad_values_are_refused_with_what_is_allowed(measure, value, unit, error, words):
    with pytest.raises(error, match=words):
        units.bath_to_canonical(measure, value, unit)
