"""How the board writes what it shows: its links, each URL pattern reversed once per
board (BoardLinks), forecast moments, durations and due moments in the site's time zone
and date format. Used by read/board.py."""

from __future__ import annotations

import datetime as dt
import zoneinfo
from typing import Any
from urllib.parse import quote

from django.conf import settings
from django.urls import reverse
from django.utils.http import RFC3986_SUBDELIMS

from shopfloor.core.dates import FORMATS, ISO, DateFormat


class BoardLinks:
    """The board's links, each URL pattern reversed once per board.

    A wall screen shows hundreds of rows, each with links to its lot, its jobs and its
    actions; `reverse()` per link was a measurable share of a board render. The path is
    reversed once with a marker argument and the value is put in its place, quoted the
    way `reverse()` quotes it (a '/' is quoted too: the str converter refuses it anyway).
    """

    _MARK = "0board0mark0"
    _INT_MARK = 987654321
    _SAFE = RFC3986_SUBDELIMS + "~:@"

    def __init__(self) -> None:
        self._lot = self._split("quality:lot", self._MARK)
        self._job = self._split("quality:job", self._MARK)
        self._release = self._split("quality:queue_release", self._INT_MARK)
        self._move = self._split("quality:queue_move", self._INT_MARK)

    @staticmethod
    def _split(name: str, mark: str | int) -> tuple[str, str]:
        head, _, tail = reverse(name, args=[mark]).rpartition(str(mark))
        return head, tail

    def _fill(self, parts: tuple[str, str], value: str | int) -> str:
        return f"{parts[0]}{quote(str(value), safe=self._SAFE)}{parts[1]}"

    def lot(self, code: str) -> str:
        return self._fill(self._lot, code)

    def job(self, number: str) -> str:
        return self._fill(self._job, number)

    def release(self, lot_step_id: int) -> str:
        return self._fill(self._release, lot_step_id)

    def move(self, work_center_id: int) -> str:
        return self._fill(self._move, work_center_id)


def format_of(site: Any) -> DateFormat:
    return FORMATS.get(site.date_format if site is not None else "iso", ISO)


def when_text(moment: dt.datetime, now: dt.datetime, date_format: DateFormat = ISO) -> str:
    """A forecast moment for a wall screen: '14:05' today, 'Thu 14:05' within a week,
    the date in the site's format further out (site time zone)."""
    tz = zoneinfo.ZoneInfo(settings.SITE_TIME_ZONE)
    local, today = moment.astimezone(tz), now.astimezone(tz).date()
    days = (local.date() - today).days
    if days == 0:
        return local.strftime("%H:%M")
    if 0 < days < 7:
        return local.strftime("%a %H:%M")
    return date_format.format(local.date())


def duration_text(minutes: float) -> str:
    """'3 d 4 h', '5 h 10 min', '12 min' for a wall screen."""
    m = max(int(minutes), 0)
    days, rest = divmod(m, 1440)
    hours, mins = divmod(rest, 60)
    if days:
        return f"{days} d {hours} h"
    if hours:
        return f"{hours} h {mins} min"
    return f"{mins} min"


def due_end(day: dt.date) -> dt.datetime:
    """A job due on a date is due at the end of that day, in the site's time zone."""
    tz = zoneinfo.ZoneInfo(settings.SITE_TIME_ZONE)
    return dt.datetime.combine(day, dt.time(23, 59, 59), tzinfo=tz)
