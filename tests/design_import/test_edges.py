"""Edges of the IPC-2581 import, each on a small file written here.

Unit factors are exact by definition (1 in = 25.4 mm, 1 mil = 0.001 in, 1 um =
0.001 mm; the international yard and pound agreement of 1959). The microvia rule is the
IPC-T-50M definition (from memory): blind or buried, aspect ratio <= 1:1, depth <= 0.25 mm.
"""

from __future__ import annotations

import io

import pytest

from routing.builder.design_import import (
    TO_FILL_MARK,
    DesignFileError,
    import_design,
    missing_fields,
    read_design,
)
from routing.builder.spec import parse_spec

NS = "http://webstds.ipc.org/2581"


def design_xml(
    *,
    units: str = "MILLIMETER",
    revision: str = "C",
    stack: list[tuple[str, str, str | None]] | None = None,
    drill_spans: list[tuple[str, str, str, list[tuple[str, str]]]] | None = None,
    overall: str | None = None,
    outline: tuple[float, float] = (100.0, 80.0),
    specs: str = "",
    legend_features: bool = True,
    newline: str = "\n",
) -> str:
    """A minimal IPC-2581 file: layers in order, one stackup, drill layers with holes.

    `stack` rows are (name, layerFunction, thickness as written in the file or None).
    `drill_spans` rows are (layer name, from, to, [(diameter, platingStatus), ...]).
    """
    if stack is None:
        stack = [
            ("SM_TOP", "SOLDERMASK", "0.02"),
            ("L1", "SIGNAL", "0.035"),
            ("CORE", "DIELCORE", "1.5"),
            ("L2", "SIGNAL", "0.035"),
            ("SM_BOT", "SOLDERMASK", "0.02"),
        ]
    drill_spans = drill_spans or []
    sides = {0: "TOP"}
    lines = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<IPC-2581 revision="{revision}" xmlns="{NS}">',
    ]
    lines.append('<Content roleRef="Owner"><FunctionMode mode="FABRICATION"/></Content>')
    lines.append(f'<Ecad name="Design"><CadHeader units="{units}">{specs}</CadHeader><CadData>')
    coppers = [i for i, (_, f, _) in enumerate(stack) if f == "SIGNAL"]
    for i, (name, function, _) in enumerate(stack):
        side = "INTERNAL"
        if function in ("SOLDERMASK", "LEGEND"):
            side = "TOP" if i < len(stack) / 2 else "BOTTOM"
        elif coppers and i == coppers[0]:
            side = "TOP"
        elif coppers and i == coppers[-1]:
            side = "BOTTOM"
        sides[i] = side
        lines.append(f'<Layer name="{name}" layerFunction="{function}" side="{side}"/>')
    for name, frm, to, _ in drill_spans:
        lines.append(
            f'<Layer name="{name}" layerFunction="DRILL" side="ALL">'
            f'<Span fromLayer="{frm}" toLayer="{to}"/></Layer>'
        )
    overall_attr = f' overallThickness="{overall}"' if overall else ""
    lines.append(
        f'<Stackup name="PRIMARY"{overall_attr} whereMeasured="MASK"><StackupGroup name="G">'
    )
    for seq, (name, _, thickness) in enumerate(stack, start=1):
        t = f' thickness="{thickness}"' if thickness is not None else ""
        lines.append(f'<StackupLayer layerOrGroupRef="{name}"{t} sequence="{seq}"/>')
    lines.append("</StackupGroup></Stackup>")
    w, h = outline
    lines.append(
        '<Step name="board"><Profile><Polygon><PolyBegin x="0" y="0"/>'
        f'<PolyStepSegment x="{w}" y="0"/><PolyStepSegment x="{w}" y="{h}"/>'
        f'<PolyStepSegment x="0" y="{h}"/><PolyStepSegment x="0" y="0"/></Polygon></Profile>'
    )
    for name, _, _, holes in drill_spans:
        lines.append(f'<LayerFeature layerRef="{name}"><Set>')
        for i, (d, plating) in enumerate(holes):
            lines.append(
                f'<Hole name="H{i}" diameter="{d}" platingStatus="{plating}" plusTol="0" '
                f'minusTol="0" x="{i}" y="1"/>'
            )
        lines.append("</Set></LayerFeature>")
    if legend_features:
        for name, function, _ in stack:
            if function == "LEGEND":
                lines.append(
                    f'<LayerFeature layerRef="{name}"><Set><Features><Line startX="0" '
                    'startY="0" endX="1" endY="1"/></Features></Set></LayerFeature>'
                )
    lines.append("</Step></CadData></Ecad></IPC-2581>")
    return newline.join(lines) + newline


def run(text: str | bytes):
    data = text.encode() if isinstance(text, str) else text
    return import_design(read_design(io.BytesIO(data)))


# --------------------------------------------------------------------------- units


@pytest.mark.parametrize(
    ("units", "copper", "core", "expected_um", "expected_board_mm"),
    [
        # 0.035 mm = 35 um; 1.5 mm core; board over metal 1.57 mm.
        ("MILLIMETER", "0.035", "1.5", 35.0, 1.57),
        # 1.378 mil = 0.035 mm (1 mil = 0.0254 mm exactly); 59.055 mil = 1.5000 mm.
        ("MILS", "1.378", "59.055", 35.0, 1.57),
        # 0.001378 in = 35.0 um; 0.059055 in = 1.5000 mm (1 in = 25.4 mm exactly).
        ("INCH", "0.001378", "0.059055", 35.0, 1.57),
        # MICRON: 35 um and 1500 um.
        ("MICRON", "35", "1500", 35.0, 1.57),
    ],
)
def test_units_convert_exactly(units, copper, core, expected_um, expected_board_mm):
    stack = [("L1", "SIGNAL", copper), ("C", "DIELCORE", core), ("L2", "SIGNAL", copper)]
    r = run(design_xml(units=units, stack=stack))
    assert r.source["units"] == units
    assert r.spec["outer_copper_base_um"] == expected_um
    assert r.spec["board_thickness_mm"] == expected_board_mm
    assert r.source["thickness_basis"] == "over metal"  # no mask layers in this file


def test_unknown_units_refused_with_the_allowed_list():
    with pytest.raises(
        DesignFileError, match=r"units='FURLONG'.*INCH, MILLIMETER, MICRON and MILS"
    ):
        run(design_xml(units="FURLONG"))


# --------------------------------------------------------------------------- thickness


def test_missing_thickness_leaves_stackup_out_and_asks_for_thickness():
    stack = [("L1", "SIGNAL", "0.035"), ("C", "DIELCORE", None), ("L2", "SIGNAL", "0.035")]
    r = run(design_xml(stack=stack))
    assert "stackup" not in r.spec
    assert "board_thickness_mm" in r.to_fill
    assert any("no thickness in the file for C" in w for w in r.warnings)


def test_missing_thickness_falls_back_to_the_stated_overall_with_its_basis():
    stack = [("L1", "SIGNAL", "0.035"), ("C", "DIELCORE", None), ("L2", "SIGNAL", "0.035")]
    r = run(design_xml(stack=stack, overall="1.6"))
    assert r.spec["board_thickness_mm"] == 1.6
    assert r.source["thickness_basis"] == "over mask"  # whereMeasured="MASK"
    assert "board_thickness_mm" not in r.to_fill


def test_over_mask_basis_and_ten_percent_warning():
    # Metal 1.57 + 2 x 0.02 mask = 1.61 over mask; stated 1.80 is 11.8 % more: warned.
    r = run(design_xml(overall="1.80"))
    assert r.source["thickness_basis"] == "over mask"
    assert r.spec["board_thickness_mm"] == 1.61
    assert any("more than 10 %" in w for w in r.warnings)
    # Stated 1.70 is 5.6 % more: inside the 10 % common-practice tolerance, no warning.
    quiet = run(design_xml(overall="1.70"))
    assert not any("more than 10 %" in w for w in quiet.warnings)


def test_float_noise_is_rounded():
    stack = [
        ("L1", "SIGNAL", "0.017501"),
        ("C", "DIELCORE", "0.509999"),
        ("L2", "SIGNAL", "0.0175"),
    ]
    r = run(design_xml(stack=stack))
    assert r.spec["outer_copper_base_um"] == 17.5
    assert [s["thickness_um"] for s in r.spec["stackup"]] == [17.5, 510.0, 17.5]
    assert r.spec["board_thickness_mm"] == 0.545


def test_paste_legend_and_document_layers_never_count():
    stack = [
        ("PASTE", "SOLDERPASTE", "0.1"),
        ("SILK", "LEGEND", "0.02"),
        ("DOC", "DOCUMENT", "0.5"),
        ("L1", "SIGNAL", "0.035"),
        ("C", "DIELCORE", "1.5"),
        ("L2", "SIGNAL", "0.035"),
    ]
    r = run(design_xml(stack=stack))
    assert r.spec["board_thickness_mm"] == 1.57
    assert r.spec["legend"] == {"sides": "top"}


# --------------------------------------------------------------------------- vias


def eight_layer_hdi():
    """L1 | 0.07 prepreg | L2 | 0.1 prepreg | L3 | core | L4 ... an invented HDI build."""
    rows = [("SMT", "SOLDERMASK", "0.02")]
    diel = ["0.07", "0.1", "0.2", "0.3", "0.2", "0.1", "0.07"]
    kinds = ["DIELPREG", "DIELPREG", "DIELCORE", "DIELPREG", "DIELCORE", "DIELPREG", "DIELPREG"]
    for i in range(8):
        rows.append((f"L{i + 1}", "SIGNAL", "0.018"))
        if i < 7:
            rows.append((f"D{i + 1}", kinds[i], diel[i]))
    rows.append(("SMB", "SOLDERMASK", "0.02"))
    return rows


def test_spans_through_blind_buried_and_microvia_rule():
    spans = [
        ("DR18", "L1", "L8", [("0.25", "VIA"), ("1.0", "PLATED"), ("3.0", "NONPLATED")]),
        # 0.07 mm deep, 0.1 mm hole: aspect 0.7:1 and <= 0.25 mm deep -> microvia, laser.
        ("DR12", "L1", "L2", [("0.1", "VIA")]),
        # L2-L3: 0.1 mm deep, 0.075 mm hole: aspect 1.33:1 -> not a microvia, mechanical.
        ("DR23", "L2", "L3", [("0.075", "VIA")]),
        # Mirror blind span written bottom-up: L8 to L7, 0.1 mm hole -> laser.
        ("DR87", "L8", "L7", [("0.1", "VIA")]),
        ("DR36", "L3", "L6", [("0.3", "VIA")]),
    ]
    r = run(design_xml(stack=eight_layer_hdi(), drill_spans=spans))
    by_span = {(v["from"], v["to"]): v for v in r.spec["vias"]}
    assert by_span[(1, 8)] == {"from": 1, "to": 8, "kind": "through", "drill": "mechanical"}
    assert by_span[(1, 2)] == {"from": 1, "to": 2, "kind": "blind", "drill": "laser"}
    assert by_span[(2, 3)]["kind"] == "buried" and by_span[(2, 3)]["drill"] == "mechanical"
    assert by_span[(7, 8)] == {"from": 7, "to": 8, "kind": "blind", "drill": "laser"}
    assert by_span[(3, 6)] == {"from": 3, "to": 6, "kind": "buried", "drill": "mechanical"}
    assert "IPC-T-50M" in r.source["microvia_rule"]
    laser = next(v for v in r.vias if (v.from_layer, v.to_layer) == (1, 2))
    assert laser.depth_mm == 0.07 and "microvia" in laser.reason
    # Smallest plated finished hole: 0.075 mm (the 3.0 mm NONPLATED hole never counts).
    assert r.spec["min_hole_mm"] == 0.075


def test_non_plated_only_span_is_not_a_via():
    spans = [("NPTH", "L1", "L2", [("3.0", "NONPLATED")])]
    r = run(design_xml(drill_spans=spans))
    assert "vias" not in r.spec
    assert "min_hole_mm" in r.to_fill


def test_every_dielectric_a_core_is_flagged():
    stack = [
        ("L1", "SIGNAL", "0.035"),
        ("D1", "DIELCORE", "0.2"),
        ("L2", "SIGNAL", "0.035"),
        ("D2", "DIELCORE", "1.0"),
        ("L3", "SIGNAL", "0.035"),
        ("D3", "DIELCORE", "0.2"),
        ("L4", "SIGNAL", "0.035"),
    ]
    r = run(design_xml(stack=stack))
    assert any("calls every dielectric a core (3 of 3)" in w for w in r.warnings)


def test_finish_and_mask_colour_stated_by_a_spec_are_not_to_fill():
    specs = (
        '<Spec name="FINISH"><SurfaceFinish><Finish type="ENIG-N"/></SurfaceFinish></Spec>'
        '<Spec name="MASK"><General type="MATERIAL"><Property text="LPI"/></General>'
        '<ColorTerm name="BLACK"/></Spec>'
    )
    r = run(design_xml(specs=specs))
    assert r.spec["finish"] == "enig"
    assert r.spec["solder_mask"] == {"sides": "both", "colour": "black"}
    assert r.to_fill == ["ipc_class", "profile", "electrical_test", "min_hole_mm"]


# --------------------------------------------------------------------------- refusals


def test_not_ipc2581_names_the_root_found():
    svg = '<?xml version="1.0"?><svg xmlns="http://www.w3.org/2000/svg"><g/></svg>'
    with pytest.raises(
        DesignFileError, match=r"root element is <svg> in namespace http://www.w3.org/2000/svg"
    ):
        run(svg)


def test_not_xml_at_all():
    with pytest.raises(DesignFileError, match="not an XML file"):
        run(b"%PDF-1.7\n%binary\x00\x01")
    with pytest.raises(DesignFileError, match=r"empty|not an XML file"):
        run(b"")


@pytest.mark.parametrize("revision", ["A", "D", ""])
def test_unsupported_revision_names_what_was_found(revision):
    shown = f"revision '{revision}'" if revision else "no revision attribute"
    with pytest.raises(DesignFileError, match=f"{shown}; supported revisions are B, B1, C"):
        run(design_xml(revision=revision))


@pytest.mark.parametrize("revision", ["B", "B1", "C"])
def test_supported_revisions(revision):
    assert run(design_xml(revision=revision)).source["revision"] == revision


BOMB = """<?xml version="1.0"?>
<!DOCTYPE IPC-2581 [
 <!ENTITY a "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa">
 <!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">
 <!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;">
 <!ENTITY d "&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;">
 <!ENTITY e "&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;">
 <!ENTITY f "&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;">
]>
<IPC-2581 revision="C" xmlns="http://webstds.ipc.org/2581"><Content>&f;</Content></IPC-2581>
"""


def test_entity_expansion_bomb_refused():
    # Six levels of 20x: 71 * 20**5 = 227 million characters if it were expanded.
    with pytest.raises(DesignFileError, match=r"document type|DTD"):
        run(BOMB)


def test_external_entity_refused(tmp_path):
    secret = tmp_path / "secret.txt"
    secret.write_text("do-not-read")
    xxe = (
        f'<?xml version="1.0"?><!DOCTYPE IPC-2581 [<!ENTITY x SYSTEM "file://{secret}">]>'
        '<IPC-2581 revision="C"><Content>&x;</Content></IPC-2581>'
    )
    with pytest.raises(DesignFileError, match="DTD") as refused:
        run(xxe)
    assert "do-not-read" not in str(refused.value)


def test_external_dtd_refused():
    text = design_xml().replace(
        '<IPC-2581 revision="C"',
        '<!DOCTYPE IPC-2581 SYSTEM "http://127.0.0.1:9/ipc.dtd">\n<IPC-2581 revision="C"',
        1,
    )
    with pytest.raises(DesignFileError, match="DTD"):
        run(text)


# --------------------------------------------------------------------------- tolerated


def test_crlf_and_byte_order_mark_tolerated():
    plain = run(design_xml())
    text = design_xml(newline="\r\n")
    assert "\r\n" in text
    crlf = run(b"\xef\xbb\xbf" + text.encode())
    assert crlf.spec == plain.spec


def test_utf16_with_bom_tolerated():
    text = design_xml().replace('encoding="UTF-8"', 'encoding="UTF-16"')
    r = run(text.encode("utf-16"))
    assert r.spec["layers"] == 2


def test_missing_fields_names_what_is_still_empty():
    r = run(design_xml())
    draft = r.draft()
    assert draft["finish"] == TO_FILL_MARK and draft["solder_mask"]["colour"] == TO_FILL_MARK
    assert missing_fields(r.spec, r.to_fill) == r.to_fill
    filled = {**r.spec, "finish": "osp", "ipc_class": 3, "profile": "route"}
    filled["electrical_test"] = "fixture"
    assert missing_fields(filled, r.to_fill) == ["solder_mask.colour", "min_hole_mm"]
    filled["min_hole_mm"] = 0.3
    filled["solder_mask"] = {"sides": "both", "colour": "green"}
    assert missing_fields(filled, r.to_fill) == []
    parse_spec(filled)


def test_layer_and_overall_tolerances_are_read():
    text = design_xml(overall="1.6").replace(
        '<StackupLayer layerOrGroupRef="L1" thickness="0.035"',
        '<StackupLayer layerOrGroupRef="L1" thickness="0.035" tolPlus="0.0025" tolMinus="0.0025"',
    )
    text = text.replace(
        'whereMeasured="MASK"', 'whereMeasured="MASK" tolPlus="0.16" tolMinus="0.16"'
    )
    r = run(text)
    top = next(row for row in r.rows if row.name == "L1")
    assert top.tolerance() == "+2.5/-2.5 um"
    assert r.source["stated_tolerance_mm"] == {"plus": 0.16, "minus": 0.16}
