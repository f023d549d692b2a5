"""Record look-ups for the board and quality pages, each through the one read-scope rule.

The rules themselves (who is an administrator, which lots a role reads) live in
`shopfloor.access`; this module finds an NCR, a series or a locked badge and asks those
rules before handing it to a view. The names re-exported below keep older imports working.
"""

from __future__ import annotations

from typing import Any

from django.db.models import QuerySet

from shopfloor.access import (
    FULL_READ_ROLES,
    REORDER_ROLES,
    UNLOCK_ROLES,
    Scope,
    is_admin,
    lot_visible,
    require_lot_visible,
    scope_for,
    visible_lots,
)
from shopfloor.errors import NotAllowed
from shopfloor.plant.models import Person

__all__ = [
    "FULL_READ_ROLES",
    "REORDER_ROLES",
    "UNLOCK_ROLES",
    "Scope",
    "access_locked_person",
    "access_ncr",
    "access_series",
    "is_admin",
    "locked_badges",
    "lot_visible",
    "require_lot_visible",
    "require_unlocker",
    "scope_for",
    "visible_lots",
]


def access_ncr(scope: Scope, number: str) -> Any:
    """The NCR with this number if the reader may see its lot (404 / 403 with a reason)."""
    from shopfloor.errors import NotFound
    from shopfloor.quality.models import Nonconformance

    number = (number or "").strip()
    ncr = (
        Nonconformance.objects.select_related(
            "lot",
            "lot_step__work_center",
            "alert",
            "scrap_lot",
            "disposition_signature__signer",
        )
        .filter(number__iexact=number)
        .first()
    )
    if ncr is None:
        raise NotFound(f"No nonconformance {number!r}. Open NCRs are listed on the quality page.")
    require_lot_visible(scope, ncr.lot)
    return ncr


def access_series(scope: Scope, key: str) -> Any:
    """The stored SPC series with this key, if the reader may see its work center."""
    from shopfloor.errors import NotFound
    from shopfloor.quality.models import SeriesState

    series = SeriesState.objects.filter(key=key).first()
    if series is None:
        raise NotFound(
            f"SPC series {key!r} is not stored yet (its readings have not been charted by the "
            "SPC worker), so its limits cannot be set. Pick a stored series from the SPC list."
        )
    if not scope.sees_work_center(series.work_center_id):
        raise NotAllowed("This series belongs to a work center that is not yours.")
    return series


def require_unlocker(scope: Scope) -> None:
    """Refuse (403) anyone but a supervisor or administrator, saying whom to ask."""
    if not scope.roles & UNLOCK_ROLES:
        raise NotAllowed(
            "Only a supervisor or administrator can see and unlock locked badges. Ask the "
            "shift supervisor to unlock yours."
        )


def locked_badges(scope: Scope) -> QuerySet[Person]:
    """Locked badges, for a supervisor or administrator only."""
    require_unlocker(scope)
    return Person.objects.filter(locked_at__isnull=False).order_by("locked_at", "badge_number")


def access_locked_person(scope: Scope, person_id: int) -> Person:
    """A badge to unlock (404 when there is no such person), for unlockers only."""
    from shopfloor.errors import NotFound

    require_unlocker(scope)
    person = Person.objects.filter(pk=person_id).first()
    if person is None:
        raise NotFound(f"No badge with id {person_id}; reload the list of locked badges.")
    return person
