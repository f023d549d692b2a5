"""Text from people and instruments, made safe for the files we write: CSV and PDF.

Every CSV export writes through `csv_writer` and every PDF paragraph is built with
`pdf_paragraph`; `tests/security/test_safe_output.py` fails if any other module calls
`csv.writer` or imports reportlab's `Paragraph`, so a new export cannot forget either.

- **CSV injection** (OWASP, "CSV Injection", https://owasp.org/www-community/attacks/CSV_Injection):
  a spreadsheet runs a cell that starts with ``=``, ``+``, ``-``, ``@``, a tab or a
  carriage return as a formula (``=HYPERLINK(...)`` in a correction reason). Such a text
  cell gets a leading apostrophe, which spreadsheets show as plain text; numbers stay
  numbers (a negative reading is data, not a formula). The csv module quotes every cell
  that holds a separator, quote or line break, so a cell cannot break out of its column.
- **PDF markup**: reportlab's Paragraph reads its text as markup (``<img src=...>``
  embeds a server file, a stray ``<i>`` raises). `pdf_paragraph` escapes ``& < >`` so
  every character is printed as typed, and drops C0 control characters (NUL and friends)
  that no PDF text needs. Our own markup (bold labels) goes in through `PdfMarkup`, built
  only from constant strings and escaped values.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable
from typing import Any, Protocol
from xml.sax.saxutils import escape

from reportlab.platypus import Paragraph

#: Characters that make a spreadsheet read a cell as a formula (OWASP's list).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def csv_cell(value: Any) -> Any:
    """A value as a CSV cell: text that a spreadsheet would run as a formula is defused."""
    if value is None:
        return ""
    if isinstance(value, bool | int | float):
        return value
    text = str(value)
    if text.startswith(FORMULA_STARTS):
        return "'" + text
    return text


class _Writable(Protocol):
    def write(self, s: str, /) -> Any: ...


class SafeCsvWriter:
    """csv.writer whose every cell goes through `csv_cell`."""

    def __init__(self, stream: _Writable, **fmtparams: Any) -> None:
        self._writer = csv.writer(stream, **fmtparams)

    def writerow(self, row: Iterable[Any]) -> Any:
        return self._writer.writerow([csv_cell(v) for v in row])

    def writerows(self, rows: Iterable[Iterable[Any]]) -> None:
        for row in rows:
            self.writerow(row)


def csv_writer(stream: _Writable, **fmtparams: Any) -> SafeCsvWriter:
    return SafeCsvWriter(stream, **fmtparams)


class PdfMarkup(str):
    """Text that is already paragraph markup (built with `pdf_markup`); not escaped again."""

    __slots__ = ()


def pdf_plain(value: Any, *, ascii_symbols: bool = False) -> str:
    """Text for a canvas drawString (never parsed as markup): control characters dropped."""
    text = _CONTROL.sub("", "" if value is None else str(value))
    if ascii_symbols:  # the core Helvetica font has no glyphs for these
        text = text.replace("≥", ">=").replace("≤", "<=")
    return text


def pdf_text(value: Any, *, ascii_symbols: bool = False) -> str:
    """Any value as paragraph text that prints exactly as typed (no markup, no controls)."""
    if isinstance(value, PdfMarkup):
        return str(value)
    return escape(pdf_plain(value, ascii_symbols=ascii_symbols))


def pdf_markup(template: str, *values: Any, ascii_symbols: bool = False) -> PdfMarkup:
    """Our own markup with escaped values: pdf_markup("<b>{}</b>: {}", label, note)."""
    return PdfMarkup(template.format(*(pdf_text(v, ascii_symbols=ascii_symbols) for v in values)))


def pdf_paragraph(value: Any, style: Any, *, ascii_symbols: bool = False) -> Any:
    """A reportlab Paragraph of `value`, escaped (`PdfMarkup` passes as it is)."""

    return Paragraph(pdf_text(value, ascii_symbols=ascii_symbols), style)
