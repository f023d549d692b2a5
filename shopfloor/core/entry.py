"""What the reading-entry form says: a quantity's window in any unit the form offers, and
the running figure of a sample set, in the person's language and number format.

Why this module exists: an operator who types in mil should read the window in mil
(25 µm = 0.98 mil) and not convert in their head; an operator who reads Spanish should
read "media de 5 muestras ≥ 25 µm" with a decimal comma. `shopfloor.core.judging`
keeps the rules and its English words for records (alerts, NCRs, the API); this module
only words them for the form. In English and the stored unit its text equals
`judging.describe_criteria` (a test compares them), so the two cannot drift apart.

Pure Python (no Django): the caller passes a `Speech` whose `tr` is Django's gettext
and whose `decimal` is the locale's decimal separator. The English source strings are
written as `_("...")` calls so makemessages finds them.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Final

from shopfloor.core import judging, units

__all__ = [
    "ENGLISH",
    "Speech",
    "describe_criteria",
    "guard_question",
    "number",
    "running_text",
    "unit_symbol",
]


def _same(text: str) -> str:
    return text


@dataclass(frozen=True)
class Speech:
    """How to say things: a translation function and the decimal separator."""

    tr: Callable[[str], str] = field(default=_same)
    decimal: str = "."


ENGLISH: Final = Speech()

_SYMBOL: Final[dict[str, str]] = {"um": "µm", "mm": "mm", "percent": "%", "count": ""}


def unit_symbol(quantity: str) -> str:
    """The stored unit of `quantity` as people write it ('µm', 'mm', '%', '')."""
    return _SYMBOL.get(units.canonical_unit(quantity), "")


def _is_stored_unit(quantity: str, unit: str) -> bool:
    return not unit or unit == unit_symbol(quantity) or unit == units.canonical_unit(quantity)


def number(quantity: str, value: float | None, unit: str = "", say: Speech = ENGLISH) -> str:
    """A stored value (canonical unit) as text in `unit`, without the symbol.

    In the stored unit it is rounded like `judging.for_people`; in another unit to the
    quantity's resolution converted and rounded up to a power of ten (copper's 0.1 µm is
    0.0039 mil, so mil is shown to 0.01: 25 µm reads 0.98 mil).
    """
    if value is None:
        return "-"
    if _is_stored_unit(quantity, unit):
        text = judging.for_people(quantity, value, symbol=False)
    else:
        shown = units.from_canonical(quantity, float(value), unit)
        step = abs(units.from_canonical(quantity, judging.resolution(quantity), unit))
        decimals = max(0, -math.ceil(math.log10(step) - 1e-9)) if 0 < step < 1 else 0
        text = f"{shown:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        if text in {"-0", ""}:
            text = "0"
    return text.replace(".", say.decimal)


def _with_symbol(quantity: str, value: float | None, unit: str, say: Speech) -> str:
    sym = unit_symbol(quantity) if _is_stored_unit(quantity, unit) else unit
    text = number(quantity, value, unit, say)
    return f"{text} {sym}" if sym else text


def _limits(entry: Mapping[str, Any], unit: str, say: Speech) -> str:
    _ = say.tr
    q = str(entry.get("quantity", ""))
    lo, hi = entry.get("min"), entry.get("max")
    sym = unit_symbol(q) if _is_stored_unit(q, unit) else unit
    if lo is not None and hi is not None:
        both = f"{number(q, lo, unit, say)} – {number(q, hi, unit, say)}"
        return f"{both} {sym}" if sym else both
    if lo is not None:
        return f"≥ {_with_symbol(q, lo, unit, say)}"
    if hi is not None:
        return f"≤ {_with_symbol(q, hi, unit, say)}"
    return _("recorded only")


def _entry_words(entry: Mapping[str, Any], n: int, unit: str, say: Speech) -> str:
    _ = say.tr
    q = str(entry.get("quantity", ""))
    if q in units.DEFECTIVES_QUANTITIES and judging.hi_lo_none(entry):
        return _("failed of tested, no per-lot limit (watched on a p chart)")
    if entry.get("attribute"):
        if entry.get("max") is None:
            return _("defects found, no per-lot limit")
        return _("defects found ≤ {count}").format(count=number(q, entry.get("max"), "", say))
    limits = _limits(entry, unit, say)
    what = judging.applies_to(entry)
    several = n > 1
    if what == "mean":
        text = _("average of {n} samples {limits}") if several else _("average {limits}")
    elif what == "minimum":
        text = _("smallest of {n} samples {limits}") if several else _("smallest {limits}")
    elif what == "maximum":
        text = _("largest of {n} samples {limits}") if several else _("largest {limits}")
    elif what == "range":
        text = (
            _("range (largest − smallest) of {n} samples {limits}")
            if several
            else _("range (largest − smallest) {limits}")
        )
    else:
        text = _("each {limits}") if several else "{limits}"
    return text.format(n=n, limits=limits)


def _order(entry: Mapping[str, Any]) -> int:
    what = judging.applies_to(entry)
    return judging.APPLIES_TO.index(what) if what in judging.APPLIES_TO else 99


def describe_criteria(
    entries: Sequence[Mapping[str, Any]], unit: str = "", say: Speech = ENGLISH
) -> str:
    """Every entry of one quantity in words, its limits in `unit` (default: stored)."""
    _ = say.tr
    if not entries:
        return _("recorded only")
    n = judging.samples_of(entries)
    ordered = sorted(entries, key=_order)
    text = "; ".join(_entry_words(e, n, unit, say) for e in ordered)
    targets = [e.get("target") for e in ordered if e.get("target") is not None]
    if targets:
        q = str(ordered[0].get("quantity", ""))
        text = _("{criteria} (target {value})").format(
            criteria=text, value=_with_symbol(q, targets[0], unit, say)
        )
    return text


def running_text(
    values_by_sample: Mapping[int, float],
    entries: Sequence[Mapping[str, Any]],
    samples: int,
    say: Speech = ENGLISH,
) -> list[str]:
    """The set's figures while it fills: 'mean so far (2 of 5) 26.2 µm, needs ≥ 25 µm'."""
    _ = say.tr
    names = {
        "mean": _("mean"),
        "minimum": _("smallest"),
        "maximum": _("largest"),
        "range": _("range"),
    }
    values = [float(values_by_sample[i]) for i in sorted(values_by_sample) if i <= samples]
    if not values:
        return []
    done = len(values) >= samples
    lines: list[str] = []
    for entry in sorted(entries, key=_order):
        what = judging.applies_to(entry)
        if what not in judging.SET_STATISTICS:
            continue
        figure = judging.statistic(what, values)
        q = str(entry.get("quantity", ""))
        fields = {
            "statistic": names[what],
            "done": len(values),
            "total": samples,
            "value": _with_symbol(q, figure, "", say),
            "limits": _limits(entry, "", say),
        }
        if not done:
            template = _("{statistic} so far ({done} of {total}) {value}, needs {limits}")
        elif _inside(figure, entry):
            template = _("{statistic} of {total} samples {value}, needs {limits} — inside")
        else:
            template = _("{statistic} of {total} samples {value}, needs {limits} — OUTSIDE")
        lines.append(template.format(**fields))
    return lines


def _inside(value: float, entry: Mapping[str, Any]) -> bool:
    lo, hi = entry.get("min"), entry.get("max")
    return (lo is None or value >= lo) and (hi is None or value <= hi)


def guard_question(
    value: float,
    entered: str,
    entered_unit: str,
    entries: Sequence[Mapping[str, Any]],
    suggestion: str | None,
    say: Speech = ENGLISH,
) -> str:
    """The typo guard's question (`judging.guard_value`) in the person's language: the
    same text in English, so the confirmation stored with a reading reads the same."""
    _ = say.tr
    first = entries[0]
    q = str(first.get("quantity", ""))
    shown = _with_symbol(q, value, "", say)
    typed = f"{entered} {entered_unit}".strip()
    same = entered_unit.strip() in {str(first.get("unit", "")), unit_symbol(q)}
    head = shown if same else f"{typed} = {shown}"
    failing = [e for e in sorted(entries, key=_order) if _single_value_outside(value, e)]
    if failing:
        reasons = []
        for e in failing:
            lo, hi = e.get("min"), e.get("max")
            below = lo is not None and value < lo
            limit = _with_symbol(q, lo if below else hi, "", say)
            words = _entry_words(e, _samples_of_entry(e), "", say)
            template = (
                _("below {limit} ({criterion})") if below else _("above {limit} ({criterion})")
            )
            reasons.append(template.format(limit=limit, criterion=words))
        text = _("{value} is {reasons}").format(value=head, reasons=_(" and ").join(reasons))
    else:
        text = _("{value} is far from the window ({criteria})").format(
            value=head, criteria=describe_criteria(entries, "", say)
        )
    if suggestion:
        return text + _(". Did you mean {value} {unit}?").format(value=entered, unit=suggestion)
    return text + "."


def _samples_of_entry(entry: Mapping[str, Any]) -> int:
    raw = entry.get("samples")
    return raw if isinstance(raw, int) else 1


def _single_value_outside(value: float, entry: Mapping[str, Any]) -> bool:
    if judging.applies_to(entry) == "range":
        return False
    return not _inside(value, entry)
