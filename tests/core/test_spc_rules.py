"""Western Electric and Nelson run rules: exact trip points and incremental == batch.

Every sequence here is invented. Limits: centre 0, sigma 1, control limits +-3, so the
values read directly as "sigmas from the centre".

Rule definitions checked here: Western Electric rules 1-4 as in the Western Electric
Statistical Quality Control Handbook (1956), and Nelson's eight tests as in L. S. Nelson,
"The Shewhart control chart - tests for special causes", Journal of Quality Technology
16(4), 1984; both also summarised in the NIST/SEMATECH e-Handbook, section 6.3.2 (all
from memory).
"""

from __future__ import annotations

import itertools
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from shopfloor.core.spc import (
    RULES,
    RULESETS,
    Limits,
    RuleState,
    Signal,
    SpcInputError,
    evaluate_rules,
    fixed_limits,
    step,
)

UNIT = fixed_limits(0.0, 3.0, -3.0, sigma=1.0)


def fired(values: list[float], rule: str, limits: Limits = UNIT) -> list[int]:
    """Indices at which ``rule`` fires, evaluated with its whole ruleset."""
    ruleset = "nelson" if rule.startswith("nelson") else "western_electric"
    return [s.index for s in evaluate_rules(values, limits, ruleset) if s.rule == rule]


def trips_exactly_at_end(values: list[float], rule: str) -> None:
    """The full sequence fires ``rule`` at its last point; one point fewer does not."""
    assert fired(values, rule)[-1:] == [len(values) - 1]
    assert fired(values[:-1], rule) == []


# ----- rule 1: beyond the control limits -----


@pytest.mark.parametrize("rule", ["western_electric_1", "nelson_1"])
def test_rule_1_one_point_beyond_3_sigma(rule: str) -> None:
    trips_exactly_at_end([0.0, 0.5, 3.2], rule)
    trips_exactly_at_end([0.0, -0.5, -3.2], rule)
    assert fired([3.0, -3.0], rule) == []  # on the limit is not beyond it


# ----- 2 of 3 beyond 2 sigma, same side -----


@pytest.mark.parametrize("rule", ["western_electric_2", "nelson_5"])
def test_two_of_three_beyond_2_sigma(rule: str) -> None:
    trips_exactly_at_end([0.0, 2.5, 0.0, 2.5], rule)
    trips_exactly_at_end([-2.5, 0.5, -2.5], rule)
    assert fired([2.5, -2.5, 2.5], rule) == [2]  # points 0 and 2 are above
    assert fired([2.5, 0.0, 0.0, 2.5], rule) == []  # 4 apart: not within 3
    assert fired([2.5, 2.5, 0.0], rule) == [1]  # a calm third point is not flagged


# ----- 4 of 5 beyond 1 sigma, same side -----


@pytest.mark.parametrize("rule", ["western_electric_3", "nelson_6"])
def test_four_of_five_beyond_1_sigma(rule: str) -> None:
    trips_exactly_at_end([1.5, 1.5, 0.0, 1.5, 1.5], rule)
    trips_exactly_at_end([-1.5, -1.2, -1.8, 0.3, -1.1], rule)
    assert fired([1.5, 1.5, 0.0, 0.0, 1.5, 1.5], rule) == []
    assert fired([1.5, -1.5, 1.5, -1.5, 1.5], rule) == []


# ----- runs on one side of the centre -----


def test_western_electric_4_eight_on_one_side() -> None:
    trips_exactly_at_end([0.4, 0.3, 0.5] * 2 + [0.4, 0.3], "western_electric_4")
    trips_exactly_at_end([-0.4] * 8, "western_electric_4")
    assert fired([0.4] * 7, "western_electric_4") == []
    assert fired([0.4] * 4 + [0.0] + [0.4] * 4, "western_electric_4") == []  # centre breaks
    assert fired([0.4] * 10, "western_electric_4") == [7, 8, 9]


def test_nelson_2_nine_on_one_side() -> None:
    trips_exactly_at_end([0.4, 0.3, 0.5] * 3, "nelson_2")
    assert fired([-0.4, -0.3, -0.5] * 3, "nelson_2") == [8]
    assert fired([0.4] * 8, "nelson_2") == []


# ----- trends and alternation -----


def test_nelson_3_six_steadily_increasing_or_decreasing() -> None:
    trips_exactly_at_end([-1.0, -0.6, -0.2, 0.2, 0.6, 1.0], "nelson_3")
    trips_exactly_at_end([0.9, 0.5, 0.4, 0.1, -0.3, -0.7], "nelson_3")
    assert fired([0.1, 0.2, 0.3, 0.3, 0.4, 0.5, 0.6], "nelson_3") == []  # a tie breaks


def test_nelson_4_fourteen_alternating() -> None:
    trips_exactly_at_end([0.5, -0.5] * 7, "nelson_4")
    assert fired([0.5, -0.5] * 6 + [0.5, 0.6], "nelson_4") == []


# ----- stratification and mixture -----


def test_nelson_7_fifteen_within_1_sigma() -> None:
    calm = [0.1, 0.2, -0.1, -0.2] * 4  # no trend, no long run, no alternation
    trips_exactly_at_end(calm[:15], "nelson_7")
    assert fired([0.1, 0.2, -0.1, -0.2, 1.25] * 3, "nelson_7") == []
    # Boundary convention: exactly 1 sigma away is "within" (beyond means strictly past).
    assert fired([0.1, 0.2, -0.1, -0.2, 1.0] * 3, "nelson_7") == [14]
    assert fired([*calm[:7], 1.5, *calm[:14]], "nelson_7") == []


def test_nelson_8_eight_beyond_1_sigma_on_both_sides() -> None:
    trips_exactly_at_end([1.5, -1.5, 1.2, -1.7, 1.5, 1.6, -1.5, -1.4], "nelson_8")
    assert fired([1.5] * 8, "nelson_8") == []  # one side only is not a mixture
    assert fired([1.5, -1.5] * 3 + [0.5, 1.5, -1.5], "nelson_8") == []


def test_rulesets_and_descriptions_are_stable() -> None:
    assert RULESETS["western_electric"] == tuple(f"western_electric_{i}" for i in range(1, 5))
    assert RULESETS["nelson"] == tuple(f"nelson_{i}" for i in range(1, 9))
    assert all(r.description for r in RULES.values())
    signal = evaluate_rules([3.5], UNIT, "nelson")[0]
    assert signal == Signal(0, "nelson_1", RULES["nelson_1"].description)
    with pytest.raises(SpcInputError, match="allowed are"):
        evaluate_rules([1.0], UNIT, "shewhart")


def test_state_is_json_serialisable_and_bounded() -> None:
    state = RuleState()
    for i in range(5000):
        state, _ = step(state, (i % 7) - 3.0, UNIT, "nelson")
    stored = json.dumps(state.to_dict())
    assert len(stored) < 400
    assert RuleState.from_dict(json.loads(stored)) == state
    with pytest.raises(SpcInputError):
        RuleState.from_dict({"version": 1})


# ----- reference implementation over whole windows, written from the rule text -----


def reference(values: list[float], ruleset: str) -> list[tuple[int, str]]:
    """Naive O(n * window) evaluation straight from the rule definitions."""
    out: list[tuple[int, str]] = []

    def window(i: int, k: int) -> list[float] | None:
        return values[i - k + 1 : i + 1] if i + 1 >= k else None

    for i, x in enumerate(values):
        last3 = values[max(0, i - 2) : i + 1]
        last5 = values[max(0, i - 4) : i + 1]
        checks = {
            "1": x > 3 or x < -3,
            "2of3": (x > 2 and sum(v > 2 for v in last3) >= 2)
            or (x < -2 and sum(v < -2 for v in last3) >= 2),
            "4of5": (x > 1 and sum(v > 1 for v in last5) >= 4)
            or (x < -1 and sum(v < -1 for v in last5) >= 4),
        }

        def same_side(k: int) -> bool:
            w = window(i, k)
            return w is not None and (all(v > 0 for v in w) or all(v < 0 for v in w))

        w6, w14, w15, w8 = window(i, 6), window(i, 14), window(i, 15), window(i, 8)
        trend = w6 is not None and (
            all(b > a for a, b in itertools.pairwise(w6))
            or all(b < a for a, b in itertools.pairwise(w6))
        )
        alternating = w14 is not None and all(
            (b - a) * (c - b) < 0 for a, b, c in zip(w14, w14[1:], w14[2:])
        )
        within = w15 is not None and all(abs(v) <= 1 for v in w15)
        mixture = (
            w8 is not None
            and all(abs(v) > 1 for v in w8)
            and any(v > 1 for v in w8)
            and any(v < -1 for v in w8)
        )
        if ruleset == "western_electric":
            hits = [checks["1"], checks["2of3"], checks["4of5"], same_side(8)]
        else:
            hits = [checks["1"], same_side(9), trend, alternating,
                    checks["2of3"], checks["4of5"], within, mixture]  # fmt: skip
        for rule_id, hit in zip(RULESETS[ruleset], hits, strict=True):
            if hit:
                out.append((i, rule_id))
    return out


# Values on a coarse grid so ties, centre hits and exact-boundary points all happen.
readings = st.lists(st.integers(-14, 14).map(lambda k: k / 4), max_size=120)


@settings(max_examples=150, deadline=None)
@given(values=readings, ruleset=st.sampled_from(["western_electric", "nelson"]))
def test_incremental_matches_reference_batch(values: list[float], ruleset: str) -> None:
    got = [(s.index, s.rule) for s in evaluate_rules(values, UNIT, ruleset)]
    assert got == reference(values, ruleset)


@settings(max_examples=75, deadline=None)
@given(values=readings, cut=st.integers(0, 120))
def test_stored_state_resumes_exactly(values: list[float], cut: int) -> None:
    """Stopping, storing the state as JSON and resuming gives the same signals."""
    whole = evaluate_rules(values, UNIT, "nelson")
    state = RuleState()
    first: list[Signal] = []
    for x in values[:cut]:
        state, s = step(state, x, UNIT, "nelson")
        first.extend(s)
    restored = RuleState.from_dict(json.loads(json.dumps(state.to_dict())))
    rest = evaluate_rules(values[cut:], UNIT, "nelson", state=restored)
    assert first + rest == whole
