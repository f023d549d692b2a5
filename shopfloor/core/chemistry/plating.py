"""Faraday's law for electroplating: thickness from current density and time, and back.

Why: the tablet shows a plating step's amps and minutes, and both come from the area to
plate, the current density the routing asks for and the thickness wanted. Getting them
from the law (rather than a shop's rule of thumb) lets one function serve copper, nickel,
tin and gold, with the cathode efficiency the engineer sets.

    thickness = (j · t · M · ε) / (n · F · ρ)

with j the current density, t the time, M the molar mass, ε the cathode efficiency
(fraction of the charge that deposits metal), n the electrons per atom, F the Faraday
constant and ρ the deposit density. With j in A/dm² (= 100 A/m²), t in minutes, M in
g/mol and ρ in g/cm³ this is, in micrometres:

    thickness_um = 100 · j · 60 · t_min · M · ε / (n · F · ρ)
"""

from __future__ import annotations

from dataclasses import dataclass

from shopfloor.core.chemistry.constants import FARADAY, Metal, metal
from shopfloor.core.chemistry.errors import ChemistryInputError, positive

#: Above these the value is a typing or unit mistake for board plating (PCB lines run at
#: about 1-4 A/dm²; pulse and high-speed lines stay well under 50; common practice).
MAX_CURRENT_DENSITY_ASD = 50.0
MAX_MINUTES = 24 * 60.0
MAX_THICKNESS_UM = 500.0
MAX_AREA_DM2 = 10_000.0


def efficiency(value: object) -> float:
    """A cathode efficiency as a fraction 0 < ε <= 1."""
    e = positive("cathode efficiency", value)
    if e > 1:
        raise ChemistryInputError(
            f"cathode efficiency {e:g} is above 1; give it as a fraction (0.95 for 95 %)"
        )
    return e


def rate_um_per_min(metal_name: str, current_density_asd: object, eff: object = 1.0) -> float:
    """Deposit rate in µm per minute at a current density (A/dm²) and cathode efficiency."""
    m = metal(metal_name)
    j = positive(
        "current density", current_density_asd, ceiling=MAX_CURRENT_DENSITY_ASD, unit=" A/dm²"
    )
    return _rate(m, j, efficiency(eff))


def _rate(m: Metal, j_asd: float, eff: float) -> float:
    return (
        100.0
        * j_asd
        * 60.0
        * m.molar_mass_g_per_mol
        * eff
        / (m.electrons * FARADAY * m.density_g_per_cm3)
    )


def thickness_um(
    metal_name: str, current_density_asd: object, minutes: object, eff: object = 1.0
) -> float:
    """Deposit thickness (µm) after `minutes` at `current_density_asd` (A/dm²)."""
    t = positive("time", minutes, ceiling=MAX_MINUTES, unit=" min")
    return rate_um_per_min(metal_name, current_density_asd, eff) * t


def minutes_for(
    metal_name: str, target_um: object, current_density_asd: object, eff: object = 1.0
) -> float:
    """Minutes at `current_density_asd` to deposit `target_um` micrometres."""
    target = positive("target thickness", target_um, ceiling=MAX_THICKNESS_UM, unit=" µm")
    return target / rate_um_per_min(metal_name, current_density_asd, eff)


def current_density_for(
    metal_name: str, target_um: object, minutes: object, eff: object = 1.0
) -> float:
    """Current density (A/dm²) that deposits `target_um` in `minutes`."""
    m = metal(metal_name)
    target = positive("target thickness", target_um, ceiling=MAX_THICKNESS_UM, unit=" µm")
    t = positive("time", minutes, ceiling=MAX_MINUTES, unit=" min")
    j = target / (_rate(m, 1.0, efficiency(eff)) * t)
    if j > MAX_CURRENT_DENSITY_ASD:
        raise ChemistryInputError(
            f"{target:g} µm in {t:g} min needs {j:.1f} A/dm², above the plausible maximum of "
            f"{MAX_CURRENT_DENSITY_ASD:g} A/dm²; allow more time"
        )
    return j


@dataclass(frozen=True)
class PlatingSetup:
    """What the tablet shows for a plating step: rectifier amps and minutes."""

    metal: str
    area_dm2: float
    current_density_asd: float
    efficiency: float
    target_um: float
    current_a: float
    minutes: float
    rate_um_per_min: float


def setup_for(
    metal_name: str,
    *,
    area_dm2: object,
    current_density_asd: object,
    target_um: object,
    eff: object = 1.0,
) -> PlatingSetup:
    """Amps (current density x plated area) and minutes for a target thickness."""
    m = metal(metal_name)
    area = positive("plated area", area_dm2, ceiling=MAX_AREA_DM2, unit=" dm²")
    j = positive(
        "current density", current_density_asd, ceiling=MAX_CURRENT_DENSITY_ASD, unit=" A/dm²"
    )
    e = efficiency(eff)
    target = positive("target thickness", target_um, ceiling=MAX_THICKNESS_UM, unit=" µm")
    rate = _rate(m, j, e)
    return PlatingSetup(
        metal=m.name,
        area_dm2=area,
        current_density_asd=j,
        efficiency=e,
        target_um=target,
        current_a=j * area,
        minutes=target / rate,
        rate_um_per_min=rate,
    )
