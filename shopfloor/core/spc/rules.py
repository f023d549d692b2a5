"""Western Electric and Nelson run rules, evaluated incrementally.

The state between readings is small and JSON-serialisable (:class:`RuleState`).

Pure: no Django imports.
"""

from __future__ import annotations

import functools
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Final

from .errors import SpcInputError
from .limits import Limits, _number

# ---------------------------------------------------------------------------
# 3. Run rules, evaluated incrementally
# ---------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Rule:
    """A stable rule identifier (stored in the database) and a sentence for people."""

    id: str
    description: str


RULES: Final[dict[str, Rule]] = {
    r.id: r
    for r in (
        Rule("western_electric_1", "One point beyond the 3-sigma control limits"),
        Rule("western_electric_2", "2 of 3 consecutive points beyond 2 sigma on the same side"),
        Rule("western_electric_3", "4 of 5 consecutive points beyond 1 sigma on the same side"),
        Rule("western_electric_4", "8 consecutive points on the same side of the centre line"),
        Rule("nelson_1", "One point beyond the 3-sigma control limits"),
        Rule("nelson_2", "9 points in a row on the same side of the centre line"),
        Rule("nelson_3", "6 points in a row steadily increasing or steadily decreasing"),
        Rule("nelson_4", "14 points in a row alternating up and down"),
        Rule("nelson_5", "2 of 3 consecutive points beyond 2 sigma on the same side"),
        Rule("nelson_6", "4 of 5 consecutive points beyond 1 sigma on the same side"),
        Rule("nelson_7", "15 points in a row within 1 sigma of the centre line"),
        Rule("nelson_8", "8 points in a row beyond 1 sigma, on both sides of the centre line"),
    )
}

RULESETS: Final[dict[str, tuple[str, ...]]] = {
    "western_electric": tuple(f"western_electric_{i}" for i in range(1, 5)),
    "nelson": tuple(f"nelson_{i}" for i in range(1, 9)),
}

# Zone masks hold one bit per recent point (bit 0 = newest), 15 points deep because the
# longest zone rule (Nelson 7) spans 15 points. Trends use capped counters instead.
_DEPTH: Final = 15
_MASK: Final = (1 << _DEPTH) - 1


@dataclass(frozen=True, slots=True)
class Signal:
    """A rule that fired; ``index`` is the point that completed the pattern."""

    index: int
    rule: str
    description: str

    def to_dict(self) -> dict[str, object]:
        return {"index": self.index, "rule": self.rule, "description": self.description}


@dataclass(frozen=True, slots=True)
class RuleState:
    """Everything the rules need to remember about a series, in bounded space.

    The service stores ``to_dict()`` per series (a JSON column) and feeds each new
    reading through :func:`step`; the cost per reading is constant however long the
    history. Zone memberships are bit masks of the last 15 points, classified with the
    limits in force when each point arrived, so changing limits later does not rewrite
    how old points were judged.
    """

    index: int = 0  # index the next point will get
    last_value: float | None = None
    present: int = 0  # bit set for each of the last 15 positions that holds a point
    above0: int = 0  # strictly above the centre line
    below0: int = 0
    above1: int = 0  # more than 1 sigma above the centre line
    below1: int = 0
    above2: int = 0  # more than 2 sigma above
    below2: int = 0
    up_run: int = 0  # consecutive strict increases ending here, capped at 5
    down_run: int = 0
    alt_run: int = 0  # consecutive alternating non-zero steps ending here, capped at 13
    alt_dir: int = 0  # sign of the last step (-1, 0, 1)

    _INT_FIELDS = (
        "index",
        "present",
        "above0",
        "below0",
        "above1",
        "below1",
        "above2",
        "below2",
        "up_run",
        "down_run",
        "alt_run",
        "alt_dir",
    )

    def to_dict(self) -> dict[str, int | float | None]:
        """Plain JSON types only (ints and one float or null)."""
        out: dict[str, int | float | None] = {f: getattr(self, f) for f in self._INT_FIELDS}
        out["last_value"] = self.last_value
        out["version"] = 1
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, object]) -> RuleState:
        """Rebuild a stored state; rejects missing keys and wrong types loudly."""
        if data.get("version") != 1:
            raise SpcInputError(f"unsupported rule state version {data.get('version')!r}")
        ints: dict[str, int] = {}
        for f in cls._INT_FIELDS:
            v = data.get(f)
            if isinstance(v, bool) or not isinstance(v, int):
                raise SpcInputError(f"rule state field {f!r} must be an integer, got {v!r}")
            ints[f] = v
        last = data.get("last_value")
        return cls(last_value=None if last is None else _number(last, "last_value"), **ints)


@functools.cache
def _resolve(ruleset: str | tuple[str, ...]) -> frozenset[str]:
    if isinstance(ruleset, str):
        if ruleset not in RULESETS:
            raise SpcInputError(f"unknown rules {ruleset!r}; allowed are {', '.join(RULESETS)}")
        return frozenset(RULESETS[ruleset])
    unknown = [r for r in ruleset if r not in RULES]
    if unknown:
        raise SpcInputError(f"unknown rule id(s) {unknown}; allowed are {', '.join(RULES)}")
    return frozenset(ruleset)


def _count(bits: int) -> int:
    return bits.bit_count()


def step(
    state: RuleState,
    x: float,
    limits: Limits,
    ruleset: str | Iterable[str] = "western_electric",
) -> tuple[RuleState, list[Signal]]:
    """Feed one plotted point; return the new state and the rules it completes.

    A rule is reported at every point where the pattern ending at that point holds
    (a run of 10 above the centre reports Western Electric 4 at the 8th, 9th and 10th
    points); consumers that raise alerts de-duplicate per run. For the "k of m beyond"
    rules the newest point must itself be one of the k, so a calm point after two wild
    ones is not flagged. A point exactly on the centre line is on neither side. Cost is
    O(1): a few integer operations on the state, independent of history length.
    """
    active = _resolve(ruleset if isinstance(ruleset, str) else tuple(ruleset))
    d = x - limits.centre
    s = limits.sigma
    a0, b0 = d > 0, d < 0
    a1, b1 = d > s, d < -s
    a2, b2 = d > 2 * s, d < -2 * s

    def push(mask: int, bit: bool) -> int:
        return ((mask << 1) | bit) & _MASK

    present = push(state.present, True)
    above0, below0 = push(state.above0, a0), push(state.below0, b0)
    above1, below1 = push(state.above1, a1), push(state.below1, b1)
    above2, below2 = push(state.above2, a2), push(state.below2, b2)

    up_run, down_run, alt_run, alt_dir = 0, 0, 0, 0
    if state.last_value is not None:
        delta = x - state.last_value
        if delta > 0:
            up_run, alt_dir = min(state.up_run + 1, 5), 1
        elif delta < 0:
            down_run, alt_dir = min(state.down_run + 1, 5), -1
        if alt_dir != 0:
            alt_run = min(state.alt_run + 1, 13) if state.alt_dir == -alt_dir else 1

    new_state = RuleState(
        index=state.index + 1,
        last_value=x,
        present=present,
        above0=above0,
        below0=below0,
        above1=above1,
        below1=below1,
        above2=above2,
        below2=below2,
        up_run=up_run,
        down_run=down_run,
        alt_run=alt_run,
        alt_dir=alt_dir,
    )

    beyond3 = x > limits.ucl or x < limits.lcl
    two_of_three = (a2 and _count(above2 & 0b111) >= 2) or (b2 and _count(below2 & 0b111) >= 2)
    four_of_five = (a1 and _count(above1 & 0b11111) >= 4) or (b1 and _count(below1 & 0b11111) >= 4)

    def run_same_side(k: int) -> bool:
        full = (1 << k) - 1
        return (above0 & full) == full or (below0 & full) == full

    fired: list[str] = []
    for rule_id in RULESETS["western_electric"] + RULESETS["nelson"]:
        if rule_id not in active:
            continue
        hit: bool
        match rule_id:
            case "western_electric_1" | "nelson_1":
                hit = beyond3
            case "western_electric_2" | "nelson_5":
                hit = two_of_three
            case "western_electric_3" | "nelson_6":
                hit = four_of_five
            case "western_electric_4":
                hit = run_same_side(8)
            case "nelson_2":
                hit = run_same_side(9)
            case "nelson_3":
                hit = up_run >= 5 or down_run >= 5
            case "nelson_4":
                hit = alt_run >= 13
            case "nelson_7":
                full = (1 << 15) - 1
                hit = (present & ~(above1 | below1) & full) == full
            case "nelson_8":
                full = 0xFF
                outside = (above1 | below1) & full
                hit = outside == full and (above1 & full) != full and (below1 & full) != full
            case _:  # pragma: no cover - RULES and this match are kept in step
                hit = False
        if hit:
            fired.append(rule_id)
    return new_state, [Signal(state.index, r, RULES[r].description) for r in fired]


def evaluate_rules(
    values: Iterable[float],
    limits: Limits,
    ruleset: str | Iterable[str] = "western_electric",
    state: RuleState | None = None,
) -> list[Signal]:
    """Batch helper: run :func:`step` over ``values`` (from ``state`` or a fresh one)."""
    rules = ruleset if isinstance(ruleset, str) else tuple(ruleset)
    current = state or RuleState()
    signals: list[Signal] = []
    for x in values:
        current, fired = step(current, x, limits, rules)
        signals.extend(fired)
    return signals
