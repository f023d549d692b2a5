"""Record look-ups for the quality and floor pages, each through the one read-scope rule.

The rules themselves (who is an administrator, which lots a role reads, who may unlock a
badge) live in `shopfloor.access`; this module finds an NCR, a series or a locked badge
and asks those rules before handing it to a view.
"""

from __future__ import annotations

from typing import Any

from django.db.models import QuerySet

from shopfloor.access import Scope, require_lot_visible, require_unlocker
from shopfloor.errors import NotAllowed, NotFound
from shopfloor.plant.models import Person
from shopfloor.quality.models import Nonconformance, SeriesState


def access_ncr(scope: Scope, number: str) -> Any:
    """The NCR with this number if the reader may see its lot (404 / 403 with a reason)."""
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
    series = SeriesState.objects.filter(key=key).first()
    if series is None:
        raise NotFound(
            f"SPC series {key!r} is not stored yet (its readings have not been charted by the "
            "SPC worker), so its limits cannot be set. Pick a stored series from the SPC list."
        )
    if not scope.sees_work_center(series.work_center_id):
        raise NotAllowed("This series belongs to a work center that is not yours.")
    return series


def locked_badges(scope: Scope) -> QuerySet[Person]:
    """Locked badges, for a supervisor or administrator only."""
    require_unlocker(scope)
    return Person.objects.filter(locked_at__isnull=False).order_by("locked_at", "badge_number")


def access_locked_person(scope: Scope, person_id: int) -> Person:
    """A badge to unlock (404 when there is no such person), for unlockers only."""
    require_unlocker(scope)
    person = Person.objects.filter(pk=person_id).first()
    if person is None:
        raise NotFound(f"No badge with id {person_id}; reload the list of locked badges.")
    return person
