"""Property tests over random valid specs (and random junk for the validator)."""

from __future__ import annotations

from typing import Any

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from routing.builder import SpecInvalid, build_routing, parse_spec, routing_to_dict
from routing.builder.spec import FINISHES
from shopfloor.core.units import DEFECTIVES_QUANTITIES, canonical_unit

SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])

FINISH_CODES = {
    "enig_clean",
    "enig_nickel",
    "enig_gold",
    "enepig_clean",
    "enepig_nickel",
    "enepig_palladium",
    "enepig_gold",
    "silver_clean",
    "silver_immersion",
    "tin_clean",
    "tin_immersion",
    "hasl_clean",
    "hasl_flux",
    "hasl_level",
    "hasl_post_clean",
    "osp_clean",
    "osp_coat",
}
CYCLE_ORDER = (
    "inner_clean",
    "inner_image",
    "inner_develop",
    "inner_etch",
    "inner_strip",
    "inner_aoi",
    "post_etch_punch",
    "bond_treatment",
    "layup",
    "press",
    "xray_drill_trim",
    "drill_mechanical",
    "drill_laser",
    "desmear",
    "hole_metallisation",
    "panel_plate",
)


@st.composite
def valid_specs(draw: st.DrawFn) -> dict[str, Any]:
    layers = draw(st.sampled_from([1, 2, 4, 6, 8, 10, 12, 16, 20, 24, 30, 40]))
    thickness = (
        draw(st.floats(min_value=0.4, max_value=3.2))
        if layers < 12
        else draw(st.floats(min_value=1.6, max_value=4.0))
    )
    hole = draw(st.floats(min_value=max(0.1, thickness / 9.5), max_value=1.0))
    vias: list[dict[str, Any]] = []
    if layers >= 2 and draw(st.booleans()):
        vias.append({"from": 1, "to": layers, "kind": "through", "drill": "mechanical"})
    if layers >= 4:
        depth = draw(st.integers(min_value=0, max_value=min(3, layers // 2 - 1)))
        for i in range(1, depth + 1):  # stacked laser microvias, both sides
            kind_top = "blind" if i == 1 else "buried"
            vias.append({"from": i, "to": i + 1, "kind": kind_top, "drill": "laser"})
            vias.append(
                {"from": layers - i, "to": layers + 1 - i, "kind": kind_top, "drill": "laser"}
            )
        lo, hi = depth + 1, layers - depth
        if depth >= 1 and hi - lo >= 1 and draw(st.booleans()):
            vias.append({"from": lo, "to": hi, "kind": "buried", "drill": "mechanical"})
        if depth == 0 and layers >= 6 and draw(st.booleans()):
            a = draw(st.integers(min_value=2, max_value=layers - 2))
            if a + 1 < layers:
                vias.append({"from": a, "to": a + 1, "kind": "buried", "drill": "mechanical"})
    spec: dict[str, Any] = {
        "layers": layers,
        "ipc_class": draw(st.sampled_from([1, 2, 3])),
        "board_thickness_mm": round(thickness, 3),
        "outer_copper_base_um": draw(st.sampled_from([9, 12, 17.5, 35, 70])),
        "finish": draw(st.sampled_from(FINISHES)),
        "hard_gold_fingers": draw(st.booleans()),
        "solder_mask": {"sides": draw(st.sampled_from(["both", "top", "bottom", "none"]))},
        "legend": {"sides": draw(st.sampled_from(["both", "top", "bottom", "none"]))},
        "profile": draw(st.sampled_from(["route", "v_score", "route_and_v_score"])),
        "electrical_test": draw(st.sampled_from(["flying_probe", "fixture"])),
        "min_hole_mm": round(hole, 3) + 0.001,
        "vias": vias,
    }
    if layers >= 4:
        spec["inner_copper_um"] = draw(st.sampled_from([17.5, 35, 70]))
    return spec


def _index(codes: list[str], base: str) -> list[int]:
    return [i for i, c in enumerate(codes) if c == base or c.startswith(base + "_c")]


@SETTINGS
@given(valid_specs())
def test_routing_invariants(data):
    # Order of a rigid-board flow (common practice): drill before hole metallisation
    # before pattern plating before outer etch; solder mask before surface finish; no
    # inner-layer steps below 4 layers; one press per lamination cycle.
    spec = parse_spec(data)
    r = build_routing(spec)
    codes = [s.code for s in r.steps]

    assert codes[0] == "engineering_review" and codes[-1] == "pack"
    assert len(codes) == len(set(codes)), "a step code is repeated"
    assert [s.seq for s in r.steps] == list(range(1, len(codes) + 1))

    # drill precedes metallisation precedes pattern plating precedes etch
    drill = _index(codes, "drill_mechanical")
    etch = codes.index("outer_etch")
    assert drill and max(drill) < etch
    if spec.layers >= 2:
        metal = _index(codes, "hole_metallisation")
        plate = codes.index("pattern_plate_copper")
        assert max(drill) < max(metal) < plate < etch
    else:
        assert not _index(codes, "hole_metallisation") and "pattern_plate_copper" not in codes

    # inner layers only on multilayers; lamination cycles match the press count
    has_inner = any(c.startswith("inner_") for c in codes)
    assert has_inner == (spec.layers >= 4)
    assert r.lamination_cycles == spec.lamination.cycles
    assert len(_index(codes, "hole_metallisation")) == max(
        r.lamination_cycles, 1 if spec.layers >= 2 else 0
    )

    # mask precedes surface finish; mask steps only with mask; legend only with legend
    finish_idx = [i for i, c in enumerate(codes) if c in FINISH_CODES]
    mask_idx = [i for i, c in enumerate(codes) if c.startswith("mask_")]
    if mask_idx and finish_idx:
        assert max(mask_idx) < min(finish_idx)
    assert bool(mask_idx) == spec.has_mask
    assert ("legend_print" in codes) == spec.has_legend
    assert bool(finish_idx) == (spec.finish != "none")

    # hard gold only when asked
    gold = {"gold_tape", "gold_nickel_plate", "gold_plate", "gold_untape", "finger_bevel"}
    assert bool(gold & set(codes)) == spec.hard_gold_fingers
    if spec.hard_gold_fingers:
        assert gold <= set(codes)

    # each lamination cycle's steps in order, and cycles in order
    cycles = [s.cycle for s in r.steps if s.cycle is not None]
    assert cycles == sorted(cycles)
    assert set(cycles) == set(range(1, r.lamination_cycles + 1))
    for n in range(1, r.lamination_cycles + 1):
        bases = [s.code.removesuffix(f"_c{n}") for s in r.steps if s.cycle == n]
        positions = [CYCLE_ORDER.index(b) for b in bases]
        assert positions == sorted(positions), bases
        assert "hole_metallisation" in bases
        assert ("panel_plate" in bases) == (n < r.lamination_cycles)
    press_cycles = [s.cycle for s in r.steps if s.code.startswith("press_c")]
    assert press_cycles[-1:] == ([r.lamination_cycles] if spec.layers >= 4 else [])

    # every measurement has a window with a non-empty source and its canonical unit
    for s in r.steps:
        for w in s.measurements:
            assert w.source.strip()
            assert w.unit == canonical_unit(w.quantity)
            if w.min is not None and w.max is not None:
                assert w.min <= w.max
            if w.attribute and w.quantity not in DEFECTIVES_QUANTITIES:
                assert w.max == 0  # defect counts: none allowed
            if w.quantity in DEFECTIVES_QUANTITIES:
                assert w.min is None and w.max is None  # watched on a p chart instead

    d = routing_to_dict(r)
    assert [s["code"] for s in d["steps"]] == codes


junk = st.recursive(
    st.none()
    | st.booleans()
    | st.integers(-5, 50)
    | st.floats(allow_nan=True)
    | st.text(max_size=8),
    lambda inner: (
        st.lists(inner, max_size=4)
        | st.dictionaries(
            st.sampled_from(
                [
                    "layers",
                    "ipc_class",
                    "finish",
                    "vias",
                    "from",
                    "to",
                    "kind",
                    "stackup",
                    "solder_mask",
                    "sides",
                    "x",
                ]
            ),
            inner,
            max_size=6,
        )
    ),
    max_leaves=20,
)


@SETTINGS
@given(junk)
def test_validator_only_ever_raises_spec_invalid(data):
    try:
        parse_spec(data)
    except SpecInvalid as exc:
        assert exc.errors
        for e in exc.errors:
            d = e.as_dict()
            assert d["field"] and d["problem"]


@SETTINGS
@given(
    valid_specs(),
    st.sampled_from(["layers", "finish", "profile", "min_hole_mm", "electrical_test"]),
    st.sampled_from([None, "bogus", -3, 3, 1e9]),
)
def test_corrupting_a_valid_spec_names_the_field(data, key, value):
    data = dict(data)
    data[key] = value
    try:
        parse_spec(data)
    except SpecInvalid as exc:
        assert any(
            e.field.split(".")[0].split("[")[0] in (key, "inner_copper_um", "vias", "min_hole_mm")
            for e in exc.errors
        )
    else:
        # only a few corruptions stay valid (e.g. min_hole_mm 3 on a thin board)
        assert key == "min_hole_mm" and value == 3
