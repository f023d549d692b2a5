"""Shift calendars as working time on a minute axis that starts at "now".

The simulation measures time in minutes from the moment the forecast starts. A work
center's calendar (working weekdays, one or more shifts a day, holidays) becomes a sorted
list of open intervals on that axis. A step in progress when a shift ends pauses and
resumes when the next shift starts (the usual rule of finite-capacity planning; a center
that cannot pause, such as a press, runs a round-the-clock calendar). Beyond the horizon
the calendar counts as always open, so a far-off finish is never lost, only approximate.
"""

from __future__ import annotations

import datetime as dt
import zoneinfo
from bisect import bisect_left, bisect_right
from collections.abc import Iterable
from dataclasses import dataclass, field

HORIZON_DAYS = 400
UTC = dt.UTC


@dataclass(frozen=True)
class Shift:
    """A daily shift from `start` to `end` local time; an end at or before the start
    runs past midnight (22:00-06:00), and 00:00-00:00 is the whole day."""

    start: dt.time
    end: dt.time

    def minutes(self) -> tuple[int, int]:
        s = self.start.hour * 60 + self.start.minute
        e = self.end.hour * 60 + self.end.minute
        return s, e if e > s else e + 1440


@dataclass(frozen=True)
class ShiftCalendar:
    """When a work center works: weekdays (0 = Monday), shifts and holiday dates."""

    weekdays: frozenset[int] = frozenset(range(7))
    shifts: tuple[Shift, ...] = (Shift(dt.time(0, 0), dt.time(0, 0)),)
    holidays: frozenset[dt.date] = field(default_factory=frozenset)

    @property
    def always_open(self) -> bool:
        whole_day = any(s.minutes() == (0, 1440) for s in self.shifts)
        return whole_day and len(self.weekdays) == 7 and not self.holidays

    def __post_init__(self) -> None:
        bad = sorted(d for d in self.weekdays if d not in range(7))
        if bad:
            raise ValueError(f"weekdays {bad} are not 0 (Monday) to 6 (Sunday)")
        if not self.shifts:
            raise ValueError("a calendar needs at least one shift")


class WorkingTime:
    """A calendar compiled onto the minute axis of one forecast (0 = its start)."""

    __slots__ = ("cum", "cum_end", "ends", "n", "starts")

    def __init__(self, intervals: Iterable[tuple[float, float]]) -> None:
        merged: list[list[float]] = []
        for s, e in sorted(intervals):
            s = max(s, 0.0)
            if e <= s:
                continue
            if merged and s <= merged[-1][1]:
                merged[-1][1] = max(merged[-1][1], e)
            else:
                merged.append([s, e])
        if not merged:
            raise ValueError("the calendar has no working time within the horizon")
        self.starts = [m[0] for m in merged]
        self.ends = [m[1] for m in merged]
        self.cum: list[float] = []
        total = 0.0
        for s, e in merged:
            self.cum.append(total)
            total += e - s
        self.cum_end = [
            c + (e - s) for c, s, e in zip(self.cum, self.starts, self.ends, strict=True)
        ]
        self.n = len(merged)

    def next_open(self, t: float) -> float:
        """The first open moment at or after t."""
        i = bisect_right(self.ends, t)
        if i == self.n:
            return t
        s = self.starts[i]
        return s if s > t else t

    def add(self, t: float, work: float) -> float:
        """When `work` working minutes started (or resumed) at t are done."""
        i = bisect_right(self.ends, t)
        if i == self.n:
            return t + work
        s = self.starts[i]
        target = self.cum[i] + (t - s if t > s else 0.0) + work
        j = bisect_left(self.cum_end, target, i)
        if j == self.n:
            return self.ends[-1] + (target - self.cum_end[-1])
        return self.starts[j] + (target - self.cum[j])


def compile_calendar(
    calendar: ShiftCalendar,
    start: dt.datetime,
    tz: str | dt.tzinfo = "UTC",
    horizon_days: int = HORIZON_DAYS,
) -> WorkingTime | None:
    """The calendar's open intervals in minutes from `start` (an aware datetime), in
    the site's time zone (shifts follow the wall clock across daylight-saving changes).
    None for a round-the-clock calendar: the engine then skips calendar arithmetic."""
    if start.tzinfo is None:
        raise ValueError("the forecast start must carry a time zone")
    if calendar.always_open:
        return None
    zone = zoneinfo.ZoneInfo(tz) if isinstance(tz, str) else tz
    local_start = start.astimezone(zone)
    start_utc = start.astimezone(UTC)
    intervals: list[tuple[float, float]] = []
    shifts = [s.minutes() for s in calendar.shifts]
    for offset in range(-1, horizon_days + 1):
        day = local_start.date() + dt.timedelta(days=offset)
        if day.weekday() not in calendar.weekdays or day in calendar.holidays:
            continue
        midnight = dt.datetime.combine(day, dt.time(0, 0))
        for s, e in shifts:
            a = (midnight + dt.timedelta(minutes=s)).replace(tzinfo=zone).astimezone(UTC)
            b = (midnight + dt.timedelta(minutes=e)).replace(tzinfo=zone).astimezone(UTC)
            intervals.append(
                ((a - start_utc).total_seconds() / 60.0, (b - start_utc).total_seconds() / 60.0)
            )
    return WorkingTime(intervals)
