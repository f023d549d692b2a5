"""Build-spec validation: every problem reported at once, each tied to its field."""

from __future__ import annotations

import copy
import json

import jsonschema
import pytest

from routing.builder.examples import EXAMPLE_SPECS
from routing.builder.spec import (
    ShopCapability,
    SpecError,
    SpecInvalid,
    Via,
    parse_spec,
    plan_lamination,
)
from routing.builder.spec_schema import spec_json_schema


def spec(name: str = "two_layer", **changes):
    d = copy.deepcopy(EXAMPLE_SPECS[name])
    d.update(changes)
    return d


def errors_of(data) -> dict[str, SpecError]:
    with pytest.raises(SpecInvalid) as exc:
        parse_spec(data)
    out: dict[str, SpecError] = {}
    for e in exc.value.errors:
        out.setdefault(e.field, e)
    return out


def test_example_specs_parse():
    for name, data in EXAMPLE_SPECS.items():
        s = parse_spec(data)
        assert s.layers == data["layers"], name


def test_defaults_for_optional_keys():
    s = parse_spec(spec())
    assert s.hard_gold_fingers is False
    assert s.vias == ()
    assert s.stackup is None
    assert s.legend.sides == "both"
    assert (s.solder_mask.sides, s.solder_mask.colour) == ("both", "green")
    assert s.inner_copper_um is None


def test_partial_mask_object_fills_defaults():
    s = parse_spec(spec(solder_mask={"sides": "top"}))
    assert (s.solder_mask.sides, s.solder_mask.colour) == ("top", "green")


def test_all_problems_reported_at_once():
    bad = {
        "layers": 3,
        "ipc_class": 4,
        "board_thickness_mm": -1.6,
        "outer_copper_base_um": "17.5 furlongs",  # a length unit copper weight never takes
        "finish": "gold_flash",
        "solder_mask": {"sides": "left", "colour": "green", "gloss": "high"},
        "legend": {"sides": 2},
        "profile": "laser",
        "electrical_test": "none",
        "min_hole_mm": 0,
        "hard_gold_fingers": "yes",
        "vias": [{"from": 2, "to": 1, "kind": "blind", "drill": "drill"}, {"from": 1}],
        "colour": "green",
    }
    errs = errors_of(bad)
    expected = {
        "layers",
        "ipc_class",
        "board_thickness_mm",
        "outer_copper_base_um",
        "finish",
        "solder_mask.sides",
        "solder_mask.gloss",
        "legend.sides",
        "profile",
        "electrical_test",
        "min_hole_mm",
        "hard_gold_fingers",
        "vias[0].to",
        "vias[0].drill",
        "vias[1].to",
        "vias[1].kind",
        "vias[1].drill",
        "colour",
    }
    assert expected <= set(errs), expected - set(errs)
    for e in errs.values():
        d = e.as_dict()
        assert set(d) == {"field", "value", "problem", "allowed"}
        assert d["problem"]
        json.dumps(d)  # must be JSON-safe for the API
    assert "even" in errs["layers"].problem
    assert errs["finish"].value == "gold_flash"
    assert "enig" in errs["finish"].allowed
    assert errs["colour"].problem == "unknown key"
    assert errs["vias[1].to"].problem == "missing required key"
    assert errs["board_thickness_mm"].value == -1.6


def test_missing_required_keys_all_listed():
    errs = errors_of({})
    for key in (
        "layers",
        "ipc_class",
        "board_thickness_mm",
        "outer_copper_base_um",
        "finish",
        "profile",
        "electrical_test",
        "min_hole_mm",
    ):
        assert errs[key].problem == "missing required key"


def test_not_an_object():
    errs = errors_of([1, 2])
    assert "(spec)" in errs


@pytest.mark.parametrize("layers", [1, 2, 4, 6, 24, 40])
def test_allowed_layer_counts(layers):
    d = spec(layers=layers, inner_copper_um=35)
    if layers == 40:
        d["min_hole_mm"] = 0.3
    assert parse_spec(d).layers == layers


@pytest.mark.parametrize("layers", [0, 3, 5, 39, 42, -2, 2.5, "2", True])
def test_refused_layer_counts(layers):
    assert "layers" in errors_of(spec(layers=layers, inner_copper_um=35))


def test_inner_copper_required_for_multilayer():
    d = spec(layers=4)
    assert errors_of(d)["inner_copper_um"].problem.startswith("required")


@pytest.mark.parametrize("value", [float("nan"), float("inf"), 0, -0.1, 25.0])
def test_board_thickness_refused(value):
    assert "board_thickness_mm" in errors_of(spec(board_thickness_mm=value))


def test_absurd_copper_refused():
    e = errors_of(spec(outer_copper_base_um=5000))["outer_copper_base_um"]
    assert "implausibly large" in e.problem


def test_via_on_missing_layer_and_reversed_span():
    d = spec("eight_layer_buried")
    d["vias"] = [
        {"from": 1, "to": 9, "kind": "through", "drill": "mechanical"},
        {"from": 5, "to": 5, "kind": "buried", "drill": "mechanical"},
        {"from": 1, "to": 8, "kind": "blind", "drill": "mechanical"},
    ]
    errs = errors_of(d)
    assert "does not exist" in errs["vias[0].to"].problem
    assert "greater than" in errs["vias[1].to"].problem
    assert errs["vias[2].kind"].allowed == ["through"]


def test_single_sided_has_no_vias():
    d = spec(layers=1, vias=[{"from": 1, "to": 2, "kind": "through", "drill": "mechanical"}])
    assert "vias" in errors_of(d)


def test_deep_laser_via_is_an_error_and_skip_via_a_warning():
    d = spec("eight_layer_buried")
    d["vias"] = [{"from": 1, "to": 4, "kind": "blind", "drill": "laser"}]
    e = errors_of(d)["vias[0].drill"]
    assert "too deep" in e.problem
    d["vias"] = [{"from": 1, "to": 3, "kind": "blind", "drill": "laser"}]
    s = parse_spec(d)
    assert any("skip via" in w for w in s.warnings)


def test_plating_aspect_ratio_limits():
    # board 1.6 mm, hole 0.15 mm: 10.7:1, beyond the default 10:1 capability (common practice)
    assert "aspect ratio" in errors_of(spec(min_hole_mm=0.15))["min_hole_mm"].problem
    # 1.6 / 0.18 = 8.9:1: buildable, warned above 8:1 (common practice)
    s = parse_spec(spec(min_hole_mm=0.18))
    assert any("aspect ratio 8.9:1" in w for w in s.warnings)
    assert s.aspect_ratio == pytest.approx(8.889, abs=1e-3)
    # 1.6 / 0.3 = 5.3:1: no warning
    assert not any("aspect" in w for w in parse_spec(spec()).warnings)
    # a shop with a better plating line may set its own limit
    s = parse_spec(
        spec(min_hole_mm=0.15), ShopCapability(max_aspect_ratio=12, warn_aspect_ratio=11)
    )
    assert s.aspect_ratio > 10


def _stackup_8(prepreg_um: float = 60.0):
    layers = []
    for i in range(8):
        layers.append({"kind": "copper", "thickness_um": 17.5 if i in (0, 7) else 35})
        if i < 7:
            kind = "prepreg" if i in (0, 6) else ("core" if i % 2 else "prepreg")
            t = prepreg_um if i in (0, 6) else 250.0
            layers.append({"kind": kind, "thickness_um": t, "material": "FR-4 high-Tg"})
    return layers


def test_stackup_total_within_tolerance():
    d = spec("eight_layer_buried", stackup=_stackup_8())
    total = sum(x["thickness_um"] for x in d["stackup"]) / 1000
    d["board_thickness_mm"] = round(total, 3)
    assert parse_spec(d).stackup is not None
    d["board_thickness_mm"] = round(total / 1.15, 3)  # stack-up 15 % thicker than stated
    assert "outside board_thickness_mm" in errors_of(d)["stackup"].problem


def test_stackup_copper_count_disagrees():
    d = spec("eight_layer_buried", stackup=_stackup_8())
    d["layers"] = 6
    d["vias"] = []
    errs = errors_of(d)
    assert "copper layers" in errs["stackup"].problem


def test_stackup_outer_copper_and_touching_copper():
    st = _stackup_8()
    st[0]["thickness_um"] = 35
    st.insert(2, {"kind": "copper", "thickness_um": 35})
    d = spec("eight_layer_buried", stackup=st)
    errs = errors_of(d)
    assert "stackup[0].thickness_um" in errs
    assert any("touch" in e.problem for e in errs.values())


def test_microvia_aspect_ratio_from_stackup():
    # IPC-2226 guidance (from memory; common practice): microvia no deeper than wide, 1:1
    d = spec("eight_layer_buried", stackup=_stackup_8(prepreg_um=60))
    d["vias"] = [{"from": 1, "to": 2, "kind": "blind", "drill": "laser"}]
    d["board_thickness_mm"] = round(sum(x["thickness_um"] for x in d["stackup"]) / 1000, 3)
    assert parse_spec(d).microvia_aspect_ratio == pytest.approx(0.6)
    d["stackup"] = _stackup_8(prepreg_um=130)
    d["board_thickness_mm"] = round(sum(x["thickness_um"] for x in d["stackup"]) / 1000, 3)
    e = errors_of(d)["vias[0]"]
    assert "1.30:1" in e.problem
    # without a stack-up the depth is only estimated: a warning, not an error
    d.pop("stackup")
    s = parse_spec(d)
    assert s.microvia_aspect_ratio is not None and s.microvia_aspect_ratio > 1
    assert any("estimated" in w for w in s.warnings)


def test_overlapping_buried_vias_refused():
    d = spec("eight_layer_buried")
    d["vias"] = [
        {"from": 2, "to": 4, "kind": "buried", "drill": "mechanical"},
        {"from": 3, "to": 5, "kind": "buried", "drill": "mechanical"},
    ]
    assert "overlap" in errors_of(d)["vias"].problem


def V(a, b, drill="mechanical"):
    return Via(a, b, "x", drill)


def test_lamination_rule_examples():
    # through vias only: one press
    assert plan_lamination(8, (V(1, 8),)).cycles == 1
    # blind laser from the surface is drilled after the final press: still one
    assert plan_lamination(8, (V(1, 2, "laser"), V(7, 8, "laser"))).cycles == 1
    # buried 3-4 core drilled and plated before the final press: 2
    p = plan_lamination(8, (V(1, 8), V(3, 4)))
    assert p.cycles == 2 and not p.sub_assemblies[0].needs_press
    # stacked laser 1-2 / 2-3 and mirror: one cycle per stacking level
    stacked = (V(1, 2, "laser"), V(2, 3, "laser"), V(7, 8, "laser"), V(6, 7, "laser"))
    p = plan_lamination(8, stacked)
    assert p.cycles == 2
    assert [(s.lo, s.hi) for s in p.sub_assemblies] == [(2, 7)]
    p = plan_lamination(8, (*stacked, V(3, 4, "laser")))
    assert p.cycles == 3
    # disjoint buried cores share a cycle
    p = plan_lamination(8, (V(2, 3), V(6, 7)))
    assert p.cycles == 2 and len(p.in_cycle(1)) == 2
    # 1- and 2-layer boards are not laminated
    assert plan_lamination(2, (V(1, 2),)).cycles == 0


def test_json_schema_accepts_examples_and_rejects_unknown_keys():
    schema = spec_json_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema)
    for data in EXAMPLE_SPECS.values():
        validator.validate(data)
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(spec(colour="green"))
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(spec(finish="gold_flash"))
    json.dumps(schema)
