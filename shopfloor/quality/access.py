"""Who may read what on the board and the quality pages (one place for read scoping).

Quality engineers, supervisors, process engineers and administrators read everything.
Operators read the lots that are at, or have been at, one of their own work centers
(Person.work_centers): a step there has arrived. Anyone else is refused with a reason,
so a person who lands on a quality page without a role learns whom to ask.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from django.db.models import Exists, OuterRef, QuerySet

from shopfloor.errors import NotAllowed
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, Person, Role

FULL_READ_ROLES = frozenset(
    {Role.SUPERVISOR, Role.QUALITY_ENGINEER, Role.PROCESS_ENGINEER, Role.ADMIN}
)
REORDER_ROLES = frozenset({Role.SUPERVISOR, Role.ADMIN})


@dataclass(frozen=True)
class Scope:
    """What one reader may see: everything, or the lots at a set of work centers."""

    person: Person
    roles: frozenset[str]
    sees_all: bool
    work_center_ids: frozenset[int]

    def sees_work_center(self, work_center_id: int | None) -> bool:
        return self.sees_all or (work_center_id in self.work_center_ids)

    @property
    def may_reorder(self) -> bool:
        return bool(self.roles & REORDER_ROLES)


def scope_for(user: Any) -> Scope:
    """The read scope of a signed-in user; NotAllowed (403) with the reason otherwise."""
    if user is None or not getattr(user, "is_authenticated", False):
        raise NotAllowed("Sign in with your badge to see the board and quality records.")
    try:
        person = user.person  # cached on the user, so templates reuse it without a query
    except Person.DoesNotExist:
        person = None
    if person is None:
        raise NotAllowed(
            "This account has no badge on file, so it cannot see shop-floor records. "
            "Ask an administrator to add your badge and role."
        )
    roles = frozenset(user.groups.values_list("name", flat=True))
    if roles & FULL_READ_ROLES:
        return Scope(person, roles, True, frozenset())
    if Role.OPERATOR in roles:
        centers = frozenset(person.work_centers.values_list("pk", flat=True))
        return Scope(person, roles, False, centers)
    raise NotAllowed(
        "Your account has no shop-floor role (operator, supervisor, process engineer, quality "
        "engineer or administrator), so lot records are not shown. Ask an administrator to "
        "give you a role."
    )


def visible_lots(scope: Scope, lots: QuerySet[Lot] | None = None) -> QuerySet[Lot]:
    """Lots the reader may see: all of them, or those that reached one of their centers."""
    qs = lots if lots is not None else Lot.objects.all()
    if scope.sees_all:
        return qs
    reached = LotStep.objects.filter(
        lot=OuterRef("pk"), work_center_id__in=scope.work_center_ids, arrived_at__isnull=False
    )
    return qs.filter(Exists(reached))


def require_lot_visible(scope: Scope, lot: Lot) -> None:
    """Refuse (403) a lot outside an operator's work centers, saying why."""
    if scope.sees_all:
        return
    if not visible_lots(scope, Lot.objects.filter(pk=lot.pk)).exists():
        raise NotAllowed(
            f"Lot {lot.code} has not been at any of your work centers. Operators see the lots "
            "at their own work centers; ask a supervisor or quality engineer for this record."
        )


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


#: Roles that may see and unlock locked badges (the unlock service checks the same).
UNLOCK_ROLES = frozenset({Role.SUPERVISOR, Role.ADMIN})


def require_unlocker(scope: Scope) -> None:
    """Refuse (403) anyone but a supervisor or administrator, saying whom to ask."""
    if not (scope.roles & UNLOCK_ROLES or scope.person.user.is_superuser):
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
