"""Labels and window words for tablet pages, in the active language.

The label table (`routing.builder.labels`) and the window wording
(`shopfloor.core.entry`) are pure and English; this is where Django's translation and
the locale's decimal separator are applied to them.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from django.http import QueryDict
from django.utils import formats
from django.utils.translation import gettext

from routing.builder import labels
from shopfloor.core.entry import Speech


def speech() -> Speech:
    """The active language's translation and decimal separator."""
    return Speech(tr=gettext, decimal=str(formats.get_format("DECIMAL_SEPARATOR")))


def quantity_label(quantity: str) -> str:
    """'Hole wall copper' (translated)."""
    return gettext(labels.quantity_label(quantity))


def parameter_rows(params: Mapping[str, Any] | None) -> list[tuple[str, str]]:
    """(label, value with unit) per step parameter, translated."""
    say = speech()
    return labels.parameter_rows(params or {}, tr=say.tr, decimal=say.decimal)


_CYCLE = re.compile(r"^(?P<name>.*) \(cycle (?P<n>\d+)\)$")


def library_text(text: str) -> str:
    """A name or note from the process library in the active language.

    The built-in library's step names, work center names and hazard notes are in the
    catalogue (`routing/builder/library_words.py` lists them); text an engineer wrote or
    edited is not, and is shown as written.
    """
    if not text:
        return text
    return gettext(text)


def step_name(name: str) -> str:
    """'Pattern plating (cycle 2)' with the library name translated."""
    match = _CYCLE.match(name or "")
    if match:
        return gettext("{name} (cycle {n})").format(name=library_text(match["name"]), n=match["n"])
    return library_text(name)


_COMMA_DECIMAL = re.compile(r"[+-]?[0-9]+,[0-9]+")


def typed_number(text: str) -> str:
    """A value typed with the locale's decimal comma ('25,4') as the service reads it
    ('25.4'). Only where the active language writes a decimal comma, and only a plain
    number with one comma: '1,234.5' or '1,2,3' are left for the parser to refuse."""
    stripped = (text or "").strip()
    if formats.get_format("DECIMAL_SEPARATOR") == "," and _COMMA_DECIMAL.fullmatch(stripped):
        return stripped.replace(",", ".")
    return text


def with_typed_number(data: QueryDict) -> QueryDict:
    """A copy of a reading form's data with its value read by `typed_number`."""
    if "value" not in data:
        return data
    copy = data.copy()
    copy["value"] = typed_number(data.get("value", ""))
    return copy
