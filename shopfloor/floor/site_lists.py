"""The starting site lists (scrap reasons, shelf lives, NCR root causes).

The lists themselves are the newest frozen version (site_lists_v1.py), the one the
migrations seeded; `ensure_site_lists` puts back any rows that are missing (an emptied
test database, a site that deleted every row), without touching the rows a site has
edited.
"""

from __future__ import annotations

from shopfloor.floor.models import ScrapReason, ShelfLife
from shopfloor.floor.site_lists_v1 import ROOT_CAUSES, SCRAP_REASONS, SHELF_LIVES
from shopfloor.quality.models import RootCause

__all__ = ["ROOT_CAUSES", "SCRAP_REASONS", "SHELF_LIVES", "ensure_site_lists"]


def ensure_site_lists() -> None:
    """Create the starting rows that are missing (never changes an existing row)."""

    for kind, days, note in SHELF_LIVES:
        ShelfLife.objects.get_or_create(kind=kind, defaults={"days": days, "note": note})
    for code, name in SCRAP_REASONS:
        ScrapReason.objects.get_or_create(code=code, defaults={"name": name})
    for code, name in ROOT_CAUSES:
        RootCause.objects.get_or_create(code=code, defaults={"name": name})
