"""Sample-set judging against the criteria the standards state (pure core).

IPC-6012 (table of surface and hole copper plating minimum requirements, Table 3-4 in
revision D; values from memory) sets the hole-wall copper class figure for the average
of the measurements and a lower figure for any thin area: class 1 and 2 average 20 um,
thin area 18 um; class 3 average 25 um, thin area 20 um.
"""

from __future__ import annotations

import pytest

from routing.builder import build_routing, parse_spec
from routing.builder.examples import EXAMPLE_SPECS
from routing.builder.render import routing_to_dict
from shopfloor.core import judging, units

# 1 mil = 25.4 um and 1 uin = 0.0254 um exactly (the inch is 25.4 mm by definition).
WALK = [(1.1, "mil"), (1050, "µin"), (27.5, "um"), (0.9, "mil")]


def _class3_plan() -> list[dict]:
    spec = dict(EXAMPLE_SPECS["eight_layer_buried"])
    spec["ipc_class"] = 3
    d = routing_to_dict(build_routing(parse_spec(spec)))
    step = next(s for s in d["steps"] if s["code"] == "pattern_plate_copper")
    return [m for m in step["measurements"] if m["quantity"] == "hole_wall_copper"]


def _canonical(pairs):
    return {
        i: units.to_canonical("hole_wall_copper", v, u) for i, (v, u) in enumerate(pairs, start=1)
    }


def test_walk_conversions_are_exact():
    values = _canonical(WALK)
    # 1.1 mil = 27.94 um, 1050 uin = 26.67 um, 0.9 mil = 22.86 um (inch = 25.4 mm, exact)
    assert values == pytest.approx({1: 27.94, 2: 26.67, 3: 27.5, 4: 22.86})


def test_class3_walk_stays_in_window():
    entries = _class3_plan()
    values = _canonical([*WALK, (26.0, "um")])
    # every reading is above the thin-area 20 um: none judged out at once
    assert all(judging.judge_each(v, entries).in_window for v in values.values())
    verdict = judging.judge_set(values, entries, 5)
    # mean of 27.94, 26.67, 27.5, 22.86, 26.0 = 26.194 um >= 25 um (class 3 average)
    assert verdict.complete and verdict.in_window
    assert verdict.verdicts[0].figure == pytest.approx(26.194)


def test_running_mean_while_the_set_fills():
    entries = _class3_plan()
    lines = judging.running_text(_canonical(WALK), entries, 5)
    # (27.94 + 26.67 + 27.5 + 22.86) / 4 = 26.24 um, shown to the 0.1 um resolution
    assert lines == ["mean so far (4 of 5) 26.2 µm, needs ≥ 25 µm"]


def test_mean_below_class_average_fails_the_set_once():
    entries = _class3_plan()
    values = {1: 24.0, 2: 23.0, 3: 26.0, 4: 24.5, 5: 24.0}  # mean 24.3 < 25, all >= 20
    assert all(judging.judge_each(v, entries).in_window for v in values.values())
    verdict = judging.judge_set(values, entries, 5)
    assert verdict.complete and verdict.in_window is False
    assert verdict.message.startswith("average of 5 samples 24.3 µm is below 25 µm")


def test_thin_sample_below_thin_area_minimum_fails_at_once():
    entries = _class3_plan()
    # 19 um is below the class 3 thin-area 20 um: judged the moment it is recorded
    j = judging.judge_each(19.0, entries)
    assert not j.in_window and "below 20 µm" in j.message


def test_plain_words():
    entries = _class3_plan()
    assert judging.describe_criteria(entries) == "average of 5 samples ≥ 25 µm; each ≥ 20 µm"
    group = judging.group_plan(entries)[0]
    assert group.samples == 5 and group.window()["min"] == 20.0


def test_range_minimum_maximum_statistics():
    values = [3.0, 5.0, 4.0]
    assert judging.statistic("range", values) == 2.0
    assert judging.statistic("minimum", values) == 3.0
    assert judging.statistic("maximum", values) == 5.0
    with pytest.raises(ValueError, match="allowed"):
        judging.statistic("median", values)


def test_incomplete_set_is_not_judged():
    entries = _class3_plan()
    verdict = judging.judge_set({1: 10.0, 2: 10.0}, entries, 5)
    assert not verdict.complete and verdict.in_window is None


def test_typo_guard_asks_and_suggests_the_unit():
    entries = _class3_plan()
    alts = {u: units.to_canonical("hole_wall_copper", 1.1, u) for u in ("um", "mil", "µin")}
    guard = judging.guard_value(1.1, "1.1", "um", entries, alts)
    assert guard is not None and "Did you mean 1.1 mil?" in guard.message
    v = units.to_canonical("hole_wall_copper", 0.9, "mil")
    guard = judging.guard_value(v, "0.9", "mil", entries, {"mil": v})
    assert guard is not None
    assert guard.message.startswith("0.9 mil = 22.9 µm is below 25 µm")
    # a plain in-window reading needs no confirmation
    assert judging.guard_value(26.0, "26", "um", entries, {"um": 26.0}) is None
    # implausibly far (more than three window widths) even when inside a one-sided window
    far = judging.guard_value(1050.0, "1050", "um", entries, {"um": 1050.0, "µin": 26.67})
    assert far is not None and far.implausible and far.suggested_unit == "µin"


def test_resolution_rounding_for_people():
    # a V-score web of one third of 1.3 mm shows at the 0.01 mm resolution
    assert judging.for_people("vscore_web", 1.3 / 3, "mm") == "0.43 mm"
    assert judging.for_people("gold_thickness", 0.0400001, "um") == "0.04 µm"
    assert judging.for_people("aoi_defects", 3.0, "count") == "3"


def test_spec_key_separates_classes():
    spec2 = dict(EXAMPLE_SPECS["eight_layer_buried"], ipc_class=2)
    d2 = routing_to_dict(build_routing(parse_spec(spec2)))
    step2 = next(s for s in d2["steps"] if s["code"] == "pattern_plate_copper")
    class2 = [m for m in step2["measurements"] if m["quantity"] == "hole_wall_copper"]
    assert judging.spec_key(class2) != judging.spec_key(_class3_plan())
    assert judging.spec_key(_class3_plan()) == "each_reading20~;mean25~;n5"
