"""The certificate of conformance as a PDF (reportlab), one or two pages.

Only the content dict built by shipping.services.certificate_content is drawn: customer
wording, no internal ids, no notes on how a value was sourced.
"""

from __future__ import annotations

import io
from typing import Any

from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.platypus import SimpleDocTemplate, Spacer, Table, TableStyle

from shopfloor import safe_output


def certificate_pdf(c: dict[str, Any]) -> bytes:

    styles = getSampleStyleSheet()
    body = styles["BodyText"]
    body.fontSize = 9
    body.leading = 11
    small = styles["BodyText"].clone("small", fontSize=8, leading=10)
    buf = io.BytesIO()
    title = f"Certificate of conformance {c['number']}"

    def footer(canvas: Any, doc: Any) -> None:
        canvas.saveState()
        canvas.setFont("Helvetica", 7)
        canvas.drawString(15 * mm, 8 * mm, f"{title} · part {c['part_number']} rev {c['revision']}")
        canvas.drawRightString(195 * mm, 8 * mm, f"page {doc.page}")
        canvas.restoreState()

    doc = SimpleDocTemplate(
        buf,
        pagesize=A4,
        leftMargin=15 * mm,
        rightMargin=15 * mm,
        topMargin=14 * mm,
        bottomMargin=16 * mm,
        title=title,
    )
    grid = TableStyle(
        [
            ("GRID", (0, 0), (-1, -1), 0.4, colors.grey),
            ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8e8e8")),
            ("FONTSIZE", (0, 0), (-1, -1), 8),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ]
    )
    facts = TableStyle(
        [
            ("GRID", (0, 0), (-1, -1), 0.4, colors.grey),
            ("BACKGROUND", (0, 0), (0, -1), colors.HexColor("#e8e8e8")),
            ("BACKGROUND", (2, 0), (2, -1), colors.HexColor("#e8e8e8")),
            ("FONTSIZE", (0, 0), (-1, -1), 8.5),
        ]
    )
    story: list[Any] = [
        _para("Certificate of conformance", styles["Title"]),
        _para(f"Certificate {_esc(c['number'])} · issued {_esc(c['issued'])}", body),
        Spacer(1, 3 * mm),
        Table(
            [
                ["Customer", c["customer"], "Our order", c["order"]],
                ["Part number", c["part_number"], "Revision", c["revision"]],
                [
                    "Ordered",
                    str(c["quantity_ordered"]),
                    "This shipment",
                    str(c["quantity_this_shipment"]),
                ],
                [
                    "Shipped to date",
                    str(c["quantity_shipped_to_date"]),
                    "Still to ship",
                    str(c["quantity_remaining"]),
                ],
            ],
            style=facts,
            colWidths=[30 * mm, 60 * mm, 30 * mm, 60 * mm],
        ),
        Spacer(1, 3 * mm),
        _para(f"<b>Specification:</b> {_esc(c['specification'])}", body),
        Spacer(1, 2 * mm),
        _para("<b>Lots in this shipment</b>", body),
    ]
    lot_rows = [["Lot", "Boards", "Completed"]]
    lot_rows += [[lot["lot"], str(lot["boards"]), lot["completed"]] for lot in c["lots"]]
    story += [
        Table(lot_rows, style=grid, colWidths=[60 * mm, 25 * mm, 35 * mm], hAlign="LEFT"),
        Spacer(1, 3 * mm),
        _para("<b>Measured characteristics</b>", body),
    ]
    rows: list[list[Any]] = [
        ["Characteristic", "Requirement", "Standard", "n", "Lowest", "Highest", "Result"]
    ]
    for r in c["characteristics"]:
        rows.append(
            [
                _para(_esc(r["characteristic"]), small),
                _para(_esc(r["requirement"]), small),
                _para(_esc(r["standard"]), small),
                str(r["count"]),
                r["lowest"],
                r["highest"],
                _para(_esc(r["result"]), small),
            ]
        )
    if len(rows) == 1:
        rows.append(["no measurements recorded", "", "", "", "", "", ""])
    story += [
        Table(
            rows,
            style=grid,
            colWidths=[34 * mm, 22 * mm, 55 * mm, 8 * mm, 17 * mm, 17 * mm, 27 * mm],
            repeatRows=1,
        ),
        Spacer(1, 3 * mm),
        _para("<b>Deviations</b>", body),
    ]
    if c["deviations"]:
        for d in c["deviations"]:
            story.append(_para(f"• {_esc(d)}", small))
    else:
        story.append(_para("None.", small))
    sig = c["quality_signature"]
    story += [
        Spacer(1, 4 * mm),
        _para(_esc(c["statement"]), body),
        Spacer(1, 3 * mm),
        _para(
            f"<b>Quality:</b> {_esc(sig['meaning'])} <b>{_esc(sig['name'] or '—')}</b>"
            f"{', ' + _esc(sig['signed']) if sig['signed'] else ''} (electronic signature).",
            body,
        ),
        _para(f"Certificate issued by {_esc(c['issued_by'])} on {_esc(c['issued'])}.", body),
    ]
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return buf.getvalue()


def _esc(text: Any) -> str:
    return safe_output.pdf_text(text)


def _para(markup: str, style: Any) -> Any:
    """A paragraph of our own markup whose values went through `_esc` already."""
    return safe_output.pdf_paragraph(safe_output.PdfMarkup(markup), style)
