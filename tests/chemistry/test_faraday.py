"""Faraday's law and its constants, each checked against a named outside source."""

from __future__ import annotations

import pytest

from shopfloor.core.chemistry import constants, plating
from shopfloor.core.chemistry.errors import ChemistryInputError


def test_faraday_constant_is_codata():
    # CODATA 2018 recommended value: F = 96 485.332 12 C/mol (exact since the 2019 SI
    # redefinition fixed N_A = 6.022 140 76e23 /mol and e = 1.602 176 634e-19 C)
    assert constants.FARADAY == pytest.approx(96485.33212, abs=1e-5)


@pytest.mark.parametrize(
    ("name", "molar_mass", "electrons", "density"),
    [
        # IUPAC standard atomic weights (2021 abridged table): Cu 63.546, Ni 58.693,
        # Sn 118.71, Au 196.97. Densities: CRC Handbook, room temperature (from memory):
        # Cu 8.96, Ni 8.90, white tin 7.287 (7.26-7.31 in other tables), Au 19.3 g/cm³.
        ("copper", 63.546, 2, 8.96),
        ("nickel", 58.693, 2, 8.90),
        ("tin", 118.71, 2, 7.287),
        ("gold", 196.97, 1, 19.3),
    ],
)
def test_metal_constants_match_iupac_and_crc(name, molar_mass, electrons, density):
    m = constants.metal(name)
    assert m.molar_mass_g_per_mol == pytest.approx(molar_mass, abs=0.01)
    assert m.electrons == electrons
    assert m.density_g_per_cm3 == pytest.approx(density, rel=0.005)


def test_acid_copper_rate_is_about_0_22_um_per_min_per_asd():
    # common practice: acid copper deposits about 0.22 µm per minute at 1 A/dm² and 100 %
    # cathode efficiency. Computed here from the constants (not asserted from memory):
    # 100 A/m² × 60 s = 6000 C/m²; / (2 × 96485.332 C/mol) = 0.0310927 mol/m²;
    # × 63.546 g/mol = 1.97582 g/m²; / 8.96e6 g/m³ = 2.2052e-7 m = 0.2205 µm.
    by_hand = 100 * 60 / (2 * 96485.33212) * 63.546 / 8.96
    assert plating.rate_um_per_min("copper", 1.0, 1.0) == pytest.approx(by_hand, rel=1e-9)
    assert plating.thickness_um("copper", 1.0, 1.0, 1.0) == pytest.approx(0.22, abs=0.005)


def test_rate_scales_linearly_with_current_time_and_efficiency():
    # Faraday's first law: the mass deposited is proportional to the charge passed.
    one = plating.thickness_um("copper", 1.0, 1.0, 1.0)
    assert plating.thickness_um("copper", 2.0, 60.0, 0.9) == pytest.approx(one * 2 * 60 * 0.9)


def test_gold_from_au_plus_deposits_more_per_charge_than_copper():
    # Closed form: rate ∝ M / (n ρ); gold(I): 196.97/(1 × 19.3) = 10.21,
    # copper(II): 63.546/(2 × 8.96) = 3.546 → ratio 2.878.
    ratio = plating.rate_um_per_min("gold", 1) / plating.rate_um_per_min("copper", 1)
    assert ratio == pytest.approx((196.96657 / 19.3) / (63.546 / (2 * 8.96)), rel=1e-9)


@pytest.mark.parametrize("metal", ["copper", "nickel", "tin", "gold"])
def test_inverse_returns_the_inputs(metal):
    t = plating.thickness_um(metal, 2.2, 45.0, 0.93)
    assert plating.minutes_for(metal, t, 2.2, 0.93) == pytest.approx(45.0, rel=1e-12)
    assert plating.current_density_for(metal, t, 45.0, 0.93) == pytest.approx(2.2, rel=1e-12)


def test_setup_gives_amps_from_area_and_minutes_for_target():
    # Worked by hand: 25 µm copper at 2 A/dm², 95 % efficiency, 40 dm² plated:
    # rate = 0.220516 × 2 × 0.95 = 0.418980 µm/min → 25 / 0.418980 = 59.669 min;
    # amps = 2 A/dm² × 40 dm² = 80 A.
    s = plating.setup_for("copper", area_dm2=40, current_density_asd=2, target_um=25, eff=0.95)
    assert s.current_a == pytest.approx(80.0)
    assert s.minutes == pytest.approx(59.669, abs=0.001)


@pytest.mark.parametrize(
    ("call", "words"),
    [
        (lambda: plating.thickness_um("lead", 1, 1), "allowed: copper, gold, nickel, tin"),
        (lambda: plating.thickness_um("copper", 0, 1), "current density must be above zero"),
        (lambda: plating.thickness_um("copper", 1, 1, 95), "give it as a fraction"),
        (lambda: plating.thickness_um("copper", 400, 1), "plausible maximum"),
        (lambda: plating.thickness_um("copper", "abc", 1), "must be a number"),
        (lambda: plating.thickness_um("copper", float("nan"), 1), "finite"),
        (lambda: plating.current_density_for("copper", 100, 1), "allow more time"),
    ],
)
def test_bad_input_is_refused_with_the_reason(call, words):
    with pytest.raises((ChemistryInputError, ValueError), match=words):
        call()
