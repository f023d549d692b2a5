"""Published constants for the plating arithmetic, each with its source beside it.

Why a module of its own: the same constants are used by the calculator, the tablet's step
parameters and the tests, and each must say where it comes from so a reviewer can check it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

#: Avogadro constant, mol⁻¹ (exact since the 2019 SI redefinition; CODATA 2018).
AVOGADRO: Final[float] = 6.02214076e23
#: Elementary charge, C (exact since the 2019 SI redefinition; CODATA 2018).
ELEMENTARY_CHARGE: Final[float] = 1.602176634e-19
#: Faraday constant F = N_A · e, C/mol. CODATA 2018 lists 96 485.332 12... (exact).
FARADAY: Final[float] = AVOGADRO * ELEMENTARY_CHARGE


@dataclass(frozen=True)
class Metal:
    """What Faraday's law needs about a deposited metal."""

    name: str
    symbol: str
    molar_mass_g_per_mol: float  # standard atomic weight (IUPAC)
    electrons: int  # electrons per atom reduced, from the usual bath's ion
    density_g_per_cm3: float  # bulk density near room temperature
    sources: str


#: Standard atomic weights: IUPAC Commission on Isotopic Abundances and Atomic Weights,
#: abridged standard atomic weights (2021 table): Cu 63.546, Ni 58.693, Sn 118.71,
#: Au 196.96657. Densities: CRC Handbook of Chemistry and Physics, physical constants of
#: the elements, at 20-25 °C (from memory): Cu 8.96, Ni 8.90, white (beta) tin 7.287,
#: Au 19.3 g/cm³. Electrons: the usual production baths deposit from Cu²⁺ (acid sulfate),
#: Ni²⁺ (sulfamate or Watts), Sn²⁺ (acid stannous sulfate) and Au⁺ (gold(I) cyanide or
#: sulfite) (common practice). An electroplated deposit can be slightly less dense than
#: the bulk metal (hard gold notably), so a measured thickness runs a few % under the
#: computed one; the cathode efficiency the engineer enters absorbs that.
METALS: Final[dict[str, Metal]] = {
    "copper": Metal(
        "copper", "Cu", 63.546, 2, 8.96, "IUPAC 2021 atomic weight; CRC density; Cu2+ (acid)"
    ),
    "nickel": Metal(
        "nickel", "Ni", 58.6934, 2, 8.90, "IUPAC 2021 atomic weight; CRC density; Ni2+"
    ),
    "tin": Metal(
        "tin", "Sn", 118.710, 2, 7.287, "IUPAC 2021 atomic weight; CRC density (white tin); Sn2+"
    ),
    "gold": Metal("gold", "Au", 196.966570, 1, 19.3, "IUPAC 2021 atomic weight; CRC density; Au+"),
}


def metal(name: str) -> Metal:
    """The metal by name; ValueError naming the allowed metals otherwise."""
    key = (name or "").strip().lower()
    if key not in METALS:
        raise ValueError(f"unknown metal {name!r}; allowed: {', '.join(sorted(METALS))}")
    return METALS[key]
