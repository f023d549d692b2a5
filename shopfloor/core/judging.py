"""Judge readings and sample sets the way the standards state their limits.

Why this module exists: a standard rarely says "every reading inside". IPC-6012 sets the
hole-wall copper figure for the *average* of the measurements and a lower one for any
thin area; uniformity limits bound the *range* of a set; some customer drawings bound
the *smallest* reading. Judging every reading against the average figure holds good
product, so each entry of a measurement plan says what its limits apply to
(`applies_to`), and one quantity may carry several entries (mean >= the class average
AND each reading >= the thin-area minimum).

* `each_reading` entries judge a reading the moment it is recorded;
* `mean`, `minimum`, `maximum` and `range` entries judge the sample set once it is
  complete (the plan's sample count of current readings).

Everything here is plain data in, plain data out (no Django), so the routing builder,
the floor service, the event handler, the pages and the tests share one rule set.
Values are in the quantity's canonical unit; nothing is rounded except text for people
(`for_people`), which rounds to the quantity's resolution.
"""

from __future__ import annotations

import hashlib
import math
import statistics
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Final

from shopfloor.core.units import DEFECTIVES_QUANTITIES

__all__ = [
    "APPLIES_TO",
    "SET_STATISTICS",
    "EntryVerdict",
    "Guard",
    "Judgement",
    "QuantityPlan",
    "SetVerdict",
    "applies_to",
    "describe_criteria",
    "describe_entry",
    "describe_window",
    "for_people",
    "group_plan",
    "guard_value",
    "judge",
    "judge_each",
    "judge_set",
    "judge_window",
    "resolution",
    "running_text",
    "spec_key",
    "spec_label",
]

#: What a window's limits apply to (the order is the order they are described in).
APPLIES_TO: Final = ("mean", "minimum", "maximum", "range", "each_reading")
SET_STATISTICS: Final = frozenset({"mean", "minimum", "maximum", "range"})

#: The step of a number shown to people, per quantity, in its canonical unit. Chosen to
#: match what the usual gauge resolves (common practice: XRF reads gold to 0.001 µm,
#: a micrometer board thickness to 0.01 mm, a microsection copper to 0.1 µm).
_RESOLUTION: Final[dict[str, float]] = {
    "hole_wall_copper": 0.1,
    "surface_copper": 0.1,
    "nickel_thickness": 0.01,
    "gold_thickness": 0.001,
    "palladium_thickness": 0.001,
    "silver_thickness": 0.001,
    "tin_thickness": 0.01,
    "osp_thickness": 0.01,
    "mask_registration": 1.0,
    "mask_thickness": 1.0,
    "conductor_width": 1.0,
    "board_thickness": 0.01,
    "vscore_web": 0.01,
    "vscore_depth": 0.01,
    "finished_hole_diameter": 0.001,
    "bow_twist": 0.01,
    "aoi_defects": 1.0,
    "etest_opens": 1.0,
    "etest_shorts": 1.0,
    "etest_failed": 1.0,
}
_SYMBOL: Final[dict[str, str]] = {"um": "µm", "mm": "mm", "percent": "%", "count": ""}
#: A value further from its window than this many window widths is treated as a
#: probable typing or unit slip and must be confirmed (shop rule).
IMPLAUSIBLE_WIDTHS: Final = 3.0


def resolution(quantity: str) -> float:
    """The step a number of this quantity is shown to (0.1 µm for copper, ...)."""
    return _RESOLUTION.get(quantity, 0.001)


def _decimals(step: float) -> int:
    return max(0, -math.floor(math.log10(step) + 1e-9)) if step < 1 else 0


def for_people(
    quantity: str,
    value: float | None,
    unit: str = "",
    *,
    symbol: bool = True,
    extra_digits: int = 0,
) -> str:
    """A number rounded to the quantity's resolution ('0.43 mm', '25 µm', '3').

    Stored values stay exact; only the text is rounded. Trailing zeros are dropped so a
    window of 25 reads '25 µm', not '25.0 µm'. `extra_digits` is for statistics of the
    readings (a mean, control limits), which are known finer than one reading: a c chart
    of counts has c-bar 0.29, not 0 (common practice: one or two digits more).
    """
    if value is None:
        return "-"
    step = resolution(quantity) / (10**extra_digits)
    rounded = round(float(value) / step) * step
    text = f"{rounded:.{_decimals(step)}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    if text in {"-0", ""}:
        text = "0"
    sym = _SYMBOL.get(unit, unit)
    return f"{text} {sym}" if symbol and sym else text


def applies_to(entry: Mapping[str, Any]) -> str:
    """An entry's `applies_to`; plans stored before it existed judged each reading."""
    value = entry.get("applies_to") or "each_reading"
    return str(value)


def _fmt(entry: Mapping[str, Any], value: float | None) -> str:
    return for_people(str(entry.get("quantity", "")), value, str(entry.get("unit", "")))


def _limits_text(entry: Mapping[str, Any]) -> str:
    lo, hi = entry.get("min"), entry.get("max")
    if lo is not None and hi is not None:
        q = str(entry.get("quantity", ""))
        sym = _unit(entry)
        both = f"{for_people(q, lo, symbol=False)} – {for_people(q, hi, symbol=False)}"
        return f"{both} {sym}" if sym else both
    if lo is not None:
        return f"≥ {_fmt(entry, lo)}"
    if hi is not None:
        return f"≤ {_fmt(entry, hi)}"
    return "recorded only"


def _unit(entry: Mapping[str, Any]) -> str:
    unit = str(entry.get("unit", ""))
    return _SYMBOL.get(unit, unit)


def describe_entry(entry: Mapping[str, Any], samples: int | None = None) -> str:
    """One entry in plain words: 'average of 5 samples ≥ 25 µm', 'each ≥ 20 µm'."""
    n = samples if samples is not None else entry.get("samples")
    what = applies_to(entry)
    limits = _limits_text(entry)
    if entry.get("quantity") in DEFECTIVES_QUANTITIES and hi_lo_none(entry):
        return "failed of tested, no per-lot limit (watched on a p chart)"
    if entry.get("attribute"):
        hi = entry.get("max")
        if hi is None:
            return "defects found, no per-lot limit"
        return f"defects found ≤ {for_people(str(entry.get('quantity', '')), hi)}"
    of = f" of {n} samples" if isinstance(n, int) and n > 1 else ""
    if what == "mean":
        return f"average{of} {limits}"
    if what == "minimum":
        return f"smallest{of} {limits}"
    if what == "maximum":
        return f"largest{of} {limits}"
    if what == "range":
        return f"range (largest − smallest){of} {limits}"
    return f"each {limits}" if isinstance(n, int) and n > 1 else limits


def hi_lo_none(entry: Mapping[str, Any]) -> bool:
    return entry.get("min") is None and entry.get("max") is None


def _order(entry: Mapping[str, Any]) -> int:
    what = applies_to(entry)
    return APPLIES_TO.index(what) if what in APPLIES_TO else len(APPLIES_TO)


def describe_criteria(entries: Sequence[Mapping[str, Any]]) -> str:
    """Every entry of one quantity, joined: 'average of 5 samples ≥ 25 µm; each ≥ 20 µm'."""
    if not entries:
        return "recorded only"
    n = samples_of(entries)
    ordered = sorted(entries, key=_order)
    text = "; ".join(describe_entry(e, n) for e in ordered)
    targets = [e.get("target") for e in ordered if e.get("target") is not None]
    if targets:
        text += f" (target {_fmt(ordered[0], targets[0])})"
    return text


def samples_of(entries: Iterable[Mapping[str, Any]]) -> int:
    """The sample count of a quantity's set: the largest any of its entries asks for."""
    counts = [int(e.get("samples") or 1) for e in entries]
    return max(counts) if counts else 1


@dataclass(frozen=True)
class QuantityPlan:
    """All entries of one quantity at a step, with the set's sample count."""

    quantity: str
    unit: str
    samples: int
    entries: tuple[dict[str, Any], ...]

    @property
    def each(self) -> tuple[dict[str, Any], ...]:
        return tuple(e for e in self.entries if applies_to(e) == "each_reading")

    @property
    def set_entries(self) -> tuple[dict[str, Any], ...]:
        return tuple(e for e in self.entries if applies_to(e) in SET_STATISTICS)

    @property
    def attribute(self) -> bool:
        return any(e.get("attribute") for e in self.entries)

    @property
    def words(self) -> str:
        return describe_criteria(self.entries)

    def window(self) -> dict[str, Any]:
        """The snapshot a reading stores: the each-reading limits (what the reading itself
        is judged against) plus every criterion of the quantity and the plain words."""
        each = self.each
        base = dict(each[0]) if each else dict(self.entries[0])
        if not each:
            base.update(min=None, max=None, target=self.entries[0].get("target"))
        base["applies_to"] = "each_reading"
        base["samples"] = self.samples
        base["criteria"] = [dict(e) for e in self.entries]
        base["in_words"] = self.words
        if len(each) > 1:  # several each-reading entries: the tightest of each side
            lows = [e["min"] for e in each if e.get("min") is not None]
            highs = [e["max"] for e in each if e.get("max") is not None]
            base["min"] = max(lows) if lows else None
            base["max"] = min(highs) if highs else None
        return base


def group_plan(plan: Iterable[Mapping[str, Any]]) -> list[QuantityPlan]:
    """A step's plan grouped by quantity, in the order quantities first appear."""
    grouped: dict[str, list[dict[str, Any]]] = {}
    for entry in plan:
        grouped.setdefault(str(entry["quantity"]), []).append(dict(entry))
    return [
        QuantityPlan(q, str(es[0].get("unit", "")), samples_of(es), tuple(es))
        for q, es in grouped.items()
    ]


def criteria_of(window: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The criteria a stored reading window carries (older snapshots: itself)."""
    raw = window.get("criteria")
    if isinstance(raw, list) and raw:
        return [dict(e) for e in raw]
    return [dict(window)] if window else []


# --- judging ---------------------------------------------------------------------------


@dataclass(frozen=True)
class EntryVerdict:
    """One criterion judged: the figure it looks at and whether it is inside."""

    applies_to: str
    figure: float
    in_window: bool
    message: str


def _inside(value: float, entry: Mapping[str, Any]) -> bool:
    lo, hi = entry.get("min"), entry.get("max")
    return (lo is None or value >= lo) and (hi is None or value <= hi)


def _outside_text(name: str, value: float, entry: Mapping[str, Any]) -> str:
    lo, hi = entry.get("min"), entry.get("max")
    shown = _fmt(entry, value)
    if lo is not None and value < lo:
        return f"{name} {shown} is below {_fmt(entry, lo)}"
    if hi is not None and value > hi:
        return f"{name} {shown} is above {_fmt(entry, hi)}"
    return f"{name} {shown} is inside"


def judge_each(value: float, entries: Sequence[Mapping[str, Any]]) -> EntryVerdict:
    """A single reading against every each-reading entry (limits are inclusive)."""
    if not math.isfinite(value):
        raise ValueError("value must be a finite number")
    for entry in entries:
        if applies_to(entry) != "each_reading":
            continue
        if not _inside(value, entry):
            return EntryVerdict(
                "each_reading",
                value,
                False,
                _outside_text("reading", value, entry) + f" (each {_limits_text(entry)})",
            )
    return EntryVerdict("each_reading", value, True, "in window")


def statistic(what: str, values: Sequence[float]) -> float:
    """The figure a set criterion looks at."""
    if not values:
        raise ValueError("a sample set needs at least one value")
    if what == "mean":
        return statistics.fmean(values)
    if what == "minimum":
        return min(values)
    if what == "maximum":
        return max(values)
    if what == "range":
        return max(values) - min(values)
    raise ValueError(f"unknown applies_to {what!r}; allowed: {', '.join(APPLIES_TO)}")


_NAMES: Final = {
    "mean": "average",
    "minimum": "smallest sample",
    "maximum": "largest sample",
    "range": "range",
}


@dataclass(frozen=True)
class SetVerdict:
    """A sample set judged against the set criteria of its quantity."""

    complete: bool
    in_window: bool | None  # None while the set is not complete
    verdicts: tuple[EntryVerdict, ...]
    values: tuple[float, ...]
    samples: int

    @property
    def message(self) -> str:
        failed = [v.message for v in self.verdicts if not v.in_window]
        return "; ".join(failed) if failed else "set in window"


def judge_set(
    values_by_sample: Mapping[int, float], entries: Sequence[Mapping[str, Any]], samples: int
) -> SetVerdict:
    """Judge the set once it holds samples 1..`samples`; before that, report incomplete.

    Each-reading entries are not part of this verdict (they judge at once); a set with no
    set criteria is always 'in window' once complete.
    """
    values = tuple(float(values_by_sample[i]) for i in sorted(values_by_sample) if i <= samples)
    complete = all(i in values_by_sample for i in range(1, samples + 1))
    if not complete:
        return SetVerdict(False, None, (), values, samples)
    verdicts: list[EntryVerdict] = []
    for entry in entries:
        what = applies_to(entry)
        if what not in SET_STATISTICS:
            continue
        figure = statistic(what, values)
        ok = _inside(figure, entry)
        name = f"{_NAMES[what]} of {samples} samples"
        text = _outside_text(name, figure, entry) if not ok else f"{name} {_fmt(entry, figure)}"
        verdicts.append(
            EntryVerdict(what, figure, ok, text + f" ({describe_entry(entry, samples)})")
        )
    return SetVerdict(True, all(v.in_window for v in verdicts), tuple(verdicts), values, samples)


def running_text(
    values_by_sample: Mapping[int, float], entries: Sequence[Mapping[str, Any]], samples: int
) -> list[str]:
    """What the tablet shows while a set fills: 'mean so far 26.2 µm, needs ≥ 25 µm'."""
    values = [float(values_by_sample[i]) for i in sorted(values_by_sample) if i <= samples]
    lines: list[str] = []
    if not values:
        return lines
    done = len(values) >= samples
    for entry in sorted(entries, key=_order):
        what = applies_to(entry)
        if what not in SET_STATISTICS:
            continue
        figure = statistic(what, values)
        label = {"mean": "mean", "minimum": "smallest", "maximum": "largest", "range": "range"}[
            what
        ]
        when = f"of {len(values)} samples" if done else f"so far ({len(values)} of {samples})"
        state = "" if not done else (" — inside" if _inside(figure, entry) else " — OUTSIDE")
        lines.append(f"{label} {when} {_fmt(entry, figure)}, needs {_limits_text(entry)}{state}")
    return lines


# --- the typo guard -------------------------------------------------------------------


@dataclass(frozen=True)
class Guard:
    """Why a value must be confirmed before it is stored, and a likely fix."""

    message: str
    implausible: bool
    suggested_unit: str | None


def _width(entries: Sequence[Mapping[str, Any]]) -> float | None:
    for entry in entries:
        lo, hi = entry.get("min"), entry.get("max")
        if lo is not None and hi is not None and hi > lo:
            return float(hi - lo)
    for entry in entries:
        for limit in (entry.get("min"), entry.get("max")):
            if limit:
                return abs(float(limit))
    return None


def _implausible(value: float, entries: Sequence[Mapping[str, Any]]) -> bool:
    """More than `IMPLAUSIBLE_WIDTHS` window widths outside (a one-sided window's width
    is its limit, so 1050 against '>= 25 µm' is implausible but 40 is not)."""
    width = _width(entries)
    if not width:
        return False
    lows = [float(e["min"]) for e in entries if e.get("min") is not None]
    highs = [float(e["max"]) for e in entries if e.get("max") is not None]
    lo = min(lows) if lows else None
    hi = max(highs) if highs else None
    if lo is not None and value < lo - IMPLAUSIBLE_WIDTHS * width:
        return True
    if hi is not None and value > hi + IMPLAUSIBLE_WIDTHS * width:
        return True
    return hi is None and lo is not None and value > lo + IMPLAUSIBLE_WIDTHS * width


def _single_value_outside(value: float, entry: Mapping[str, Any]) -> bool:
    """Can one value alone already show this criterion is at risk?"""
    if applies_to(entry) == "range":
        return False  # one value says nothing about a spread
    return not _inside(value, entry)


def guard_value(
    value: float,
    entered: str,
    entered_unit: str,
    entries: Sequence[Mapping[str, Any]],
    alternatives: Mapping[str, float],
) -> Guard | None:
    """Should the operator confirm this value before it is stored? None when not.

    Asks when the value is outside an each-reading window, outside the limits of a mean /
    smallest / largest criterion (one such value makes the set suspect), or more than
    `IMPLAUSIBLE_WIDTHS` window widths from the window. `alternatives` maps other units
    of the same dimension to what the typed number would be in the canonical unit; the
    first one that lands inside every criterion is offered ("did you mean mil?").
    Attribute counts are not guarded: a found defect is not a typing slip.
    """
    if not entries or any(e.get("attribute") for e in entries):
        return None
    failing = [e for e in sorted(entries, key=_order) if _single_value_outside(value, e)]
    implausible = _implausible(value, entries)
    if not failing and not implausible:
        return None
    first = entries[0]
    unit_sym = _unit(first)
    shown = _fmt(first, value)
    typed = f"{entered} {entered_unit}".strip()
    same = entered_unit.strip() in {str(first.get("unit", "")), unit_sym}
    head = shown if same else f"{typed} = {shown}"
    if failing:
        reasons = []
        for e in failing:
            lo, hi = e.get("min"), e.get("max")
            side = "below" if lo is not None and value < lo else "above"
            limit = lo if side == "below" else hi
            reasons.append(f"{side} {_fmt(e, limit)} ({describe_entry(e)})")
        text = f"{head} is " + " and ".join(reasons)
    else:
        text = f"{head} is far from the window ({describe_criteria(entries)})"
    suggestion = None
    for unit, canonical in alternatives.items():
        if unit.strip() == entered_unit.strip():
            continue
        inside = all(_inside(canonical, e) for e in entries if applies_to(e) != "range")
        if inside and not _implausible(canonical, entries):
            suggestion = unit
            break
    text += f". Did you mean {entered} {suggestion}?" if suggestion else "."
    return Guard(text, implausible, suggestion)


# --- SPC series identity ----------------------------------------------------------------


def _num(v: Any) -> str:
    return "" if v is None else f"{float(v):.6g}"


def spec_key(entries: Iterable[Mapping[str, Any]]) -> str:
    """A short, stable identity of the window a reading is judged against.

    Two readings share an SPC series only when their criteria are the same (limits,
    what they apply to, and the sample count), so a class 2 lot never enters a class 3
    series. Readable when short ('mean25~;each_reading20~;n5'); a hash when long.
    """
    listed = [e for e in entries if e is not None]
    parts = sorted(f"{applies_to(e)}{_num(e.get('min'))}~{_num(e.get('max'))}" for e in listed)
    n = samples_of(listed)
    text = ";".join([*parts, f"n{n}"])
    if len(text) <= 60:
        return text
    return "h" + hashlib.sha256(text.encode()).hexdigest()[:20]


def spec_label(entries: Sequence[Mapping[str, Any]]) -> str:
    """The series' window for people, with where it comes from."""
    words = describe_criteria(entries)
    sources = sorted({str(e.get("source")) for e in entries if e.get("source")})
    return f"{words} — {'; '.join(sources)}" if sources else words


# ---------------------------------------------------------------------------
# One value against one min/max window.
# Limits are inclusive: a reading exactly on a specification limit conforms
# (common practice when reading a min/max requirement).
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Judgement:
    in_window: bool
    side: str  # "in", "low" or "high"
    margin: float | None  # distance to the nearest limit (negative when outside)
    message: str


def judge(value: float, low: float | None, high: float | None, unit: str = "") -> Judgement:
    if not math.isfinite(value):
        raise ValueError("value must be a finite number")
    suffix = f" {unit}" if unit else ""
    margins: list[float] = []
    if low is not None:
        margins.append(value - low)
        if value < low:
            return Judgement(
                False, "low", value - low, f"{value:g}{suffix} is below the minimum {low:g}{suffix}"
            )
    if high is not None:
        margins.append(high - value)
        if value > high:
            return Judgement(
                False,
                "high",
                high - value,
                f"{value:g}{suffix} is above the maximum {high:g}{suffix}",
            )
    return Judgement(True, "in", min(margins) if margins else None, "in window")


def judge_window(value: float, window: dict[str, Any]) -> Judgement:
    return judge(value, window.get("min"), window.get("max"), window.get("unit", ""))


def describe_window(window: dict[str, Any]) -> str:
    """A window (a plan entry, or a reading's snapshot with all criteria of its quantity)
    in plain words, rounded to the quantity's resolution: 'average of 5 samples ≥ 25 µm;
    each ≥ 20 µm', '33.8 – 57.5 µm (target 41.5 µm)'."""
    return describe_criteria(criteria_of(window))
