"""The wall board: the supervisor board for a 1080p screen read from across the room.

No controls: what it shows comes from the URL (the board's own filters, plus `seconds`,
`lots` and `empty`) and the site settings (SiteSettings.wall_page_seconds and
wall_lots_per_center). Only work centers with work are shown unless `empty=1`; each
lists at most `lots` lots, the rest as "+N more"; when the centers do not fit one
screen, the page script (static/js/wall.js) splits them into pages that fit and turns
to the next page every `seconds` seconds.

It reads the same board as the desk (shopfloor/quality/read/board.py, the same fixed
number of queries), so the counts, risk words, alerts and forecasts agree with the desk.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

from shopfloor.access import Scope
from shopfloor.errors import InvalidInput
from shopfloor.quality.read.board import Board, BoardColumn, BoardFilters, build_board

#: Limits of the URL parameters (the site settings' admin validators say the same).
SECONDS_RANGE = (5, 600)
LOTS_RANGE = (1, 40)
#: Alerts the wall lists above the centers (one line each; the count says how many).
WALL_ALERTS = 3


@dataclass(frozen=True)
class WallOptions:
    """The wall's own URL parameters; None means "the site's setting"."""

    seconds: int | None = None
    lots: int | None = None
    show_empty: bool = False

    def as_query(self) -> dict[str, str]:
        raw = {
            "seconds": str(self.seconds) if self.seconds else "",
            "lots": str(self.lots) if self.lots else "",
            "empty": "1" if self.show_empty else "",
        }
        return {k: v for k, v in raw.items() if v}


def _bounded(params: Any, name: str, bounds: tuple[int, int], what: str) -> int | None:
    raw = (params.get(name, "") or "").strip()
    if not raw:
        return None
    low, high = bounds
    if not raw.isdigit() or not low <= int(raw) <= high:
        raise InvalidInput(
            f"{name}={raw!r} is not allowed: {what} is a whole number from {low} to {high}.",
            problems=[{"field": name, "value": raw, "allowed": f"{low}-{high}"}],
        )
    return int(raw)


def parse_wall_options(params: Any) -> WallOptions:
    """Read `seconds`, `lots` and `empty` from the URL; a bad value says what is allowed."""
    empty = (params.get("empty", "") or "").strip().lower()
    if empty not in {"", "0", "1", "yes", "no"}:
        raise InvalidInput(f"empty={empty!r} is not allowed: use empty=1 to list idle centers.")
    return WallOptions(
        seconds=_bounded(params, "seconds", SECONDS_RANGE, "the time each page shows, in s"),
        lots=_bounded(params, "lots", LOTS_RANGE, "the lots listed per work center"),
        show_empty=empty in {"1", "yes"},
    )


@dataclass
class Wall:
    board: Board
    columns: list[BoardColumn]  # the centers shown, in work center order
    idle_centers: int  # centers with no lot, not shown (unless show_empty)
    seconds: int
    lots_per_center: int
    options: WallOptions

    @property
    def alerts(self) -> list[Any]:
        return self.board.alerts[:WALL_ALERTS]

    @property
    def more_alerts(self) -> int:
        return max(self.board.alert_count - WALL_ALERTS, 0)


def build_wall(
    scope: Scope, filters: BoardFilters, options: WallOptions, now: dt.datetime | None = None
) -> Wall:
    """The wall's view of the board: the busy centers, `lots` rows each, page length."""
    data = build_board(
        scope,
        filters,
        now,
        rows_per_center=options.lots or (lambda site: int(site.wall_lots_per_center)),
    )
    busy = [c for c in data.columns if c.count]
    columns = data.columns if options.show_empty else busy
    site = data.site
    return Wall(
        board=data,
        columns=columns,
        idle_centers=0 if options.show_empty else len(data.columns) - len(busy),
        seconds=options.seconds or int(site.wall_page_seconds),
        lots_per_center=options.lots or int(site.wall_lots_per_center),
        options=options,
    )
