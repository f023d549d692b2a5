"""Control charts and capability histograms as plain shapes, drawn as SVG or for reportlab.

Pure functions over plain data (no Django, no database, no plotting package): the same
shape list is written as inline SVG for the pages and as a reportlab Drawing for the PDF
lot record, so the picture on the certificate is the picture on the screen. Status is
never colour alone: rule breaks are drawn as a square marker and named in text.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from html import escape
from typing import Any

from reportlab.graphics.shapes import Circle, Drawing, Group, Line, PolyLine, Rect, String
from reportlab.lib import colors

INK = "#111111"
GRID = "#bbbbbb"
POINT = "#1f4e9a"
BREAK = "#b00020"
LIMIT = "#b00020"
SPEC = "#6a1b9a"
BAR = "#8fb3e0"


@dataclass(frozen=True)
class Shape:
    kind: str  # line | rect | circle | square | text | polyline
    coords: tuple[float, ...]
    stroke: str = INK
    fill: str = "none"
    width: float = 1.0
    dash: bool = False
    text: str = ""
    size: float = 12.0
    anchor: str = "start"  # start | middle | end


@dataclass
class Figure:
    width: float
    height: float
    title: str
    shapes: list[Shape] = field(default_factory=list)


def _fmt(v: float) -> str:
    return f"{v:.4g}"


#: Smallest vertical distance between two labels on one side of a chart (px at 11 px text).
LABEL_GAP = 14.0


def spread_labels(ys: Sequence[float], gap: float = LABEL_GAP) -> list[float]:
    """Label positions moved apart so no two are closer than `gap`, each as near its line
    as possible (order kept). Limits close together (a c chart's LCL at 0 next to the
    axis, or USL beside UCL) otherwise print on top of each other."""
    order = sorted(range(len(ys)), key=lambda i: ys[i])
    placed = [float(ys[i]) for i in order]
    for k in range(1, len(placed)):
        placed[k] = max(placed[k], placed[k - 1] + gap)
    # pull the block back up if it was pushed down more than needed (centre the shifts)
    for k in range(len(placed) - 2, -1, -1):
        placed[k] = min(placed[k], placed[k + 1] - gap)
    out = [0.0] * len(ys)
    for k, i in enumerate(order):
        out[i] = placed[k]
    return out


def _scale(lo: float, hi: float, top: float, bottom: float):  # type: ignore[no-untyped-def]
    span = (hi - lo) or 1.0
    return lambda v: bottom - (v - lo) / span * (bottom - top)


def control_chart(
    values: Sequence[float],
    centre: float,
    ucl: float,
    lcl: float,
    signals: Sequence[tuple[int, str]] = (),
    *,
    title: str = "Individuals chart",
    unit: str = "",
    lsl: float | None = None,
    usl: float | None = None,
    width: float = 900,
    height: float = 340,
    fmt: Callable[[float], str] | None = None,
    ucls: Sequence[float] | None = None,
    lcls: Sequence[float] | None = None,
) -> Figure:
    """Points in order with centre line, UCL/LCL, optional spec limits; rule breaks marked.

    `ucls` / `lcls` give one limit per point (a p chart whose n varies): the limits are
    drawn as steps around each point and labelled with the newest point's values.

    `signals` pairs a point index with the rule it broke; every broken rule is named in a
    legend under the plot so the chart reads without colour. `fmt` writes numbers for
    people (pass the quantity's resolution rounding); labels never overlap.
    """
    fmt = fmt or _fmt
    fig = Figure(width, height, title)
    left, right, top, bottom = 70.0, width - 90.0, 34.0, height - 70.0
    fig.shapes.append(Shape("text", (left, 20), text=title, size=15))
    if not values:
        fig.shapes.append(
            Shape("text", (width / 2, height / 2), text="No points yet", size=14, anchor="middle")
        )
        return fig
    stepped = ucls is not None and lcls is not None and len(ucls) == len(lcls) == len(values)
    ys = [*values, centre, ucl, lcl] + [x for x in (lsl, usl) if x is not None]
    if stepped and ucls is not None and lcls is not None:
        ys += [*ucls, *lcls]
    lo, hi = min(ys), max(ys)
    pad = (hi - lo) * 0.08 or 1.0
    y = _scale(lo - pad, hi + pad, top, bottom)
    n = len(values)
    step = (right - left) / max(n - 1, 1)

    def x(i: int) -> float:
        return left + i * step if n > 1 else (left + right) / 2

    fig.shapes.append(Shape("rect", (left, top, right - left, bottom - top), stroke=GRID))
    lines = [(ucl, "UCL", LIMIT, True), (centre, "CL", INK, False), (lcl, "LCL", LIMIT, True)]
    label_ys = spread_labels([y(v) + 4 for v, *_ in lines])
    half = step / 2 if n > 1 else (right - left) / 2
    for (value, label, colour, dash), label_y in zip(lines, label_ys, strict=True):
        per_point = (
            (ucls if label == "UCL" else lcls if label == "LCL" else None) if stepped else None
        )
        if per_point is not None:
            coords: list[float] = []
            for i, v in enumerate(per_point):
                coords += [max(left, x(i) - half), y(v), min(right, x(i) + half), y(v)]
            fig.shapes.append(Shape("polyline", tuple(coords), stroke=colour, dash=dash, width=1.5))
        else:
            fig.shapes.append(
                Shape(
                    "line", (left, y(value), right, y(value)), stroke=colour, dash=dash, width=1.5
                )
            )
        fig.shapes.append(
            Shape(
                "text",
                (right + 6, label_y),
                text=f"{label} {fmt(value)}",
                size=11,
                stroke=colour,
            )
        )
    specs = [(v, label) for v, label in ((lsl, "LSL"), (usl, "USL")) if v is not None]
    spec_ys = spread_labels([y(v) + 4 for v, _ in specs])
    for (spec_value, label), label_y in zip(specs, spec_ys, strict=True):
        fig.shapes.append(
            Shape(
                "line", (left, y(spec_value), right, y(spec_value)), stroke=SPEC, width=1, dash=True
            )
        )
        fig.shapes.append(
            Shape(
                "text",
                (left - 6, label_y),
                text=f"{label} {fmt(spec_value)}",
                size=10,
                stroke=SPEC,
                anchor="end",
            )
        )
    fig.shapes.append(
        Shape(
            "polyline",
            tuple(c for i, v in enumerate(values) for c in (x(i), y(v))),
            stroke=POINT,
            width=1.5,
        )
    )
    broken: dict[int, list[str]] = {}
    for index, rule in signals:
        if 0 <= index < n:
            broken.setdefault(index, []).append(rule)
    for i, v in enumerate(values):
        if i in broken:
            fig.shapes.append(Shape("square", (x(i), y(v), 5), stroke=BREAK, fill=BREAK))
        else:
            fig.shapes.append(Shape("circle", (x(i), y(v), 3), stroke=POINT, fill=POINT))
    fig.shapes.append(Shape("text", (left, bottom + 16), text="1", size=10))
    fig.shapes.append(Shape("text", (right, bottom + 16), text=str(n), size=10, anchor="end"))
    fig.shapes.append(
        Shape(
            "text",
            ((left + right) / 2, bottom + 16),
            text=f"point (in time order){', ' + unit if unit else ''}",
            size=10,
            anchor="middle",
        )
    )
    rules = sorted({r for rs in broken.values() for r in rs})
    legend = (
        (
            "Square = rule broken: "
            + "; ".join(
                f"{r} at point(s) {', '.join(str(i + 1) for i in sorted(broken) if r in broken[i])}"
                for r in rules
            )
        )
        if rules
        else "No rule broken."
    )
    fig.shapes.append(
        Shape(
            "text", (left, bottom + 40), text=legend[:160], size=11, stroke=BREAK if rules else INK
        )
    )
    return fig


def histogram_bins(values: Sequence[float], lo: float, hi: float) -> list[int]:
    """Counts per bin; square-root rule for the bin count (common practice), 5..30 bins."""
    k = max(5, min(30, round(math.sqrt(len(values))) or 5))
    counts = [0] * k
    span = (hi - lo) or 1.0
    for v in values:
        i = min(k - 1, max(0, int((v - lo) / span * k)))
        counts[i] += 1
    return counts


def capability_histogram(
    values: Sequence[float],
    lsl: float | None,
    usl: float | None,
    *,
    target: float | None = None,
    title: str = "Capability histogram",
    unit: str = "",
    width: float = 900,
    height: float = 300,
) -> Figure:
    """Histogram of the readings with the window (LSL/USL, target) drawn over it."""
    fig = Figure(width, height, title)
    left, right, top, bottom = 50.0, width - 30.0, 34.0, height - 50.0
    fig.shapes.append(Shape("text", (left, 20), text=title, size=15))
    if not values:
        fig.shapes.append(
            Shape("text", (width / 2, height / 2), text="No readings yet", size=14, anchor="middle")
        )
        return fig
    xs = [*values] + [v for v in (lsl, usl, target) if v is not None]
    lo, hi = min(xs), max(xs)
    pad = (hi - lo) * 0.05 or 1.0
    lo, hi = lo - pad, hi + pad
    data_lo, data_hi = min(values), max(values)
    if data_hi == data_lo:
        data_hi = data_lo + pad
    counts = histogram_bins(values, data_lo, data_hi)
    peak = max(counts) or 1

    def x(v: float) -> float:
        return left + (v - lo) / (hi - lo) * (right - left)

    bw = (data_hi - data_lo) / len(counts)
    for i, c in enumerate(counts):
        x0, x1 = x(data_lo + i * bw), x(data_lo + (i + 1) * bw)
        h = c / peak * (bottom - top - 20)
        fig.shapes.append(
            Shape("rect", (x0, bottom - h, max(x1 - x0 - 1, 1), h), stroke=POINT, fill=BAR)
        )
    fig.shapes.append(Shape("line", (left, bottom, right, bottom)))
    for value, label in ((lsl, "LSL"), (usl, "USL"), (target, "target")):
        if value is not None:
            fig.shapes.append(
                Shape(
                    "line",
                    (x(value), top, x(value), bottom),
                    stroke=SPEC,
                    width=2,
                    dash=label == "target",
                )
            )
            fig.shapes.append(
                Shape(
                    "text",
                    (x(value), top - 4),
                    text=f"{label} {_fmt(value)}",
                    size=11,
                    stroke=SPEC,
                    anchor="middle",
                )
            )
    fig.shapes.append(Shape("text", (left, bottom + 18), text=_fmt(lo), size=10))
    fig.shapes.append(Shape("text", (right, bottom + 18), text=_fmt(hi), size=10, anchor="end"))
    outside = sum(
        1 for v in values if (lsl is not None and v < lsl) or (usl is not None and v > usl)
    )
    fig.shapes.append(
        Shape(
            "text",
            ((left + right) / 2, bottom + 36),
            text=f"{len(values)} readings{', ' + unit if unit else ''}; "
            f"{outside} outside the window",
            size=11,
            anchor="middle",
        )
    )
    return fig


def to_svg(fig: Figure) -> str:
    """Inline SVG (no script, no external references) with a title for screen readers."""
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {fig.width:g} {fig.height:g}" '
        f'width="100%" role="img" aria-label="{escape(fig.title)}" class="chart">',
        f"<title>{escape(fig.title)}</title>",
    ]
    for s in fig.shapes:
        dash = ' stroke-dasharray="6 4"' if s.dash else ""
        common = f'stroke="{s.stroke}" stroke-width="{s.width:g}" fill="{s.fill}"{dash}'
        c = s.coords
        if s.kind == "line":
            out.append(
                f'<line x1="{c[0]:.1f}" y1="{c[1]:.1f}" x2="{c[2]:.1f}" y2="{c[3]:.1f}" {common}/>'
            )
        elif s.kind == "rect":
            out.append(
                f'<rect x="{c[0]:.1f}" y="{c[1]:.1f}" width="{c[2]:.1f}" '
                f'height="{c[3]:.1f}" {common}/>'
            )
        elif s.kind == "circle":
            out.append(f'<circle cx="{c[0]:.1f}" cy="{c[1]:.1f}" r="{c[2]:g}" {common}/>')
        elif s.kind == "square":
            r = c[2]
            out.append(
                f'<rect class="rule-break" x="{c[0] - r:.1f}" y="{c[1] - r:.1f}" '
                f'width="{2 * r:g}" height="{2 * r:g}" {common}/>'
            )
        elif s.kind == "polyline":
            pts = " ".join(f"{c[i]:.1f},{c[i + 1]:.1f}" for i in range(0, len(c), 2))
            out.append(f'<polyline points="{pts}" {common}/>')
        elif s.kind == "text":
            anchor = {"start": "start", "middle": "middle", "end": "end"}[s.anchor]
            out.append(
                f'<text x="{c[0]:.1f}" y="{c[1]:.1f}" font-size="{s.size:g}" '
                f'text-anchor="{anchor}" fill="{s.stroke}" '
                f'font-family="sans-serif">{escape(s.text)}</text>'
            )
    out.append("</svg>")
    return "".join(out)


def to_drawing(fig: Figure, scale: float = 0.55) -> Any:
    """The same figure as a reportlab Drawing (y flipped: reportlab's origin is bottom left)."""

    def col(hex_: str) -> Any:
        return None if hex_ == "none" else colors.HexColor(hex_)

    h = fig.height
    group = Group()
    for s in fig.shapes:
        c = s.coords
        dash = [6, 4] if s.dash else None
        if s.kind == "line":
            group.add(
                Line(
                    c[0],
                    h - c[1],
                    c[2],
                    h - c[3],
                    strokeColor=col(s.stroke),
                    strokeWidth=s.width,
                    strokeDashArray=dash,
                )
            )
        elif s.kind == "rect":
            group.add(
                Rect(
                    c[0],
                    h - c[1] - c[3],
                    c[2],
                    c[3],
                    strokeColor=col(s.stroke),
                    fillColor=col(s.fill),
                    strokeWidth=s.width,
                )
            )
        elif s.kind == "circle":
            group.add(
                Circle(c[0], h - c[1], c[2], strokeColor=col(s.stroke), fillColor=col(s.fill))
            )
        elif s.kind == "square":
            r = c[2]
            group.add(
                Rect(
                    c[0] - r,
                    h - c[1] - r,
                    2 * r,
                    2 * r,
                    strokeColor=col(s.stroke),
                    fillColor=col(s.fill),
                )
            )
        elif s.kind == "polyline":
            pts = [v if i % 2 == 0 else h - v for i, v in enumerate(c)]
            group.add(PolyLine(pts, strokeColor=col(s.stroke), strokeWidth=s.width))
        elif s.kind == "text":
            group.add(
                String(
                    c[0],
                    h - c[1],
                    s.text,
                    fontSize=s.size,
                    fontName="Helvetica",
                    fillColor=col(s.stroke),
                    textAnchor=s.anchor,
                )
            )
    group.scale(scale, scale)
    drawing = Drawing(fig.width * scale, fig.height * scale)
    drawing.add(group)
    return drawing
