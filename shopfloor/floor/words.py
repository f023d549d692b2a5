"""Labels and window words for tablet pages, in the active language.

The label table (`routing.builder.labels`) and the window wording
(`shopfloor.core.entry`) are pure and English; this is where Django's translation and
the locale's decimal separator are applied to them.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

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
