"""The ``spc evaluate`` contract: shape of the answer and every kind of bad input."""

from __future__ import annotations

import json
import math
from typing import Any

import pytest

from shopfloor.core.spc import SpcInputError, evaluate

from .test_spc_charts import MONTGOMERY_C_COUNTS, MONTGOMERY_P_COUNTS, NIST_INDIVIDUALS

FIXED = {"centre": 1, "ucl": 2, "lcl": 0}
GROUPS = [[10.1, 9.9, 10.0], [10.2, 10.0, 9.8], [9.9, 10.1, 10.3], [10.0, 9.7, 10.1]]


def roundtrip(result: dict[str, Any]) -> dict[str, Any]:
    """The answer must be plain JSON (no NaN/inf, no dataclasses)."""
    loaded: dict[str, Any] = json.loads(json.dumps(result, allow_nan=False))
    return loaded


def test_individuals_with_capability() -> None:
    result = roundtrip(
        evaluate({"chart": "individuals", "values": NIST_INDIVIDUALS, "lsl": 45, "usl": 58})
    )
    assert set(result) == {"centre", "ucl", "lcl", "range", "signals", "capability"}
    assert result["centre"] == pytest.approx(50.81)
    assert set(result["range"]) == {"centre", "ucl", "lcl"}
    assert set(result["capability"]) == {"cp", "cpk", "pp", "ppk", "ppm"}
    assert result["signals"] == []


def test_p_chart_signals_point_at_samples() -> None:
    result = evaluate({"chart": "p", "values": MONTGOMERY_P_COUNTS, "sample_size": 50})
    assert result["range"] is None
    assert "capability" not in result
    rule1 = [s for s in result["signals"] if s["rule"] == "western_electric_1"]
    assert [s["index"] for s in rule1] == [14, 22]
    assert set(rule1[0]) == {"index", "rule", "description"}


def test_c_chart_with_nelson_rules() -> None:
    result = evaluate({"chart": "c", "values": MONTGOMERY_C_COUNTS, "rules": "nelson"})
    assert {s["rule"] for s in result["signals"]} >= {"nelson_1"}
    assert all(s["rule"].startswith("nelson_") for s in result["signals"])


@pytest.mark.parametrize("chart", ["xbar_r", "xbar_s"])
def test_subgroup_charts(chart: str) -> None:
    result = roundtrip(evaluate({"chart": chart, "subgroups": GROUPS, "usl": 10.6}))
    assert result["lcl"] < result["centre"] < result["ucl"]
    assert result["range"]["lcl"] == 0.0
    cap = result["capability"]
    assert cap["cp"] is None and cap["pp"] is None and cap["cpk"] > 0


def test_fixed_limits_replace_computed_ones() -> None:
    result = evaluate(
        {
            "chart": "individuals",
            "values": [10.0, 13.5],
            "limits": {"centre": 10, "ucl": 13, "lcl": 7},
        }
    )
    assert (result["centre"], result["ucl"], result["lcl"]) == (10.0, 13.0, 7.0)
    assert result["range"] is None
    assert [s["index"] for s in result["signals"]] == [1]
    # One point is enough when the limits are given.
    assert evaluate({"chart": "c", "values": [3], "limits": {"centre": 4, "ucl": 10, "lcl": 0}})


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ([1, 2], "JSON object"),
        ({"values": [1, 2]}, "missing 'chart'"),
        ({"chart": "ewma", "values": [1, 2]}, "allowed charts are individuals, xbar_r"),
        ({"chart": "individuals", "values": [1.0]}, r"at least 2 are needed"),
        ({"chart": "xbar_r", "subgroups": [[1, 2, 3]]}, r"at least 2 are needed"),
        ({"chart": "individuals", "values": [1.0, "2.5", 3.0]}, r"values\[1\] is '2.5'"),
        ({"chart": "individuals", "values": [1.0, None]}, r"values\[1\]"),
        ({"chart": "individuals", "values": [1.0, True]}, r"values\[1\]"),
        ({"chart": "individuals", "values": [1.0, math.nan]}, "NaN and infinite"),
        ({"chart": "individuals", "values": [math.inf, 1.0]}, "NaN and infinite"),
        ({"chart": "xbar_s", "subgroups": [[1, 2, 3], [1, 2]]}, r"ragged.*subgroups\[1\] has 2"),
        ({"chart": "xbar_r", "subgroups": [[1], [2]]}, "allowed sizes are 2 to 25"),
        ({"chart": "xbar_r", "subgroups": [[1, "x"], [2, 3]]}, r"subgroups\[0\]\[1\]"),
        ({"chart": "xbar_r", "values": [1, 2]}, "takes 'subgroups'"),
        ({"chart": "individuals"}, "needs 'values'"),
        ({"chart": "p", "values": [1, 2]}, "needs sample_size"),
        ({"chart": "p", "values": [1, 60], "sample_size": 50}, r"values\[1\].*sample size 50"),
        ({"chart": "p", "values": [1, 2], "sample_size": 0}, "whole number of 1 or more"),
        ({"chart": "c", "values": [1, 2.5]}, "whole numbers"),
        ({"chart": "c", "values": [1, -1]}, "whole numbers"),
        ({"chart": "c", "values": [1, 2], "usl": 5}, "only to variables charts"),
        ({"chart": "c", "values": [1, 2], "sample_size": 5}, "only to the p chart"),
        ({"chart": "individuals", "values": [1, 2], "rules": "x"}, "western_electric, nelson"),
        ({"chart": "individuals", "values": [1, 2], "usl ": 3}, "unknown key"),
        ({"chart": "individuals", "values": [1, 2], "lsl": 3, "usl": 1}, "must be below usl"),
        ({"chart": "individuals", "values": [1], "lsl": 0, "limits": FIXED}, "at least 2"),
        ({"chart": "individuals", "values": [1, 2], "limits": {"centre": 1}}, "needs centre"),
    ],
)  # fmt: skip
def test_bad_input_is_explained(data: object, message: str) -> None:
    with pytest.raises(SpcInputError, match=message):
        evaluate(data)


def test_error_is_a_value_error() -> None:
    assert issubclass(SpcInputError, ValueError)


def test_nan_from_json_is_rejected() -> None:
    # Python's json module accepts the non-standard NaN literal; evaluate must not.
    with pytest.raises(SpcInputError, match="NaN"):
        evaluate(json.loads('{"chart": "individuals", "values": [1, NaN, 2]}'))
