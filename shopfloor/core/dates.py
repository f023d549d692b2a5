"""Calendar dates written and read in the site's one date format (pure; no Django).

A site picks one way to write dates (ISO 8601 by default) and every page, filter and
printed traveller uses it, so a supervisor never meets 12/03/2026 on one screen and
2026-12-03 on the next. Reading accepts the site's format and ISO 8601 always (a link or
a scanner may carry ISO whatever the site shows).
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass


@dataclass(frozen=True)
class DateFormat:
    """One way to write a date: its key, what a person is shown, and its field order."""

    key: str
    pattern: str  # shown to people: "YYYY-MM-DD"
    order: tuple[str, str, str]  # field order, each of "y", "m", "d"
    separator: str

    def format(self, day: dt.date) -> str:
        parts = {"y": f"{day.year:04d}", "m": f"{day.month:02d}", "d": f"{day.day:02d}"}
        return self.separator.join(parts[f] for f in self.order)

    @property
    def example(self) -> str:
        return self.format(dt.date(2030, 1, 31))


#: The formats a site may choose (ISO 8601 first: the default).
FORMATS: dict[str, DateFormat] = {
    f.key: f
    for f in (
        DateFormat("iso", "YYYY-MM-DD", ("y", "m", "d"), "-"),
        DateFormat("dmy_slash", "DD/MM/YYYY", ("d", "m", "y"), "/"),
        DateFormat("mdy_slash", "MM/DD/YYYY", ("m", "d", "y"), "/"),
        DateFormat("dmy_dot", "DD.MM.YYYY", ("d", "m", "y"), "."),
    )
}
ISO = FORMATS["iso"]


class DateNotUnderstood(ValueError):
    """The text is not a date in the site's format (nor ISO 8601)."""


def _read(text: str, fmt: DateFormat) -> dt.date | None:
    sep = re.escape(fmt.separator)
    match = re.fullmatch(rf"(\d{{1,4}}){sep}(\d{{1,2}}|\d{{4}}){sep}(\d{{1,4}})", text)
    if match is None:
        return None
    fields = dict(zip(fmt.order, (int(g) for g in match.groups()), strict=True))
    year_text = match.group(fmt.order.index("y") + 1)
    if len(year_text) != 4:
        return None
    try:
        return dt.date(fields["y"], fields["m"], fields["d"])
    except ValueError:
        return None


def parse_date(text: str, fmt: DateFormat = ISO) -> dt.date:
    """The date `text` names, written in `fmt` or in ISO 8601 (YYYY-MM-DD).

    Raises DateNotUnderstood naming the format expected, with an example."""
    text = (text or "").strip()
    for candidate in (fmt, ISO):
        day = _read(text, candidate)
        if day is not None:
            return day
    raise DateNotUnderstood(
        f"{text!r} is not a date; write it as {fmt.pattern} (for example {fmt.example})."
    )
