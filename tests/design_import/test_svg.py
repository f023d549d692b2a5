"""The cross-section SVG: well-formed, layers to one vertical scale, via bars spanning
exactly their copper layers, every file-supplied text escaped."""

from __future__ import annotations

from lxml import etree

from routing.builder.design_import import cross_section_svg
from tests.design_import.test_edges import design_xml, run

SVG = "{http://www.w3.org/2000/svg}"


def layer_rects(root):
    return [r for r in root.iter(f"{SVG}rect") if r.find(f"{SVG}title") is not None]


def test_layers_are_drawn_to_one_scale_and_vias_span_their_layers():
    stack = [
        ("L1", "SIGNAL", "0.035"),
        ("P1", "DIELPREG", "0.1"),
        ("L2", "SIGNAL", "0.035"),
        ("C1", "DIELCORE", "1.2"),
        ("L3", "SIGNAL", "0.035"),
        ("P2", "DIELPREG", "0.1"),
        ("L4", "SIGNAL", "0.035"),
    ]
    spans = [("D14", "L1", "L4", [("0.3", "VIA")]), ("D12", "L1", "L2", [("0.1", "VIA")])]
    result = run(design_xml(stack=stack, drill_spans=spans))
    root = etree.fromstring(cross_section_svg(result).encode())
    rects = layer_rects(root)
    layers = [r for r in rects if r.get("opacity") is None]
    # Seven rows; heights in the ratio of their thicknesses (35 : 100 : 1200 um).
    assert len(layers) == 7
    heights = [float(r.get("height")) for r in layers]
    # (attributes carry 0.01 px, so the ratio holds to about 0.1 %)
    assert abs(heights[3] / heights[0] / (1200 / 35) - 1) < 0.002
    assert abs(heights[1] / heights[0] / (100 / 35) - 1) < 0.002
    tops = [float(r.get("y")) for r in layers]
    vias = {r.find(f"{SVG}title").text.split()[0]: r for r in rects if r.get("opacity")}
    through, blind = vias["L1-L4"], vias["L1-L2"]
    # The through bar runs from the top of L1 to the bottom of L4.
    assert abs(float(through.get("y")) - tops[0]) < 0.01
    assert (
        abs(float(through.get("y")) + float(through.get("height")) - (tops[6] + heights[6])) < 0.02
    )
    # The blind L1-L2 bar (0.1 mm deep, 0.1 mm hole: a microvia) is laser orange.
    assert abs(float(blind.get("y")) + float(blind.get("height")) - (tops[2] + heights[2])) < 0.02
    assert blind.get("fill") == "#d35400"


def test_file_text_is_escaped():
    specs = (
        '<Spec name="C&lt;&amp;&gt;"><General type="MATERIAL">'
        '<Property text="&lt;script&gt;"/></General></Spec>'
    )
    stack = [("L1", "SIGNAL", "0.035"), ("C<&>", "DIELCORE", "1.5"), ("L2", "SIGNAL", "0.035")]
    text = design_xml(stack=stack, specs=specs).replace('name="C<&>"', 'name="C&lt;&amp;&gt;"')
    text = text.replace('layerOrGroupRef="C<&>"', 'layerOrGroupRef="C&lt;&amp;&gt;"')
    svg = cross_section_svg(run(text))
    etree.fromstring(svg.encode())  # well-formed
    assert "<script" not in svg and "&lt;script&gt;" in svg and "C&lt;&amp;&gt;" in svg


def test_nothing_to_draw_says_so():
    stack = [("L1", "SIGNAL", None), ("C", "DIELCORE", None), ("L2", "SIGNAL", None)]
    svg = cross_section_svg(run(design_xml(stack=stack)))
    assert "nothing to draw to scale" in svg
