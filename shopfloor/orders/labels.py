"""The printable lot label: a QR code of the lot code plus what a person reads at a rack.

Why a label beside the traveller: the traveller rides in a sleeve with the lot, the
label sticks on the rack or tote, so either one scanned opens the lot on a tablet.
The QR code holds only the lot code (as the traveller's does). 4 x 3 in (102 x 76 mm)
is a common thermal label stock (common practice); it also prints centred on A4/Letter.
"""

from __future__ import annotations

import io
from typing import Any

from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.units import mm
from reportlab.lib.utils import ImageReader
from reportlab.pdfgen.canvas import Canvas

from shopfloor.floor.traveller import _fonts, qr_png
from shopfloor.plant.models import Job, Lot
from shopfloor.safe_output import pdf_plain

LABEL_SIZES = ("label", "a4", "letter")


def lot_label_pdf(lot: Lot, paper: str = "label") -> bytes:

    width, height = 102 * mm, 76 * mm
    page = {"a4": A4, "letter": LETTER}.get(paper, (width, height))
    out = io.BytesIO()
    canvas = Canvas(out, pagesize=page)
    canvas.setTitle(f"Lot label {lot.code}")
    canvas.setAuthor("Traveller service")
    font, bold = _fonts()
    x0 = (page[0] - width) / 2
    y0 = page[1] - height - ((page[1] - height) / 2 if paper == "label" else 20 * mm)
    if paper != "label":
        canvas.setDash(2, 2)
        canvas.rect(x0, y0, width, height)
        canvas.setDash()
    jobs = list(
        Job.objects.filter(images__panel__lot=lot)
        .select_related("part_revision__part__customer")
        .distinct()
        .order_by("number")
    )
    serials = list(lot.panels.order_by("serial").values_list("serial", flat=True))

    qr_size = 34 * mm
    canvas.drawImage(
        ImageReader(io.BytesIO(qr_png(lot.code, scale=10))),
        x0 + width - qr_size - 3 * mm,
        y0 + height - qr_size - 3 * mm,
        qr_size,
        qr_size,
    )
    text_x = x0 + 4 * mm
    y = y0 + height - 11 * mm
    canvas.setFont(bold, 17)
    canvas.drawString(text_x, y, _plain(lot.code, font))
    canvas.setFont(font, 8)
    y -= 6 * mm
    revision = lot.routing_revision
    lines: list[str] = [
        f"Part {revision.part_revision.part.number} rev {revision.part_revision.revision}",
        f"Routing r{revision.number} · IPC class {revision.ipc_class}",
        f"{lot.panel_count} panel(s)",
    ]
    if serials:
        lines.append(f"Panels {serials[0]} to {serials[-1]}" if len(serials) > 1 else serials[0])
    for line in lines:
        canvas.drawString(text_x, y, _plain(line, font))
        y -= 4.2 * mm
    y = y0 + 22 * mm
    canvas.setFont(bold, 9)
    for job in jobs[:3]:
        canvas.drawString(
            text_x,
            y,
            _plain(
                f"Job {job.number} · {job.part_revision.part.customer.code} · "
                f"qty {job.quantity} · due {job.due_date:%Y-%m-%d}",
                font,
            ),
        )
        y -= 4.5 * mm
    if len(jobs) > 3:
        canvas.setFont(font, 8)
        canvas.drawString(text_x, y, f"and {len(jobs) - 3} more job(s): see the traveller")
    canvas.setFont(font, 6.5)
    canvas.drawString(
        text_x, y0 + 3 * mm, "Scan the code on a tablet to open this lot. Follow site safety rules."
    )
    canvas.showPage()
    canvas.save()
    return out.getvalue()


def _plain(text: str, font: str) -> Any:
    # drawString prints text as it is (no markup); control characters are dropped.
    return pdf_plain(text, ascii_symbols=font == "Helvetica")
