"""Routing builder: flow, lamination, library, overrides and rendering."""

from __future__ import annotations

import copy
import json

import pytest

from routing.builder import (
    DEFAULT_LIBRARY,
    LibraryInvalid,
    Override,
    OverrideInvalid,
    OverrideRefused,
    ProcessLibrary,
    apply_overrides,
    build_routing,
    classify_override,
    diff_routings,
    parse_spec,
    routing_to_dict,
    routing_to_text,
)
from routing.builder.examples import EXAMPLE_SPECS
from routing.builder.windows import Window


def make(name="two_layer", **changes):
    d = copy.deepcopy(EXAMPLE_SPECS[name])
    d.update(changes)
    return parse_spec(d)


def codes(routing):
    return [s.code for s in routing.steps]


def test_two_layer_flow():
    r = build_routing(make())
    c = codes(r)
    assert c[0] == "engineering_review" and c[-1] == "pack"
    assert not any(x.startswith(("inner_", "press", "layup", "bond_")) for x in c)
    assert (
        c.index("drill_mechanical")
        < c.index("hole_metallisation")
        < c.index("pattern_plate_copper")
        < c.index("outer_etch")
    )
    assert "hasl_level" in c and r.lamination_cycles == 0
    assert [s.seq for s in r.steps] == list(range(1, len(c) + 1))
    assert all(s.cycle is None for s in r.steps)


def test_single_sided_is_print_and_etch():
    r = build_routing(make(layers=1))
    c = codes(r)
    for absent in ("hole_metallisation", "desmear", "pattern_plate_copper", "pattern_plate_tin"):
        assert absent not in c
    assert "deburr" in c and c.index("outer_develop") < c.index("outer_etch") < c.index(
        "outer_resist_strip"
    )
    # aspect ratio is not a plating limit on an unplated board
    parse_spec(dict(EXAMPLE_SPECS["two_layer"], layers=1, min_hole_mm=0.1))


def test_no_mask_no_legend():
    r = build_routing(make(solder_mask={"sides": "none"}, legend={"sides": "none"}))
    c = codes(r)
    assert not any(x.startswith("mask_") for x in c)
    assert "legend_print" not in c and "final_cure" not in c


def test_legend_without_mask_has_cure_but_no_mask_thickness():
    r = build_routing(make(solder_mask={"sides": "none"}))
    cure = r.step("final_cure")
    assert [m.quantity for m in cure.measurements] == []


@pytest.mark.parametrize(
    ("finish", "steps"),
    [
        ("enig", ["enig_clean", "enig_nickel", "enig_gold"]),
        ("enepig", ["enepig_clean", "enepig_nickel", "enepig_palladium", "enepig_gold"]),
        ("immersion_silver", ["silver_clean", "silver_immersion"]),
        ("immersion_tin", ["tin_clean", "tin_immersion"]),
        ("hasl_lead_free", ["hasl_clean", "hasl_flux", "hasl_level", "hasl_post_clean"]),
        ("osp", ["osp_clean", "osp_coat"]),
        ("none", []),
    ],
)
def test_each_finish_has_its_own_steps(finish, steps):
    c = codes(build_routing(make(finish=finish)))
    finish_codes = [
        x
        for x in c
        if x.split("_")[0] in {"enig", "enepig", "silver", "tin", "hasl", "osp"}
        and x != "tin_strip"
    ]
    assert finish_codes == steps


def test_hasl_caution_mentions_molten_solder_and_defers_to_site_rules():
    step = build_routing(make(finish="hasl_lead_free")).step("hasl_level")
    assert "Molten solder" in step.hazard
    assert "does not replace the site's safety procedures, the safety data sheets" in step.hazard


def test_every_hazard_defers_to_site_safety():
    r = build_routing(parse_spec(EXAMPLE_SPECS["twenty_four_layer_hdi"]))
    hazards = [s.hazard for s in r.steps if s.hazard]
    assert len(hazards) > 10
    assert all("safety data sheets" in h and "does not replace" in h for h in hazards)
    assert r.step("drill_laser_c2").hazard.startswith("Class 4 laser")


def test_osp_goes_after_test_and_profiling():
    c = codes(build_routing(make(finish="osp")))
    assert (
        c.index("etest_flying_probe")
        < c.index("profile_route")
        < c.index("osp_coat")
        < c.index("final_inspection")
    )


def test_hard_gold_only_when_asked():
    assert "gold_plate" not in codes(build_routing(make()))
    r = build_routing(make(hard_gold_fingers=True))
    c = codes(r)
    assert (
        c.index("gold_tape")
        < c.index("gold_nickel_plate")
        < c.index("gold_plate")
        < c.index("gold_untape")
        < c.index("hasl_clean")
    )
    assert c.index("profile_route") < c.index("finger_bevel")
    assert r.step("hasl_level").parameters["protect_gold_fingers"] is True


def test_profiles():
    assert "profile_vscore" not in codes(build_routing(make(profile="route")))
    c = codes(build_routing(make(profile="v_score")))
    assert "profile_vscore" in c and "profile_route" not in c
    c = codes(build_routing(make(profile="route_and_v_score")))
    assert "profile_vscore" in c and "profile_route" in c


def test_fixture_test():
    c = codes(build_routing(make(electrical_test="fixture")))
    assert "etest_fixture" in c and "etest_flying_probe" not in c


def test_four_layer_single_press():
    r = build_routing(make(layers=4, inner_copper_um=35))
    assert r.lamination_cycles == 1
    assert r.step("inner_image_c1").parameters["layers"] == ["L2", "L3"]
    c = codes(r)
    assert (
        c.index("post_etch_punch_c1")
        < c.index("bond_treatment_c1")
        < c.index("press_c1")
        < c.index("drill_mechanical_c1")
    )


def test_eight_layer_buried_core_sequence():
    r = build_routing(make("eight_layer_buried"))
    assert r.lamination_cycles == 2
    c = codes(r)
    # the buried core is drilled and plated first, with no press of its own
    assert c.index("drill_mechanical_c1") < c.index("panel_plate_c1") < c.index("inner_image_c2")
    assert "press_c1" not in c and "press_c2" in c
    # all inner layers L2-L7 are imaged before the final press
    assert r.step("inner_image_c2").parameters["layers"] == [f"L{i}" for i in range(2, 8)]
    # queue limits name the step they run to
    assert r.step("hole_metallisation_c1").parameters["queue_time_until"] == "panel_plate_c1"
    assert r.step("hole_metallisation_c2").parameters["queue_time_until"] == "pattern_plate_copper"
    assert r.step("bond_treatment_c2").parameters["queue_time_until"] == "press_c2"
    assert r.step("enig_gold").parameters["queue_time_until"] == "pack"


def test_twenty_four_layer_three_cycles():
    # Build time is a benchmark goal (bench/bench_routing.py), not a timed test.
    spec = parse_spec(EXAMPLE_SPECS["twenty_four_layer_hdi"])
    r = build_routing(spec)
    assert r.lamination_cycles == 3
    assert r.step("press_c1").parameters["stacks"] == ["L3-L22"]
    assert r.step("press_c2").parameters["stacks"] == ["L2-L23"]
    assert r.step("press_c3").parameters["stacks"] == ["L1-L24"]
    assert "drill_mechanical_c2" not in codes(r)  # cycle 2 has laser vias only
    assert r.step("drill_laser_c3").parameters["vias"] == [
        "L1-L2 blind laser",
        "L23-L24 blind laser",
    ]
    assert r.microvia_aspect_ratio == pytest.approx(0.6)
    # every copper layer L2-L23 is imaged exactly once across the cycles
    imaged = [
        x for s in r.steps if s.code.startswith("inner_image_") for x in s.parameters["layers"]
    ]
    assert sorted(imaged, key=lambda x: int(x[1:])) == [f"L{i}" for i in range(2, 24)]


def test_routing_is_deterministic_and_standard_minutes_sum():
    a = build_routing(make("eight_layer_buried"))
    b = build_routing(make("eight_layer_buried"))
    assert routing_to_dict(a) == routing_to_dict(b)
    assert a.standard_minutes == sum(s.standard_minutes for s in a.steps) > 0


# ------------------------------------------------------------------ render


def test_dict_contract():
    d = routing_to_dict(build_routing(make("eight_layer_buried")))
    assert set(d) == {"steps", "warnings", "lamination_cycles", "aspect_ratio"}
    step = d["steps"][0]
    assert set(step) == {
        "seq",
        "code",
        "name",
        "work_center",
        "instructions",
        "parameters",
        "hazard",
        "queue_time_limit_minutes",
        "standard_minutes",
        "cycle",
        "measurements",
        "criteria_in_words",
    }
    plating = next(s for s in d["steps"] if s["code"] == "pattern_plate_copper")
    m, thin = plating["measurements"][:2]
    # IPC-6012 hole copper, class 3: the average of the set >= 25 um, each reading (thin
    # area) >= 20 um (from memory)
    assert (thin["applies_to"], thin["min"], thin["in_words"]) == (
        "each_reading",
        20.0,
        "each ≥ 20 µm",
    )
    assert plating["criteria_in_words"][0] == {
        "quantity": "hole_wall_copper",
        "in_words": "average of 5 samples ≥ 25 µm; each ≥ 20 µm",
    }
    assert m == {
        "quantity": "hole_wall_copper",
        "unit": "um",
        "min": 25.0,
        "max": None,
        "target": None,
        "samples": 5,
        "source": m["source"],
        "attribute": False,
        "deviation": False,
        "applies_to": "mean",
        "in_words": "average of 5 samples ≥ 25 µm",
    }
    assert json.loads(json.dumps(d)) == d
    assert d["lamination_cycles"] == 2 and d["aspect_ratio"] == 6.4


def test_text_table():
    text = routing_to_text(build_routing(make("eight_layer_buried")))
    lines = text.splitlines()
    assert lines[0].split()[:2] == ["seq", "code"]
    assert any(
        line.strip().startswith(
            "measure hole_wall_copper: average of 5 samples ≥ 25 µm; each ≥ 20 µm"
        )
        for line in lines
    )
    assert "2 lamination cycle(s)" in text


def test_diff_routings():
    old = routing_to_dict(build_routing(make()))
    new_routing = build_routing(make(hard_gold_fingers=True))
    new_routing = apply_overrides(
        new_routing,
        [
            Override(
                "hole_wall_copper",
                "pattern_plate_copper",
                22.0,
                None,
                None,
                "drawing note 4",
                applies_to="mean",
            )
        ],
    )
    new = routing_to_dict(new_routing)
    lines = diff_routings(old, new)
    seq = next(s["seq"] for s in new["steps"] if s["code"] == "gold_plate")
    assert f"+ step {seq} gold_plate Finger hard gold plate" in lines
    assert any(
        line.startswith("~ step") and "hole_wall_copper (mean) min 20 -> 22 um" in line
        for line in lines
    )
    # only the average entry changed; the thin-area (each reading) entry kept its 18 um
    assert not any("hole_wall_copper min" in line for line in lines)
    back = diff_routings(new, old)
    assert any(line.startswith("- step") and "gold_plate" in line for line in back)
    assert diff_routings(old, old) == []


# ------------------------------------------------------------------ overrides


def _w(lo, hi, target=None):
    return Window("nickel_thickness", "um", lo, hi, target, 5, "IPC-4552A", False)


@pytest.mark.parametrize(
    ("lo", "hi", "expected"),
    [
        (3.5, None, "tighter"),
        (None, 5.5, "tighter"),
        (3.5, 5.5, "tighter"),
        (3.0, 6.0, "same"),
        (None, None, "same"),
        (2.5, None, "looser"),
        (None, 7.0, "looser"),
        (3.5, 7.0, "looser"),  # tighter on one side, looser on the other: looser
    ],
)
def test_classify_override(lo, hi, expected):
    assert (
        classify_override(_w(3.0, 6.0), Override("nickel_thickness", None, lo, hi, None, "r"))
        == expected
    )


def test_classify_one_sided_default():
    w = Window("hole_wall_copper", "um", 20.0, None, None, 5, "IPC-6012", False)
    assert (
        classify_override(w, Override("hole_wall_copper", None, None, 40.0, None, "r")) == "tighter"
    )


def test_tighter_override_applied_with_customer_source():
    r = build_routing(make(finish="enig"))
    r2 = apply_overrides(
        r, [Override("nickel_thickness", "enig_gold", 3.5, 5.5, 4.5, "drawing note 7")]
    )
    w = next(m for m in r2.step("enig_gold").measurements if m.quantity == "nickel_thickness")
    assert (w.min, w.max, w.target) == (3.5, 5.5, 4.5)
    assert w.source == "customer spec: drawing note 7" and not w.deviation
    # the original routing is untouched (frozen, rebuilt)
    w0 = next(m for m in r.step("enig_gold").measurements if m.quantity == "nickel_thickness")
    assert w0.min == 3.0


def test_looser_override_needs_approval():
    r = build_routing(make(finish="enig"))
    o = Override("gold_thickness", None, 0.03, None, None, "customer accepts thin gold")
    with pytest.raises(OverrideRefused) as exc:
        apply_overrides(r, [o])
    assert "approval" in str(exc.value) and "0.04" in str(exc.value)
    r2 = apply_overrides(
        r,
        [
            Override(
                "gold_thickness",
                None,
                0.03,
                None,
                None,
                "customer accepts thin gold",
                approved_by="process eng. A",
            )
        ],
    )
    w = next(m for m in r2.step("enig_gold").measurements if m.quantity == "gold_thickness")
    assert w.deviation and w.reason == "customer accepts thin gold" and w.min == 0.03
    assert "approved by process eng. A" in w.source
    assert (
        routing_to_dict(r2)["steps"][r2.step("enig_gold").seq - 1]["measurements"][1]["deviation"]
        is True
    )


def test_attribute_window_cannot_be_loosened_without_approval():
    r = build_routing(make())
    with pytest.raises(OverrideRefused):
        apply_overrides(r, [Override("etest_opens", None, None, 1, None, "allow one")])


@pytest.mark.parametrize(
    "override",
    [
        Override("nickel_thickness", None, 5.0, 4.0, None, "r"),  # min above max
        Override("nickel_thickness", None, None, None, 9.0, "r"),  # target outside
        Override("nickel_thickness", None, 3.5, None, None, "  "),  # no reason
        Override("copper", None, 3.5, None, None, "r"),  # unknown quantity
        Override("nickel_thickness", None, float("nan"), None, None, "r"),
        Override("nickel_thickness", None, -1.0, None, None, "r"),
        Override("nickel_thickness", "press_c1", 3.5, None, None, "r"),  # no such window
        Override("palladium_thickness", None, 0.1, None, None, "r"),  # not on an ENIG job
    ],
)
def test_invalid_overrides(override):
    r = build_routing(make(finish="enig"))
    with pytest.raises(OverrideInvalid):
        apply_overrides(r, [override])


# ------------------------------------------------------------------ library


def test_default_library_is_json_and_valid():
    json.loads(json.dumps(DEFAULT_LIBRARY))
    lib = ProcessLibrary.from_dict(copy.deepcopy(DEFAULT_LIBRARY))
    assert lib.steps["press"].parameters["max_temperature_c"] > 0
    assert set(lib.work_centers) >= {s.work_center for s in lib.steps.values()}


def test_library_edit_flows_into_routing():
    d = copy.deepcopy(DEFAULT_LIBRARY)
    d["steps"]["outer_etch"]["standard_minutes"] = 25
    d["steps"]["pattern_plate_copper"]["measurements"]["hole_wall_copper"] = {
        "min": 23.0,
        "source": "shop rule 12",
        "samples": 8,
    }
    r = build_routing(make(), ProcessLibrary.from_dict(d))
    assert r.step("outer_etch").standard_minutes == 25
    w = r.step("pattern_plate_copper").measurements[0]
    assert (w.min, w.samples, w.source) == (23.0, 8, "process library: shop rule 12")


def test_bad_library_edits_all_reported():
    d = copy.deepcopy(DEFAULT_LIBRARY)
    del d["steps"]["press"]
    d["steps"]["outer_etch"]["work_center"] = "nowhere"
    d["steps"]["outer_etch"]["standard_minutes"] = 0
    d["steps"]["hasl_level"]["hazard"] = "hot"
    d["steps"]["inner_aoi"]["measurements"] = {"aoi_defect": {}}
    d["steps"]["enig_gold"]["measurements"]["gold_thickness"] = {"min": 0.1, "max": 0.05}
    d["steps"]["tin_immersion"]["queue_time_until"] = "shipping"
    d["steps"]["pack"]["colour"] = "blue"
    with pytest.raises(LibraryInvalid) as exc:
        ProcessLibrary.from_dict(d)
    text = " | ".join(exc.value.errors)
    for fragment in (
        "missing: press",
        "'nowhere'",
        "standard_minutes",
        "safety data sheets",
        "aoi_defect",
        "above max",
        "'shipping'",
        "'colour'",
    ):
        assert fragment in text, fragment
    assert len(exc.value.errors) >= 8


def test_library_not_an_object():
    with pytest.raises(LibraryInvalid):
        ProcessLibrary.from_dict([])
