"""The one error the chemistry core raises: a message that says what was wrong and what is
allowed, fit to show the person who typed the numbers."""

from __future__ import annotations

import math


class ChemistryInputError(ValueError):
    """A number the calculator cannot use, or a request it must refuse, with the reason."""


def positive(name: str, value: object, *, ceiling: float | None = None, unit: str = "") -> float:
    """`value` as a finite float > 0 (and <= ceiling), or ChemistryInputError."""
    number = finite(name, value)
    if number <= 0:
        raise ChemistryInputError(f"{name} must be above zero, got {number:g}{unit}")
    if ceiling is not None and number > ceiling:
        raise ChemistryInputError(
            f"{name} {number:g}{unit} is above the plausible maximum of {ceiling:g}{unit}; "
            "check the value and its unit"
        )
    return number


def non_negative(name: str, value: object, *, unit: str = "") -> float:
    """`value` as a finite float >= 0, or ChemistryInputError."""
    number = finite(name, value)
    if number < 0:
        raise ChemistryInputError(f"{name} cannot be negative, got {number:g}{unit}")
    return number


def finite(name: str, value: object) -> float:
    """`value` as a finite float, or ChemistryInputError saying it is not a number."""
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        raise ChemistryInputError(f"{name} must be a number, got {value!r}")
    try:
        number = float(value)
    except ValueError:
        raise ChemistryInputError(f"{name} must be a number such as 12.5, got {value!r}") from None
    if not math.isfinite(number):
        raise ChemistryInputError(f"{name} must be a finite number, got {value!r}")
    return number
