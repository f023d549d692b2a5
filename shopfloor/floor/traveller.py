"""The lot traveller: a QR code of the lot code and a printable PDF of the lot's route.

Why a printed traveller still matters: panels move between wet lines where tablets are
not allowed, and a scan of the label must open the same lot on any tablet. The QR code
encodes only the lot code (Lot.code), so nothing else needs to stay in step with it.
The PDF shows the windows with their sources, the hazard notes and blank sign-off boxes
so a step done during a network outage can be signed on paper and entered later.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import segno
from django.conf import settings
from django.utils import formats, timezone
from django.utils.translation import gettext as _
from reportlab.lib import colors
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.platypus import Image, KeepTogether, SimpleDocTemplate, Spacer, Table, TableStyle

from shopfloor.context import SAFETY_CAUTION
from shopfloor.core import judging
from shopfloor.floor import traveller_steps, words
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot, SiteSettings
from shopfloor.safe_output import pdf_paragraph

_DEJAVU = Path("/usr/share/fonts/truetype/dejavu")


def qr_svg(code: str, scale: int = 6) -> str:
    """Inline SVG of a QR code that decodes to exactly `code`."""
    qr = segno.make(code, error="m", micro=False)
    return qr.svg_inline(scale=scale, border=2, dark="#000", light="#fff", omitsize=True)


def qr_png(code: str, scale: int = 8) -> bytes:
    qr = segno.make(code, error="m", micro=False)
    out = io.BytesIO()
    qr.save(out, kind="png", scale=scale, border=4)
    return out.getvalue()


def window_source(window: dict[str, Any]) -> str:
    """The source of a window as one line of text (it may be stored as text or a dict)."""
    source = window.get("source")
    if isinstance(source, dict):
        parts = [str(v) for k, v in source.items() if v not in (None, "") and k != "kind"]
        return " · ".join(parts) or str(source.get("kind", ""))
    return str(source or "source not recorded")


@dataclass(frozen=True)
class TravellerData:
    lot: Lot
    jobs: list[Job]
    steps: list[LotStep]


def traveller_data(lot: Lot) -> TravellerData:
    jobs = list(
        Job.objects.filter(images__panel__lot=lot)
        .select_related("part_revision__part__customer")
        .distinct()
        .order_by("number")
    )
    steps = list(
        LotStep.objects.filter(lot=lot)
        .select_related("work_center", "added_by_ncr")
        .order_by("position")
    )
    return TravellerData(lot=lot, jobs=jobs, steps=steps)


def _fonts() -> tuple[str, str]:
    """DejaVu covers µ, ≥ and ≤; fall back to Helvetica when the font is not installed."""

    regular, bold = _DEJAVU / "DejaVuSans.ttf", _DEJAVU / "DejaVuSans-Bold.ttf"
    if regular.exists() and bold.exists():
        if "DejaVuSans" not in pdfmetrics.getRegisteredFontNames():
            pdfmetrics.registerFont(TTFont("DejaVuSans", str(regular)))
            pdfmetrics.registerFont(TTFont("DejaVuSans-Bold", str(bold)))
        return "DejaVuSans", "DejaVuSans-Bold"
    return "Helvetica", "Helvetica-Bold"


#: Paper sizes a traveller prints on (the layout is 178 mm wide, which fits both).
PAPER_SIZES = ("a4", "letter")


def traveller_pdf(lot: Lot, paper: str | None = None) -> bytes:
    """Render the traveller as a PDF on A4 or US Letter (reportlab platypus); without a
    paper asked for, on the site's paper (SiteSettings.paper_size)."""

    if paper not in PAPER_SIZES:
        paper = SiteSettings.current().paper_size
    data = traveller_data(lot)
    font, bold = _fonts()
    body = ParagraphStyle("body", fontName=font, fontSize=9, leading=11)
    small = ParagraphStyle("small", parent=body, fontSize=7.5, leading=9)
    head = ParagraphStyle("head", parent=body, fontName=bold, fontSize=16, leading=20)
    h2 = ParagraphStyle(
        "h2", parent=body, fontName=bold, fontSize=11, leading=14, spaceBefore=6, spaceAfter=3
    )
    caution = ParagraphStyle("caution", parent=small, textColor=colors.HexColor("#7a3b00"))

    def p(text: str, style: ParagraphStyle = body) -> Any:
        # Escaped: lot codes, names, notes and instructions print as typed, never as markup.
        return pdf_paragraph(text, style, ascii_symbols=font == "Helvetica")

    revision = lot.routing_revision
    part_revision = revision.part_revision
    tz = ZoneInfo(settings.SITE_TIME_ZONE)
    printed = timezone.now().astimezone(tz)

    story: list[Any] = []
    qr = Image(io.BytesIO(qr_png(lot.code)), width=32 * mm, height=32 * mm)
    title = [
        p(_("Traveller — lot {code}").format(code=lot.code), head),
        p(
            _("Part {part} revision {rev} · routing r{routing} · IPC class {ipc}").format(
                part=part_revision.part.number,
                rev=part_revision.revision,
                routing=revision.number,
                ipc=revision.ipc_class,
            )
        ),
        p(
            _("Panels: {n} · printed {when} ({zone})").format(
                n=lot.panel_count,
                when=formats.date_format(printed, "SHORT_DATETIME_FORMAT"),
                zone=settings.SITE_TIME_ZONE,
            ),
            small,
        ),
    ]
    header = Table([[title, qr]], colWidths=[140 * mm, 36 * mm])
    header.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP")]))
    story += [header, Spacer(1, 3 * mm)]

    story.append(p(_("Jobs"), h2))
    job_rows: list[list[Any]] = [
        [
            p(t, small)
            for t in (_("Job"), _("Customer"), _("Part / rev"), _("Qty"), _("Due"), _("IPC class"))
        ]
    ]
    for job in data.jobs:
        pr = job.part_revision
        job_rows.append(
            [
                p(job.number),
                p(pr.part.customer.code),
                p(_("{part} rev {rev}").format(part=pr.part.number, rev=pr.revision)),
                p(formats.number_format(job.quantity)),
                p(formats.date_format(job.due_date, "SHORT_DATE_FORMAT")),
                p(str(job.ipc_class)),
            ]
        )
    story.append(
        _grid(
            Table(
                job_rows,
                colWidths=[25 * mm, 25 * mm, 50 * mm, 18 * mm, 28 * mm, 30 * mm],
                repeatRows=1,
            )
        )
    )

    panels = ", ".join(lot.panels.order_by("serial").values_list("serial", flat=True))
    story += [p(_("Panels"), h2), p(panels or _("none recorded"), small)]

    story.append(p(_("Route"), h2))
    signatures = traveller_steps.signatures_by_step(data.steps)
    hazards = traveller_steps.HazardNotes()
    for step in data.steps:
        name = words.step_name(step.name)
        center = words.library_text(step.work_center.name)
        lines = [p(f"{step.position} · {name} — {center}", body)]
        if step.instructions:
            lines.append(p(step.instructions, small))
        if step.parameters:
            lines.append(
                p(
                    _("Parameters:")
                    + " "
                    + ", ".join(f"{k}: {v}" for k, v in words.parameter_rows(step.parameters)),
                    small,
                )
            )
        for group in judging.group_plan(step.plan):
            sources = "; ".join(dict.fromkeys(window_source(e) for e in group.entries))
            lines += traveller_steps.reading_cells(
                group, words.quantity_label(group.quantity), sources, p, small
            )
        if step.hazard:
            text, full = hazards.line(step, words.library_text(step.hazard))
            lines.append(p(text, caution if full else small))
        sign = traveller_steps.sign_off_block(signatures.get(step.pk, []), p, small)
        row = Table([[lines, sign]], colWidths=[118 * mm, 60 * mm])
        row.setStyle(
            TableStyle(
                [
                    ("VALIGN", (0, 0), (-1, -1), "TOP"),
                    ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.grey),
                    ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
                ]
            )
        )
        story.append(KeepTogether([row]))

    story += [Spacer(1, 4 * mm), p(_(SAFETY_CAUTION), caution)]
    out = io.BytesIO()
    doc = SimpleDocTemplate(
        out,
        pagesize=LETTER if paper == "letter" else A4,
        leftMargin=15 * mm,
        rightMargin=15 * mm,
        topMargin=12 * mm,
        bottomMargin=12 * mm,
        title=_("Traveller {code}").format(code=lot.code),
        author=_("Traveller service"),
    )
    doc.build(story)
    return out.getvalue()


def _grid(table: Any) -> Any:

    table.setStyle(
        TableStyle(
            [
                ("GRID", (0, 0), (-1, -1), 0.4, colors.grey),
                ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8e8e8")),
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ]
        )
    )
    return table
