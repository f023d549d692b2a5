"""Reading what a person or a client typed: the one form-parsing helper.

Every page and service that takes text, a whole number, a decimal or a date from a form,
a query string or a JSON body reads it here, so a bad value is refused the same way
everywhere: `InvalidInput` (400) naming the field, what was sent and what is allowed,
with nothing saved. NUL characters (which PostgreSQL cannot store) are refused with a
reason instead of ending in a 500.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping
from typing import Any

from shopfloor.core import units
from shopfloor.errors import InvalidInput


def problem(field_: str, value: Any, what: str, allowed: Any = None) -> dict[str, Any]:
    """One entry of a refusal's `problems` list (field, value sent, problem, allowed)."""
    if value is not None and not isinstance(value, str | int | float | bool | list | dict):
        value = str(value)
    return {"field": field_, "value": value, "problem": what, "allowed": allowed}


def has_nul(value: Any) -> bool:
    """True when any text inside `value` holds a NUL character, which PostgreSQL cannot
    store in text or jsonb: such input is refused with a reason instead of a 500."""
    if isinstance(value, str):
        return "\x00" in value
    if isinstance(value, Mapping):
        return any(has_nul(k) or has_nul(v) for k, v in value.items())
    if isinstance(value, list | tuple):
        return any(has_nul(v) for v in value)
    return False


def refuse_nul(value: Any, what: str = "body") -> None:
    """InvalidInput when `value` holds a NUL character anywhere."""
    if has_nul(value):
        raise InvalidInput(
            f"The {what} contains a NUL character (\\0), which cannot be stored.",
            problems=[problem(what, None, "contains a NUL character", "text without \\0")],
        )


def text(value: Any) -> str:
    """A text field stripped of surrounding spaces; anything not text reads as empty."""
    return value.strip() if isinstance(value, str) else ""


def whole_or_none(value: Any) -> int | None:
    """A whole number, or None when the value is missing or not one (the caller says why)."""
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


def iso_date(name: str, raw: str | None, *, example: str = "") -> dt.date | None:
    """A YYYY-MM-DD date, None when empty; InvalidInput naming the field otherwise."""
    raw = (raw or "").strip()
    if not raw:
        return None
    try:
        return dt.date.fromisoformat(raw)
    except ValueError as exc:
        hint = f" (for example {example})" if example else ""
        raise InvalidInput(
            f"{name} {raw!r} is not a date; use YYYY-MM-DD{hint}.",
            problems=[problem(name, raw, "not a date", "YYYY-MM-DD")],
        ) from exc


def finite_number(raw: str, label: str) -> float:
    """A finite decimal number from a form field (a decimal comma is accepted), or
    InvalidInput naming the field and the number rule."""
    cleaned = (raw or "").strip().replace(",", ".")
    if cleaned.lower().lstrip("+-") in {"inf", "infinity", "nan"}:
        raise InvalidInput(f"{label} must be a finite number; got {raw!r}.")
    try:
        value = units.parse_decimal(cleaned)
    except ValueError:
        shown = f"{raw!r}" if cleaned else "nothing"
        raise InvalidInput(
            f"{label} must be a number (for example 45.2); got {shown}. {units.DECIMAL_RULE}."
        ) from None
    if not math.isfinite(value):
        raise InvalidInput(f"{label} must be a finite number; got {raw!r}.")
    return value
