"""One place that turns what people type into the numbers the service stores.

Why this module exists: a traveller is read and written by operators, process
engineers and customers' documents that mix micrometres, mils, microinches and
copper "ounces". Every reading is converted once, at the edge, into one canonical
unit per quantity, so windows, SPC charts and reports never have to guess. The
conversion itself is done by pint (a shared registry); this module adds what pint
cannot know: which unit a shop quantity is stored in, which spellings are accepted,
and which values are physically absurd for a circuit board.

Pure Python (no Django imports) so the routing builder and its tests can use it.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Final

import pint

__all__ = [
    "COPPER_OZ_UM",
    "UREG",
    "ImplausibleValue",
    "NegativeValue",
    "NotANumber",
    "NotFinite",
    "NotWholeCount",
    "UnitError",
    "UnknownQuantity",
    "UnknownUnit",
    "WrongDimension",
    "allowed_units",
    "canonical_unit",
    "entry_units",
    "format_value",
    "from_canonical",
    "quantities",
    "to_canonical",
]

#: The one registry for the whole service. Quantities from different registries
#: cannot be combined in pint, so every module must use this one.
UREG: Final = pint.UnitRegistry()

#: Copper weight to thickness: 1 oz/ft² of copper foil taken as 34.79 µm.
#: Source: common practice (the customary "1 oz = 1.37 mil" figure; 1.37 mil = 34.80 µm).
#: Note the arithmetic from first principles gives a little less: 1 oz avoirdupois
#: (28.349523125 g, by definition) spread over 1 ft² (929.0304 cm², by definition of
#: the foot) is 0.030515 g/cm², which at a copper density of 8.96 g/cm³ is 34.06 µm.
#: The industry also rounds "1 oz" to 35 µm (so "½ oz" foil is quoted as 17.5 µm), and
#: foil standards quote a slightly lower nominal (from memory). We keep the customary
#: factor because that is what customers' drawings mean when they write "1 oz"; the
#: difference (about 2 %) is well inside any copper thickness window.
COPPER_OZ_UM: Final[float] = 34.79


class UnitError(ValueError):
    """A value or unit that cannot be stored; the message says what is allowed."""


class UnknownQuantity(UnitError):
    """The quantity identifier is not one this service measures."""


class NotANumber(UnitError):
    """The value is not a number (e.g. '12,5' or 'abc')."""


class NotFinite(UnitError):
    """The value is NaN or infinite."""


class UnknownUnit(UnitError):
    """The unit spelling is not recognised at all."""


class WrongDimension(UnitError):
    """The unit is real but measures something else (e.g. µm for a defect count)."""


class NegativeValue(UnitError):
    """The quantity cannot be negative."""


class NotWholeCount(UnitError):
    """Counts must be whole numbers."""


class ImplausibleValue(UnitError):
    """Above the plausibility ceiling: almost certainly a typing or unit mistake."""


# Dimension families. Pint knows length; "percent" and "count" are both
# dimensionless to pint, so we keep our own family to refuse e.g. "%" for a count.
_LENGTH = "length"
_RATIO = "ratio"
_COUNT = "count"


@dataclass(frozen=True)
class _Quantity:
    unit: str  # canonical unit, as stored and shown in the API
    family: str
    ceiling: float  # plausibility ceiling, in the canonical unit
    copper: bool = False  # accepts copper weight (oz/ft²)
    decimals: int = 3  # for format_value


_UM_CEILING = 10_000.0  # 10 mm of plating or mask is not a circuit board
_QUANTITIES: Final[dict[str, _Quantity]] = {
    "hole_wall_copper": _Quantity("um", _LENGTH, _UM_CEILING, copper=True),
    "surface_copper": _Quantity("um", _LENGTH, _UM_CEILING, copper=True),
    "nickel_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "gold_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "palladium_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "silver_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "tin_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "osp_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "mask_registration": _Quantity("um", _LENGTH, _UM_CEILING),
    "mask_thickness": _Quantity("um", _LENGTH, _UM_CEILING),
    "conductor_width": _Quantity("um", _LENGTH, 100_000.0, decimals=1),
    "board_thickness": _Quantity("mm", _LENGTH, 20.0),
    "vscore_web": _Quantity("mm", _LENGTH, 20.0),
    "vscore_depth": _Quantity("mm", _LENGTH, 20.0),
    "finished_hole_diameter": _Quantity("mm", _LENGTH, 25.0),
    "bow_twist": _Quantity("percent", _RATIO, 100.0, decimals=2),
    "aoi_defects": _Quantity("count", _COUNT, 1_000_000.0, decimals=0),
    "etest_opens": _Quantity("count", _COUNT, 1_000_000.0, decimals=0),
    "etest_shorts": _Quantity("count", _COUNT, 1_000_000.0, decimals=0),
    # boards that failed electrical test, out of the boards tested (Reading.tested)
    "etest_failed": _Quantity("count", _COUNT, 1_000_000.0, decimals=0),
}

#: Quantities recorded as defectives out of n items inspected (k of n): charted as a p
#: chart (n varies from lot to lot) or an np chart (one n throughout).
DEFECTIVES_QUANTITIES: Final = frozenset({"etest_failed"})

# Accepted spellings -> pint unit name. Exact spelling first, then lower case.
_LENGTH_UNITS: Final[dict[str, str]] = {
    "um": "micrometer",
    "µm": "micrometer",  # U+00B5 MICRO SIGN
    "μm": "micrometer",  # U+03BC GREEK SMALL LETTER MU
    "micron": "micrometer",
    "micrometre": "micrometer",
    "micrometer": "micrometer",
    "mm": "millimeter",
    "millimetre": "millimeter",
    "millimeter": "millimeter",
    # pint's "mil" is an angle; the board trade's mil is a thousandth of an inch.
    "mil": "thou",
    "mils": "thou",
    "thou": "thou",
    "in": "inch",
    "inch": "inch",
    '"': "inch",
    "µin": "microinch",
    "μin": "microinch",
    "uin": "microinch",
    "microinch": "microinch",
    "microinches": "microinch",
}
_COPPER_WEIGHT_UNITS: Final[frozenset[str]] = frozenset(
    {"oz", "oz/ft2", "oz/ft²", "oz/ft^2", "oz/sqft"}
)
_RATIO_UNITS: Final[dict[str, str]] = {"percent": "percent", "%": "percent"}
_COUNT_UNITS: Final[frozenset[str]] = frozenset({"count", "", "pcs", "ea"})

_DISPLAY: Final[dict[str, str]] = {"um": "µm", "mm": "mm", "percent": "%", "count": ""}


def quantities() -> list[str]:
    """Every quantity identifier the service measures, sorted."""
    return sorted(_QUANTITIES)


def _spec(quantity: str) -> _Quantity:
    try:
        return _QUANTITIES[quantity]
    except (KeyError, TypeError):
        raise UnknownQuantity(
            f"unknown quantity {quantity!r}; allowed: {', '.join(quantities())}"
        ) from None


def canonical_unit(quantity: str) -> str:
    """The unit a quantity is stored in ("um", "mm", "percent" or "count")."""
    return _spec(quantity).unit


def allowed_units(quantity: str) -> list[str]:
    """Unit spellings accepted for `quantity`, canonical first, for error messages and forms."""
    q = _spec(quantity)
    if q.family == _LENGTH:
        units = [q.unit] + [u for u in _LENGTH_UNITS if u != q.unit]
        if q.copper:
            units += sorted(_COPPER_WEIGHT_UNITS)
        return units
    if q.family == _RATIO:
        return ["percent", "%"]
    return ["count"]


#: The only number text accepted: ASCII digits with an optional sign, point and exponent.
#: Python's float() also takes "3_0", "٣٠" (Arabic-Indic) and "３０" (fullwidth) as 30,
#: which a person never means to type into a gauge reading.
ASCII_DECIMAL = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?", re.ASCII)
DECIMAL_RULE = (
    "numbers are ASCII digits with an optional sign, decimal point and exponent "
    "(for example 12.5, -0.3 or 1.2e-3)"
)


def parse_decimal(text: str) -> float:
    """A number typed as text, by DECIMAL_RULE only; ValueError (saying the rule) otherwise."""
    stripped = text.strip()
    if not ASCII_DECIMAL.fullmatch(stripped):
        hint = " (use a point as the decimal separator)" if "," in stripped else ""
        raise ValueError(f"{text!r} is not a number{hint}: {DECIMAL_RULE}")
    return float(stripped)


def _number(quantity: str, value: float | str) -> float:
    if isinstance(value, bool):  # bool is an int to Python, never a reading
        raise NotANumber(f"{quantity}: {value!r} is not a number; give a number such as 12.5")
    if isinstance(value, int | float):
        number = float(value)
    elif isinstance(value, str):
        if value.strip().lower().lstrip("+-") in {"inf", "infinity", "nan"}:
            raise NotFinite(f"{quantity}: {value!r} is not a finite number; give a real reading")
        try:
            number = parse_decimal(value)
        except ValueError as exc:
            raise NotANumber(f"{quantity}: {exc}") from None
    else:
        raise NotANumber(
            f"{quantity}: {type(value).__name__} is not a number; give a number such as 12.5"
        )
    if not math.isfinite(number):
        raise NotFinite(f"{quantity}: {value!r} is not a finite number; give a real reading")
    return number


def _lookup(table: dict[str, str], unit: str) -> str | None:
    return table.get(unit) or table.get(unit.lower())


def _is_any_known_unit(unit: str) -> bool:
    return (
        _lookup(_LENGTH_UNITS, unit) is not None
        or _lookup(_RATIO_UNITS, unit) is not None
        or unit.lower() in _COUNT_UNITS
        or unit.lower() in _COPPER_WEIGHT_UNITS
    )


def _convert(quantity: str, q: _Quantity, number: float, unit: str) -> float:
    unit = unit.strip()
    wrong = WrongDimension(
        f"{quantity}: unit {unit!r} does not measure this quantity; "
        f"allowed: {', '.join(repr(u) for u in allowed_units(quantity))}"
    )
    if q.family == _LENGTH:
        if unit.lower() in _COPPER_WEIGHT_UNITS:
            if not q.copper:
                raise wrong
            micrometres = number * COPPER_OZ_UM
            return float(UREG.Quantity(micrometres, "micrometer").to(_pint_name(q.unit)).magnitude)
        name = _lookup(_LENGTH_UNITS, unit)
        if name is None:
            if _is_any_known_unit(unit):
                raise wrong
            raise UnknownUnit(
                f"{quantity}: unknown unit {unit!r}; allowed: "
                f"{', '.join(repr(u) for u in allowed_units(quantity))}"
            )
        return float(UREG.Quantity(number, name).to(_pint_name(q.unit)).magnitude)
    if q.family == _RATIO:
        name = _lookup(_RATIO_UNITS, unit)
        if name is None:
            if _is_any_known_unit(unit):
                raise wrong
            raise UnknownUnit(f"{quantity}: unknown unit {unit!r}; allowed: 'percent', '%'")
        return float(UREG.Quantity(number, name).to("percent").magnitude)
    if unit.lower() not in _COUNT_UNITS:
        if _is_any_known_unit(unit):
            raise wrong
        raise UnknownUnit(f"{quantity}: unknown unit {unit!r}; allowed: 'count'")
    return number


def _pint_name(canonical: str) -> str:
    return {"um": "micrometer", "mm": "millimeter"}[canonical]


def to_canonical(quantity: str, value: float | str, unit: str) -> float:
    """Convert one reading to the quantity's canonical unit, refusing what cannot be real.

    Raises a `UnitError` subclass whose message names the quantity, what was wrong and
    what is allowed, so an API can pass it straight to the person who typed it.
    """
    q = _spec(quantity)
    number = _number(quantity, value)
    if not isinstance(unit, str):
        raise UnknownUnit(
            f"{quantity}: unit must be text; allowed: "
            f"{', '.join(repr(u) for u in allowed_units(quantity))}"
        )
    converted = _convert(quantity, q, number, unit)
    if converted < 0:
        what = "a count" if q.family == _COUNT else "this quantity"
        raise NegativeValue(
            f"{quantity}: {number:g} {unit} is negative; {what} cannot be below zero"
        )
    if q.family == _COUNT and not converted.is_integer():
        raise NotWholeCount(f"{quantity}: {number:g} is not a whole number; counts are 0, 1, 2 …")
    if converted > q.ceiling:
        raise ImplausibleValue(
            f"{quantity}: {number:g} {unit} is {converted:g} {q.unit}, above the plausible "
            f"maximum of {q.ceiling:g} {q.unit}; check the value and its unit"
        )
    return converted


def _fmt_number(value: float, decimals: int) -> str:
    text = f"{value:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in {"-0", ""} else text


def format_value(quantity: str, value: float) -> str:
    """A stored value for a person: '20 µm', '1.6 mm', '0.75 %', '3'."""
    q = _spec(quantity)
    number = _fmt_number(float(value), q.decimals)
    symbol = _DISPLAY[q.unit]
    if not symbol:
        return number
    return f"{number} {symbol}"


# ---------------------------------------------------------------------------
# Bath analyses (plating, etch, ENIG): concentrations and bath properties
# ---------------------------------------------------------------------------
#
# Why a second table: a bath parameter is not a board quantity. Its canonical unit depends
# on what the parameter measures (a dissolved salt in g/L, a liquid additive in mL/L, an
# impurity in mg/L), and labs, supplier sheets and older shops write the same thing as
# g/L, oz/gal or % v/v. Every analysis goes through `bath_to_canonical`, so an addition
# calculation never mixes a value in oz/gal with a target in g/L.

#: What a bath parameter measures -> its canonical unit (as stored and shown).
BATH_MEASURES: Final[dict[str, str]] = {
    "mass_concentration": "g/L",
    "volume_concentration": "mL/L",
    "specific_gravity": "SG",
    "ph": "pH",
    "temperature": "°C",
    "normality": "N",
    "turnovers": "MTO",
}

# Accepted spellings -> pint expression, per measure. pint's "ounce" is the avoirdupois
# ounce and its "gallon" the US liquid gallon (both by definition, NIST SP 811 appendix B).
_MASS_CONC_UNITS: Final[dict[str, str]] = {
    "g/l": "gram / liter",
    "mg/l": "milligram / liter",
    "ppm": "milligram / liter",  # in a dilute water-based bath, 1 ppm (mass) ≈ 1 mg/L
    "kg/m3": "kilogram / meter ** 3",
    "oz/gal": "ounce / gallon",
    "troy oz/gal": "troy_ounce / gallon",
    "ozt/gal": "troy_ounce / gallon",
    "g/ml": "gram / milliliter",
    "% w/v": "10 * gram / liter",  # 1 % w/v = 1 g per 100 mL = 10 g/L
}
_VOLUME_CONC_UNITS: Final[dict[str, str]] = {
    "ml/l": "milliliter / liter",
    "% v/v": "10 * milliliter / liter",  # 1 % v/v = 1 mL per 100 mL = 10 mL/L
    "%v/v": "10 * milliliter / liter",
    "% vol": "10 * milliliter / liter",
    "l/l": "liter / liter",
    "fl oz/gal": "fluid_ounce / gallon",
}
_TEMPERATURE_UNITS: Final[dict[str, str]] = {
    "°c": "degree_Celsius",
    "c": "degree_Celsius",
    "degc": "degree_Celsius",
    "°f": "degree_Fahrenheit",
    "f": "degree_Fahrenheit",
    "degf": "degree_Fahrenheit",
}
_PLAIN_UNITS: Final[dict[str, frozenset[str]]] = {
    "specific_gravity": frozenset({"sg", "", "g/cm3", "kg/l"}),
    "ph": frozenset({"ph", ""}),
    "normality": frozenset({"n", "eq/l"}),
    "turnovers": frozenset({"mto", "turnovers", ""}),
}
# Plausibility ceilings in the canonical unit: above them the value is a typing or unit
# mistake (no water-based bath holds more than 2 kg/L of anything; pH runs 0..14).
_BATH_CEILING: Final[dict[str, float]] = {
    "mass_concentration": 2000.0,
    "volume_concentration": 1000.0,
    "specific_gravity": 3.0,
    "ph": 14.0,
    "temperature": 150.0,
    "normality": 30.0,
    "turnovers": 50.0,
}


def bath_measures() -> list[str]:
    """Every bath measure identifier, sorted."""
    return sorted(BATH_MEASURES)


def _bath_measure(measure: str) -> str:
    if measure not in BATH_MEASURES:
        raise UnknownQuantity(
            f"unknown bath measure {measure!r}; allowed: {', '.join(bath_measures())}"
        )
    return BATH_MEASURES[measure]


def bath_allowed_units(measure: str) -> list[str]:
    """Unit spellings accepted for a bath measure, canonical first (for forms and errors)."""
    canonical = _bath_measure(measure)
    if measure == "mass_concentration":
        return ["g/L", "mg/L", "ppm", "kg/m3", "oz/gal", "troy oz/gal", "g/mL", "% w/v"]
    if measure == "volume_concentration":
        return ["mL/L", "% v/v", "L/L", "fl oz/gal"]
    if measure == "temperature":
        return ["°C", "°F"]
    return [canonical]


def _normalise_unit(unit: str) -> str:
    return " ".join(unit.strip().lower().replace("µ", "u").split())


def bath_to_canonical(measure: str, value: float | str, unit: str) -> float:
    """One bath analysis value in its measure's canonical unit (g/L, mL/L, SG, pH, °C ...).

    Raises a `UnitError` subclass that names the measure, what was wrong and what is allowed.
    """
    canonical = _bath_measure(measure)
    number = _number(measure, value)
    if not isinstance(unit, str):
        raise UnknownUnit(f"{measure}: unit must be text; allowed: {bath_allowed_units(measure)}")
    key = _normalise_unit(unit)
    allowed = ", ".join(repr(u) for u in bath_allowed_units(measure))
    table = {
        "mass_concentration": _MASS_CONC_UNITS,
        "volume_concentration": _VOLUME_CONC_UNITS,
        "temperature": _TEMPERATURE_UNITS,
    }.get(measure)
    if table is not None:
        expression = table.get(key)
        if expression is None:
            raise UnknownUnit(f"{measure}: unit {unit!r} is not accepted; allowed: {allowed}")
        target = {
            "mass_concentration": "gram / liter",
            "volume_concentration": "milliliter / liter",
            "temperature": "degree_Celsius",
        }[measure]
        if measure == "temperature":
            converted = float(UREG.Quantity(number, expression).to(target).magnitude)
        else:
            converted = float((number * UREG(expression)).to(target).magnitude)
    else:
        if key not in _PLAIN_UNITS[measure] and key != canonical.lower():
            raise UnknownUnit(f"{measure}: unit {unit!r} is not accepted; allowed: {allowed}")
        converted = number
    if measure != "temperature" and converted < 0:
        raise NegativeValue(f"{measure}: {number:g} {unit} is negative; it cannot be below zero")
    ceiling = _BATH_CEILING[measure]
    if converted > ceiling:
        raise ImplausibleValue(
            f"{measure}: {number:g} {unit} is {converted:g} {canonical}, above the plausible "
            f"maximum of {ceiling:g} {canonical}; check the value and its unit"
        )
    return converted


def bath_from_canonical(measure: str, value: float, unit: str) -> float:
    """A canonical bath value expressed in another accepted unit (for display)."""
    one = bath_to_canonical(measure, 1.0, unit) if measure != "temperature" else None
    if one is None:
        return float(
            UREG.Quantity(value, "degree_Celsius")
            .to(_TEMPERATURE_UNITS[_normalise_unit(unit)])
            .magnitude
        )
    return value / one


# --- what the reading-entry form offers -----------------------------------------------

#: Units a person may pick on the tablet, per quantity, in the order the trade reads them
#: (common practice: plating and finish thickness in µm, or mil for copper and µin for
#: thin finishes on inch drawings; board-level dimensions in mm, mil or inch). Only units
#: of the quantity's own dimension, and only those a gauge or drawing actually uses: the
#: API still accepts every spelling in `allowed_units`.
_ENTRY_UNITS: Final[dict[str, tuple[str, ...]]] = {
    "hole_wall_copper": ("µm", "mil", "µin"),
    "surface_copper": ("µm", "mil", "µin"),
    "nickel_thickness": ("µm", "µin"),
    "gold_thickness": ("µm", "µin"),
    "palladium_thickness": ("µm", "µin"),
    "silver_thickness": ("µm", "µin"),
    "tin_thickness": ("µm", "µin"),
    "osp_thickness": ("µm", "µin"),
    "mask_registration": ("µm", "mil"),
    "mask_thickness": ("µm", "mil"),
    "conductor_width": ("µm", "mil", "mm"),
    "board_thickness": ("mm", "mil", "in"),
    "vscore_web": ("mm", "mil", "in"),
    "vscore_depth": ("mm", "mil", "in"),
    "finished_hole_diameter": ("mm", "mil", "in"),
    "bow_twist": ("%",),
    "aoi_defects": (),
    "etest_opens": (),
    "etest_shorts": (),
    "etest_failed": (),
}


def entry_units(quantity: str) -> list[str]:
    """The units the reading form offers for `quantity`, its stored unit first.

    Empty for counts (a count has no unit to choose). Each is a spelling `to_canonical`
    accepts, so what the form sends is stored as typed.
    """
    _spec(quantity)
    return list(_ENTRY_UNITS.get(quantity, ()))


def from_canonical(quantity: str, value: float, unit: str) -> float:
    """A stored value in another unit of the quantity's dimension (for showing a window
    in the unit a person types in). No plausibility check: 1 in is 25,400 µm."""
    q = _spec(quantity)
    if q.family != _LENGTH:
        return float(value)
    name = _lookup(_LENGTH_UNITS, unit.strip())
    if name is None:
        raise UnknownUnit(
            f"{quantity}: unknown unit {unit!r}; allowed: "
            f"{', '.join(repr(u) for u in entry_units(quantity))}"
        )
    return float(UREG.Quantity(float(value), _pint_name(q.unit)).to(name).magnitude)
