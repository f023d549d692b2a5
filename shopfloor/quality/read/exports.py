"""Exports of a lot's records: streamed CSV and the PDF lot record / certificate.

The CSV is written row by row from database iterators into a pseudo-buffer, so memory
stays flat however many readings a lot has. The PDF (reportlab) summarises readings per
quantity against the window and names the window's source, the IPC class applied, the
signatures, and carries the control charts drawn from the same shapes as the pages.

Traceability claim in the PDF footer: material level M2, process level P2 (IPC-1782,
from memory; see shopfloor.quality.read.history): records are per lot and per panel, not per
board.
"""

from __future__ import annotations

import io
import statistics
from collections.abc import Iterator
from typing import Any

from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.platypus import SimpleDocTemplate, Spacer, Table, TableStyle

from shopfloor.core import judging
from shopfloor.core.judging import describe_window
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Lot
from shopfloor.quality.models import Alert, Hold, Nonconformance
from shopfloor.quality.read import charts, history
from shopfloor.safe_output import csv_writer, pdf_paragraph

CHUNK = 2000
CSV_HEADER = [
    "record",
    "at",
    "lot",
    "step_position",
    "step",
    "work_center",
    "what",
    "quantity",
    "value",
    "unit",
    "sample",
    "window_min",
    "window_max",
    "window_source",
    "in_window",
    "who",
    "equipment",
    "superseded_by",
    "note",
]


class _Echo:
    """A file-like object whose write returns the line, for csv.writer over a stream."""

    def write(self, value: str) -> str:
        return value


def _csv_row(record: str, at: Any, lot: Lot, **columns: Any) -> list[Any]:
    """One CSV row: the named CSV_HEADER columns filled, every other one empty."""
    unknown = set(columns) - _CSV_COLUMNS
    if unknown:
        raise KeyError(f"not CSV columns: {sorted(unknown)}")
    values = {"record": record, "at": at.isoformat(), "lot": lot.code, **columns}
    return [values.get(name, "") for name in CSV_HEADER]


_CSV_COLUMNS = frozenset(CSV_HEADER)


def lot_csv_rows(lot: Lot) -> Iterator[list[Any]]:
    """Every step event and every reading (superseded ones included) as CSV rows."""
    yield CSV_HEADER
    steps = (
        LotStep.objects.filter(lot=lot)
        .select_related("work_center", "equipment", "started_by", "completed_by")
        .order_by("position")
    )
    for s in steps.iterator(chunk_size=CHUNK):
        for what, at, who in (
            ("started", s.started_at, s.started_by),
            ("completed", s.completed_at, s.completed_by),
        ):
            if at:
                yield _csv_row(
                    "step",
                    at,
                    lot,
                    step_position=s.position,
                    step=s.code,
                    work_center=s.work_center.code,
                    what=what,
                    who=history._person(who),
                    equipment=s.equipment.code if s.equipment else "",
                )
    readings = (
        Reading.objects.filter(lot_step__lot=lot)
        .select_related("lot_step__work_center", "operator", "equipment")
        .order_by("captured_at", "pk")
    )
    for r in readings.iterator(chunk_size=CHUNK):
        w = r.window or {}
        yield _csv_row(
            "reading",
            r.captured_at,
            lot,
            step_position=r.lot_step.position,
            step=r.lot_step.code,
            work_center=r.lot_step.work_center.code,
            what="reading",
            quantity=r.quantity,
            value=r.value,
            unit=r.unit,
            sample=r.sample_index,
            window_min=w.get("min"),
            window_max=w.get("max"),
            window_source=w.get("source", ""),
            in_window="yes" if r.in_window else "no",
            who=history._person(r.operator),
            equipment=r.equipment.code if r.equipment else "",
            superseded_by=r.superseded_by_id or "",
            note=r.correction_reason,
        )
    for h in Hold.objects.filter(lot=lot).order_by("opened_at").iterator(chunk_size=CHUNK):
        yield _csv_row("hold", h.opened_at, lot, what="hold opened", note=h.reason)
    for a in Alert.objects.filter(lot=lot).order_by("created_at").iterator(chunk_size=CHUNK):
        yield _csv_row("alert", a.created_at, lot, what=a.kind, note=a.message)
    for n in (
        Nonconformance.objects.filter(lot=lot).order_by("opened_at").iterator(chunk_size=CHUNK)
    ):
        note = f"{n.description} | disposition: {n.disposition or 'open'} {n.disposition_note}"
        yield _csv_row("ncr", n.opened_at, lot, what=n.number, note=note)


def stream_lot_csv(lot: Lot) -> Iterator[str]:
    # Formula-looking text (a reason starting with "=") is defused: shopfloor.safe_output.
    writer = csv_writer(_Echo())
    for row in lot_csv_rows(lot):
        yield writer.writerow(row)


# --- PDF ------------------------------------------------------------------------------


def reading_summary(h: history.LotHistory) -> list[dict[str, Any]]:
    """Per quantity and window: count, min, max, mean, and whether all were in window
    (or which NCRs dispositioned the ones outside). Superseded readings are left out."""
    groups: dict[tuple[str, str], list[Reading]] = {}
    for r in h.readings:
        if r.superseded_by_id:
            continue
        w = r.window or {}
        groups.setdefault((r.quantity, str(w.get("source", ""))), []).append(r)
    ncr_by_reading: dict[int, list[str]] = {}
    for n in h.ncrs:
        for r in n.readings.all():
            ncr_by_reading.setdefault(r.pk, []).append(
                f"{n.number} ({n.get_disposition_display() or 'open'})"
            )
    out = []
    for (quantity, source), rs in sorted(groups.items()):
        values = [r.value for r in rs]
        outside = [r for r in rs if not r.in_window]
        # a set judged outside (its mean, smallest, largest or range), by the newest
        # verdict of each lot step's set (a later correction may have brought it back)
        latest: dict[int, Reading] = {}
        for r in rs:
            if r.set_verdict is not None:
                seen = latest.get(r.lot_step_id)
                if seen is None or (r.recorded_at, r.pk) > (seen.recorded_at, seen.pk):
                    latest[r.lot_step_id] = r
        sets_out = [r for r in latest.values() if (r.set_verdict or {}).get("in_window") is False]
        flagged = outside + [r for r in rs if r.lot_step_id in {x.lot_step_id for x in sets_out}]
        ncrs = sorted({x for r in flagged for x in ncr_by_reading.get(r.pk, [])})
        parts = []
        if outside:
            parts.append(f"{len(outside)} outside")
        if sets_out:
            parts.append(f"{len(sets_out)} sample set(s) outside")
        verdict = (
            "all in window"
            if not parts
            else "; ".join(parts) + "; " + (", ".join(ncrs) if ncrs else "no NCR recorded")
        )
        out.append(
            {
                "quantity": quantity,
                "unit": rs[0].unit,
                "count": len(values),
                "min": min(values),
                "max": max(values),
                "mean": statistics.fmean(values),
                "window": describe_window(rs[-1].window or {}),
                "source": source,
                "verdict": verdict,
                "values": values,
                "lsl": (rs[-1].window or {}).get("min"),
                "usl": (rs[-1].window or {}).get("max"),
            }
        )
    return out


def lot_record_pdf(h: history.LotHistory, *, certificate: bool = False) -> bytes:
    """The lot record (or certificate of conformance) as PDF bytes."""

    # Every paragraph escapes its text (shopfloor.safe_output): codes, notes and names
    # print as typed and can never embed a file or break the document.
    Paragraph = pdf_paragraph

    styles = getSampleStyleSheet()
    buf = io.BytesIO()
    lot = h.lot
    rev = lot.routing_revision
    title = "Certificate of conformance" if certificate else "Lot record"

    def footer(canvas: Any, doc: Any) -> None:
        canvas.saveState()
        canvas.setFont("Helvetica", 7)
        canvas.drawString(15 * mm, 10 * mm, history.TRACEABILITY_FOOTER[:150])
        canvas.drawString(15 * mm, 6.5 * mm, history.TRACEABILITY_FOOTER[150:])
        canvas.drawRightString(195 * mm, 14 * mm, f"{title} {lot.code} - page {doc.page}")
        canvas.restoreState()

    doc = SimpleDocTemplate(
        buf,
        pagesize=A4,
        leftMargin=15 * mm,
        rightMargin=15 * mm,
        topMargin=15 * mm,
        bottomMargin=22 * mm,
        title=f"{title} {lot.code}",
    )
    p = styles["BodyText"]
    story: list[Any] = [Paragraph(f"{title}: lot {lot.code}", styles["Title"])]
    grid = TableStyle(
        [
            ("GRID", (0, 0), (-1, -1), 0.4, colors.grey),
            ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8e8e8")),
            ("FONTSIZE", (0, 0), (-1, -1), 8),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ]
    )
    job_rows = [
        ["Job", "Customer", "Part number", "Rev", "Ordered", "On live panels", "Due", "IPC class"]
    ]
    images_by_job: dict[str, int] = {}
    for panel in h.panels:
        if panel.scrapped:
            continue
        for img in panel.images.all():
            images_by_job[img.job.number] = images_by_job.get(img.job.number, 0) + img.count
    for j in h.jobs:
        job_rows.append(
            [
                j.number,
                j.part_revision.part.customer.code,
                j.part_revision.part.number,
                j.part_revision.revision,
                str(j.quantity),
                str(images_by_job.get(j.number, 0)),
                j.due_date.isoformat(),
                f"Class {j.ipc_class}",
            ]
        )
    story += [Table(job_rows, style=grid), Spacer(1, 4 * mm)]
    finish = (rev.build_spec or {}).get("finish", "")
    story.append(
        Paragraph(
            f"Routing revision r{rev.number}, built to IPC class {rev.ipc_class}; finish "
            f"{finish or 'not stated'}; {lot.panel_count} panel(s); status "
            f"{lot.get_status_display()}{'; ON HOLD' if lot.on_hold else ''}.",
            p,
        )
    )
    if lot.split_from is not None:
        story.append(Paragraph(f"Split from lot {lot.split_from.code}.", p))
    standards = h.standards
    story.append(
        Paragraph(
            "Windows applied (sources): "
            + ("; ".join(standards) if standards else "none recorded"),
            p,
        )
    )
    story.append(Spacer(1, 3 * mm))
    story.append(Paragraph("Readings against their windows", styles["Heading2"]))
    summary = reading_summary(h)
    rows = [["Quantity", "n", "Min", "Max", "Mean", "Window", "Source", "Result"]]
    for s in summary:
        rows.append(
            [
                s["quantity"],
                s["count"],
                judging.for_people(s["quantity"], s["min"], symbol=False),
                judging.for_people(s["quantity"], s["max"], symbol=False),
                judging.for_people(s["quantity"], s["mean"], symbol=False),
                Paragraph(s["window"], p),
                Paragraph(s["source"], p),
                Paragraph(s["verdict"], p),
            ]
        )
    if len(rows) == 1:
        rows.append(["no readings", "", "", "", "", "", "", ""])
    story += [
        Table(
            rows,
            style=grid,
            colWidths=[28 * mm, 9 * mm, 15 * mm, 15 * mm, 15 * mm, 32 * mm, 38 * mm, 30 * mm],
        ),
        Spacer(1, 3 * mm),
    ]
    if h.ncrs:
        story.append(Paragraph("Nonconformances", styles["Heading2"]))
        nrows = [["NCR", "Opened", "Disposition", "Note"]]
        for n in h.ncrs:
            nrows.append(
                [
                    n.number,
                    n.opened_at.strftime("%Y-%m-%d %H:%M"),
                    n.get_disposition_display() or "open",
                    Paragraph(n.disposition_note or n.description, p),
                ]
            )
        story += [Table(nrows, style=grid), Spacer(1, 3 * mm)]
    story.append(Paragraph("Signatures", styles["Heading2"]))
    srows = [["Meaning", "Printed name", "Signed (UTC)", "Record"]]
    for sig in h.signatures:
        srows.append(
            [
                sig.get_meaning_display(),
                sig.printed_name,
                sig.signed_at.strftime("%Y-%m-%d %H:%M:%S"),
                f"{sig.record_type} {sig.record_id}",
            ]
        )
    if len(srows) == 1:
        srows.append(["none yet", "", "", ""])
    story += [Table(srows, style=grid), Spacer(1, 3 * mm)]
    if summary:
        story.append(Paragraph("Charts", styles["Heading2"]))
    for s in summary[:6]:
        fig = charts.capability_histogram(
            s["values"],
            s["lsl"],
            s["usl"],
            title=f"{s['quantity']} ({s['unit']}) vs window",
            unit=s["unit"],
        )
        story.append(charts.to_drawing(fig, scale=0.55))
    if certificate:
        story.append(Spacer(1, 4 * mm))
        story.append(
            Paragraph(
                "The shop states that the boards listed above were built on the routing revision "
                "named and measured against the windows and sources shown; readings outside a "
                "window are listed with the NCR that dispositioned them.",
                p,
            )
        )
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return buf.getvalue()
