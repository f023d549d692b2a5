"""Read a gauge's exported CSV file into batch items (the upload page's parser).

Kept apart from the view so the rules are in one place and tested directly: UTF-8
(a byte-order mark is fine), a header row naming the columns in any order, at most
`batch.MAX_ITEMS` data rows and `MAX_BYTES` bytes. A row without a sample key gets one
made from the file's SHA-256 and the row number, so uploading the same file twice gives
duplicates, never second readings. A row with a bad field is refused on its own (its
problems are listed with the row number); a file that cannot be read at all is refused
whole with what was wrong and what is allowed.
"""

from __future__ import annotations

import csv
import hashlib
import io
from dataclasses import dataclass, field
from typing import Any

from shopfloor.floor import batch

MAX_BYTES = 1_000_000
REQUIRED = ("lot", "quantity", "value", "unit")
OPTIONAL = (
    "sample_index",
    "sample_key",
    "position",
    "equipment",
    "captured_at",
    "step",
    "tested",
)
COLUMNS = REQUIRED + OPTIONAL


class FileProblem(ValueError):
    """The file as a whole cannot be read; the message says why and what is allowed."""


@dataclass
class ParsedFile:
    rows: list[dict[str, Any]] = field(default_factory=list)  # one dict per data row
    digest: str = ""


def read(data: bytes) -> ParsedFile:
    """Split the file into row dicts keyed by column name (values are stripped text)."""
    if not data:
        raise FileProblem("The file is empty. Export the gauge's results as CSV and try again.")
    if len(data) > MAX_BYTES:
        raise FileProblem(
            f"The file is {len(data):,} bytes; at most {MAX_BYTES:,} are allowed. Split it."
        )
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise FileProblem(
            f"The file is not UTF-8 text (byte {exc.start + 1} cannot be read). Save or export "
            "it as CSV UTF-8."
        ) from exc
    if "\x00" in text:
        raise FileProblem("The file contains NUL bytes; it is not a CSV text file.")
    try:
        dialect: Any = csv.Sniffer().sniff(text.split("\n", 1)[0], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader(io.StringIO(text), dialect)
    try:
        header = [h.strip().lower() for h in next(reader, [])]
        if not any(header):
            raise FileProblem(f"The first row must name the columns: {', '.join(COLUMNS)}.")
        unknown = [h for h in header if h not in COLUMNS]
        if unknown:
            raise FileProblem(
                f"Unknown column(s): {', '.join(unknown)}. Allowed: {', '.join(COLUMNS)}."
            )
        missing = [c for c in REQUIRED if c not in header]
        if missing:
            raise FileProblem(
                f"Missing column(s): {', '.join(missing)}. Every file needs {', '.join(REQUIRED)}."
            )
        if len(set(header)) != len(header):
            raise FileProblem("A column is named twice in the first row.")
        parsed = ParsedFile(digest=hashlib.sha256(data).hexdigest())
        for number, cells in enumerate(reader, start=2):
            if not any(c.strip() for c in cells):
                continue  # blank line
            if len(parsed.rows) >= batch.MAX_ITEMS:
                raise FileProblem(
                    f"The file has more than {batch.MAX_ITEMS:,} readings; upload at most "
                    f"{batch.MAX_ITEMS:,} at a time."
                )
            row: dict[str, Any] = {
                name: (cells[i].strip() if i < len(cells) else "") for i, name in enumerate(header)
            }
            row["_line"] = number
            if len(cells) > len(header):
                row["_extra"] = True
            parsed.rows.append(row)
    except csv.Error as exc:
        raise FileProblem(f"The file is not valid CSV: {exc}.") from exc
    if not parsed.rows:
        raise FileProblem("The file has a header row but no readings.")
    return parsed


def item_data(row: dict[str, Any], digest: str, equipment_ids: dict[str, int]) -> dict[str, Any]:
    """One row as a batch item body (the API's item shape), blanks left out."""
    body: dict[str, Any] = {k: v for k, v in row.items() if k in COLUMNS and v != ""}
    body.setdefault("sample_key", f"file-{digest[:16]}-line-{row['_line']}")
    body.setdefault("sample_index", "1")
    gauge = body.get("equipment")
    if gauge is not None:
        # A gauge is named by its code in a file; an unknown code stays text and is refused.
        body["equipment"] = equipment_ids.get(gauge.upper(), gauge)
    return body
