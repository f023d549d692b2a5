"""The stack-up as a cross-section picture: server-rendered SVG, layers to scale.

Why server-rendered: the page must work without scripts (and under the site's content
security policy), and the picture is a pure function of the import, so it is tested
like the rest of the core. Colours are SVG presentation attributes, never `style=`.

Layout: the stack is drawn to one vertical scale (a scale bar says how much), so a
17 um foil is a thin line beside a 0.5 mm core, as on a real micro-section. Labels sit
in a column to the right, pushed apart when thin layers crowd, each with a leader line
to its layer. Via spans are vertical bars across the copper layers they connect: dark
for mechanical drilling, orange for laser.
"""

from __future__ import annotations

from html import escape
from typing import Final

from .mapping import ImportResult, Row

__all__ = ["cross_section_svg"]

FILL: Final[dict[str, str]] = {
    "copper": "#b87333",
    "core": "#7f9a52",
    "prepreg": "#d8cc8a",
    "mask": "#2f6b3a",
    "coating": "#c9a227",
}
VIA_FILL: Final[dict[str, str]] = {"mechanical": "#3b3b3b", "laser": "#d35400"}
WIDTH: Final = 780
STACK_X: Final = 40
STACK_W: Final = 260
LABEL_X: Final = 330
LINE: Final = 17
TOP: Final = 40
STACK_H: Final = 420


def _fmt(um: float) -> str:
    return f"{um / 1000:.3f} mm" if um >= 1000 else f"{um:g} µm"


def cross_section_svg(result: ImportResult, title: str = "Stack-up cross-section") -> str:
    """An SVG document (string) of the counted stack-up rows with via spans."""
    rows: list[Row] = [r for r in result.rows if r.counted and (r.thickness_um or 0) > 0]
    total_um = sum(r.thickness_um or 0.0 for r in rows)
    if not rows or total_um <= 0:
        return (
            f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="60" '
            f'viewBox="0 0 {WIDTH} 60" role="img" aria-label="{escape(title)}">'
            f"<title>{escape(title)}</title>"
            '<text x="10" y="35" font-family="sans-serif" font-size="14" fill="#333">'
            "No layer thicknesses in the file: nothing to draw to scale.</text></svg>"
        )
    scale = STACK_H / total_um  # px per um
    y = float(TOP)
    layer_boxes: list[tuple[Row, float, float]] = []
    for r in rows:
        h = (r.thickness_um or 0.0) * scale
        layer_boxes.append((r, y, h))
        y += h
    bottom = y

    # Labels: at the layer's middle, pushed down so none overlaps the previous one.
    label_y: list[float] = []
    last: float = TOP - LINE
    for _, top, h in layer_boxes:
        want = top + h / 2 + 4
        at = max(want, last + LINE)
        label_y.append(at)
        last = at
    height = int(max(bottom, last) + 70)

    parts: list[str] = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height}" '
        f'viewBox="0 0 {WIDTH} {height}" role="img" aria-label="{escape(title)}" '
        'font-family="sans-serif" font-size="12">',
        f"<title>{escape(title)}</title>",
        f'<text x="{STACK_X}" y="22" font-size="14" font-weight="bold" fill="#222">'
        f"{escape(title)}: {total_um / 1000:.3f} mm drawn, layers to scale</text>",
    ]
    for (r, top, h), ly in zip(layer_boxes, label_y, strict=True):
        fill = FILL.get(r.role, "#999999")
        parts.append(
            f'<rect x="{STACK_X}" y="{top:.2f}" width="{STACK_W}" height="{max(h, 0.6):.2f}" '
            f'fill="{fill}" stroke="#00000033" stroke-width="0.3">'
            f"<title>{escape(r.name)}: {escape(r.role)} {_fmt(r.thickness_um or 0)}"
            f"{escape(' ' + r.tolerance() if r.tolerance() else '')}</title></rect>"
        )
        mid = top + h / 2
        parts.append(
            f'<polyline points="{STACK_X + STACK_W},{mid:.2f} {LABEL_X - 12},{mid:.2f} '
            f'{LABEL_X - 4},{ly - 4:.2f}" fill="none" stroke="#888" stroke-width="0.8"/>'
        )
        name = f"L{r.copper_index} " if r.copper_index else ""
        kind = r.role
        material = f", {r.material}" if r.material else ""
        parts.append(
            f'<text x="{LABEL_X}" y="{ly:.2f}" fill="#222"><tspan font-weight="bold">'
            f"{escape(name + kind)}</tspan> {escape(_fmt(r.thickness_um or 0))}"
            f'{escape(material[:30])} <tspan fill="#666">({escape(r.name[:26])})</tspan>'
            "</text>"
        )

    # Via spans: bars from the top of copper `from` to the bottom of copper `to`.
    copper_box = {r.copper_index: (top, h) for r, top, h in layer_boxes if r.copper_index}
    bar_x = STACK_X + 24
    for v in result.vias:
        if v.from_layer not in copper_box or v.to_layer not in copper_box:
            continue
        y0 = copper_box[v.from_layer][0]
        y1 = copper_box[v.to_layer][0] + copper_box[v.to_layer][1]
        fill = VIA_FILL.get(v.drill, "#3b3b3b")
        parts.append(
            f'<rect x="{bar_x}" y="{y0:.2f}" width="12" height="{y1 - y0:.2f}" fill="{fill}" '
            f'opacity="0.85"><title>L{v.from_layer}-L{v.to_layer} {v.kind} {v.drill}'
            f"{f', smallest hole {v.min_hole_mm:g} mm' if v.min_hole_mm else ''}</title></rect>"
        )
        parts.append(
            f'<text x="{bar_x + 6}" y="{bottom + 16:.2f}" text-anchor="middle" font-size="11" '
            f'fill="{fill}">L{v.from_layer}-{v.to_layer}</text>'
        )
        bar_x += 44

    # Scale bar: 100 um (or 10 um on very thin stacks).
    bar_um = 100.0 if total_um >= 300 else 10.0
    sy = bottom + 34
    parts.append(
        f'<rect x="{STACK_X}" y="{sy:.2f}" width="4" height="{bar_um * scale:.2f}" fill="#222"/>'
        f'<text x="{STACK_X + 10}" y="{sy + bar_um * scale / 2 + 4:.2f}" fill="#222">'
        f"{bar_um:g} µm</text>"
    )
    legend_x = STACK_X + 90
    for label, fill in (("mechanical drill", VIA_FILL["mechanical"]), ("laser", VIA_FILL["laser"])):
        parts.append(
            f'<rect x="{legend_x}" y="{sy:.2f}" width="12" height="12" fill="{fill}"/>'
            f'<text x="{legend_x + 18}" y="{sy + 10:.2f}" fill="#222">{label}</text>'
        )
        legend_x += 140
    parts.append("</svg>")
    return "".join(parts)
