"""The traveller's per-step blocks: sign-off box, reading cells and hazard cautions.

- **Sign-off.** A step signed on the tablet prints each e-signature on it: the signer's
  printed name, what the signature means ("Performed by", "Verified by", ...) and when
  (site time zone), marked as signed electronically. A step not yet signed prints empty
  boxes to sign on paper during a network outage (entered later on the tablet).
- **Reading cells.** For each quantity the plan asks for: one numbered cell per sample,
  then one line per criterion saying what it applies to (each reading, the average, the
  smallest, the largest, the range of the set) and its window, with a cell for the
  figure when the criterion judges the set rather than each reading.
- **Hazards.** Each caution prints in full once, at the first step of the kind that
  carries it (wet chemistry, etchant, UV, molten solder, press: the routing library gives
  each kind of step its one caution text); every later step with the same caution refers
  back to that step ("the same caution as at step 40 applies") instead of repeating it.

reportlab is imported inside the functions, as in traveller.py (only PDF requests load it).
Every text goes through safe_output.pdf_paragraph (via the `p` function passed in).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any
from zoneinfo import ZoneInfo

from django.conf import settings
from django.utils.translation import gettext as _
from django.utils.translation import gettext_noop
from reportlab.lib import colors
from reportlab.lib.units import mm
from reportlab.platypus import Table, TableStyle

from shopfloor.audit.models import Signature
from shopfloor.core import judging
from shopfloor.floor.models import LotStep

#: Sample cells per row of the reading table (a 118 mm column holds 10 legible cells).
CELLS_PER_ROW = 10

Para = Callable[..., Any]


def signatures_by_step(steps: Iterable[LotStep]) -> dict[int, list[Signature]]:
    """Every signature bound to the lot's steps, oldest first (one query)."""
    ids = {str(s.pk): s.pk for s in steps}
    out: dict[int, list[Signature]] = {}
    for sig in Signature.objects.filter(record_type="lot_step", record_id__in=list(ids)).order_by(
        "signed_at", "pk"
    ):
        out.setdefault(ids[sig.record_id], []).append(sig)
    return out


def signed_line(sig: Signature) -> str:
    """'Performed by: A. Person · 2030-01-31 14:05 (UTC) · signed electronically'."""
    when = sig.signed_at.astimezone(ZoneInfo(settings.SITE_TIME_ZONE))
    return _("{meaning}: {name} · {when} ({zone}) · signed electronically").format(
        meaning=sig.get_meaning_display(),
        name=sig.printed_name,
        when=f"{when:%Y-%m-%d %H:%M}",
        zone=settings.SITE_TIME_ZONE,
    )


def sign_off_block(signatures: list[Signature], p: Para, small: Any) -> Any:
    """The right-hand column of a step: its e-signatures, or empty boxes to sign on paper."""

    if signatures:
        rows = [[p(signed_line(sig), small)] for sig in signatures]
        box = Table(rows, colWidths=[58 * mm])
        box.setStyle(
            TableStyle(
                [
                    ("BOX", (0, 0), (-1, -1), 0.8, colors.black),
                    ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ]
            )
        )
        return box
    blank = Table(
        [[p(_("Performed by"), small), ""], [p(_("Date"), small), ""]],
        colWidths=[25 * mm, 33 * mm],
        rowHeights=[9 * mm, 7 * mm],
    )
    blank.setStyle(
        TableStyle(
            [
                ("BOX", (1, 0), (1, 0), 0.6, colors.black),
                ("BOX", (1, 1), (1, 1), 0.6, colors.black),
                ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
            ]
        )
    )
    return blank


_WHAT = {  # marked for the catalogue; translated where shown (applies_to_words)
    "each_reading": gettext_noop("each reading"),
    "mean": gettext_noop("average of the set"),
    "minimum": gettext_noop("smallest of the set"),
    "maximum": gettext_noop("largest of the set"),
    "range": gettext_noop("range of the set (largest − smallest)"),
}


def applies_to_words(entry: dict[str, Any]) -> str:
    """What a criterion judges, in words (translated)."""
    what = judging.applies_to(entry)
    if entry.get("attribute"):
        return _("defects found")
    return _(_WHAT.get(what, what))


def reading_cells(
    group: judging.QuantityPlan, label: str, source: str, p: Para, small: Any
) -> list[Any]:
    """The cells for one quantity: numbered sample cells, then each criterion with its
    window and, for a criterion on the set, a cell for the figure."""

    out: list[Any] = [p(_("{label} — source: {source}").format(label=label, source=source), small)]
    n = max(group.samples, 1)
    width = 116 * mm / CELLS_PER_ROW
    for start in range(0, n, CELLS_PER_ROW):
        numbers = list(range(start + 1, min(start + CELLS_PER_ROW, n) + 1))
        cells = Table(
            [[p(str(i), small) for i in numbers], ["" for _i in numbers]],
            colWidths=[width] * len(numbers),
            rowHeights=[4 * mm, 7 * mm],
            hAlign="LEFT",
        )
        cells.setStyle(
            TableStyle(
                [
                    ("GRID", (0, 1), (-1, 1), 0.6, colors.black),
                    ("FONTSIZE", (0, 0), (-1, 0), 6),
                    ("BOTTOMPADDING", (0, 0), (-1, 0), 0),
                ]
            )
        )
        out.append(cells)
    entries = sorted(group.entries, key=_criterion_order)
    rows: list[list[Any]] = []
    style: list[tuple[Any, ...]] = [
        ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
        ("LINEBELOW", (0, 0), (-1, -1), 0.2, colors.grey),
    ]
    for i, entry in enumerate(entries):
        on_set = judging.applies_to(entry) in judging.SET_STATISTICS
        rows.append(
            [
                p(applies_to_words(entry), small),
                p(judging.describe_entry(entry, group.samples), small),
                "" if on_set else p(_("in the cells above"), small),
            ]
        )
        if on_set:  # a cell for the average / smallest / largest / range
            style.append(("BOX", (2, i), (2, i), 0.6, colors.black))
    criteria = Table(rows, colWidths=[38 * mm, 52 * mm, 26 * mm], hAlign="LEFT")
    criteria.setStyle(TableStyle(style))
    out.append(criteria)
    return out


def _criterion_order(entry: dict[str, Any]) -> int:
    what = judging.applies_to(entry)
    return judging.APPLIES_TO.index(what) if what in judging.APPLIES_TO else len(judging.APPLIES_TO)


class HazardNotes:
    """Which caution was printed in full at which step (keyed by the caution's text)."""

    def __init__(self) -> None:
        self.first: dict[str, int] = {}

    def line(self, step: LotStep, hazard_text: str) -> tuple[str, bool]:
        """(text to print, True when it is the full caution) for this step's hazard."""
        key = " ".join(step.hazard.split())
        seen = self.first.get(key)
        if seen is None:
            self.first[key] = step.position
            return _("HAZARD: {text}").format(text=hazard_text), True
        return _("HAZARD: the same caution as at step {n} applies").format(n=seen), False
