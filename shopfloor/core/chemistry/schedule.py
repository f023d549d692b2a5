"""When a bath analysis falls due: per shift, daily, or every N amp-hours.

Why: the lab works to a plan, and the board must show which analyses are due and which
are overdue without anyone doing date arithmetic. An analysis is *due* from the moment
its interval has passed, and *overdue* once a grace of a quarter of the interval has
also passed (so a shift's analysis taken a little late is due, not yet an alarm).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta

SHIFT_HOURS = 8.0  # a three-shift day (common practice); the site may set its own
GRACE_FRACTION = 0.25

INTERVALS = {"per_shift": timedelta(hours=SHIFT_HOURS), "daily": timedelta(days=1)}


@dataclass(frozen=True)
class Due:
    """state: "ok", "due" or "overdue"; `due_at` for time-based plans; for amp-hour plans
    `amp_hours_left` (negative once past)."""

    state: str
    due_at: datetime | None
    amp_hours_left: float | None

    @property
    def late(self) -> bool:
        return self.state in ("due", "overdue")


def analysis_due(
    frequency: str,
    *,
    last_taken_at: datetime,
    now: datetime,
    every_amp_hours: float | None = None,
    last_amp_hours: float | None = None,
    amp_hours_now: float | None = None,
    shift_hours: float = SHIFT_HOURS,
) -> Due:
    """The state of one plan parameter's next analysis.

    `last_taken_at` is the last analysis (or the tank's make-up or creation when it was
    never analysed). An amp-hour plan with no counter readings falls back to daily, so a
    tank whose rectifier is not read is never silently forgotten.
    """
    if frequency == "amp_hours" and every_amp_hours and amp_hours_now is not None:
        passed = amp_hours_now - (last_amp_hours or 0.0)
        left = every_amp_hours - passed
        if passed >= every_amp_hours * (1 + GRACE_FRACTION):
            return Due("overdue", None, left)
        if passed >= every_amp_hours:
            return Due("due", None, left)
        return Due("ok", None, left)
    if frequency == "per_shift":
        interval = timedelta(hours=shift_hours)
    elif frequency in INTERVALS:
        interval = INTERVALS[frequency]
    elif frequency == "amp_hours":
        interval = INTERVALS["daily"]
    else:
        raise ValueError(f"unknown frequency {frequency!r}; allowed: per_shift, daily, amp_hours")
    due_at = last_taken_at + interval
    if now >= due_at + interval * GRACE_FRACTION:
        return Due("overdue", due_at, None)
    if now >= due_at:
        return Due("due", due_at, None)
    return Due("ok", due_at, None)
