"""Who may read what: the ONE read-scope rule for every page and API endpoint.

Every view and API view that shows a lot (or anything hanging off a lot: its steps,
readings, windows, traveller, history, exports, NCRs, SPC points) asks this module; no view
decides visibility by itself. The rules:

- **Administrator** means one thing everywhere: a superuser, or a member of the ``admin``
  group (`is_admin`). `roles_of` counts a superuser as ``admin``, so every role check in the
  services, the API permissions and the pages treats both alike.
- **Read scope by role** (`READ_SCOPE_BY_ROLE`): supervisors, quality and process
  engineers, planners, lab technicians and administrators read every lot; operators read
  the lots that are at, or have been at, one of the work centers on their badge (a step
  there has arrived). A person with several roles gets the widest scope. Anyone else is
  refused with a reason.
  A new role adds one row to the table (and one column to tests/test_role_matrix.py).
- **Signing and changing** need a badge (a Person): `Scope.actor` refuses an account
  without one, with a reason, while still letting it read what its role may read.

Data-dependent *write* rules (an operator works only at the work centers on the badge;
qualification and calibration) stay in the services and in
`shopfloor.floor.permissions.check_work_center`; they use `roles_of` from here.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum
from typing import Any

from django.db.models import Exists, OuterRef, Q, QuerySet

from shopfloor.errors import NotAllowed
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, Person, Role


class Reach(Enum):
    """How far a role reads: every lot, or the lots that reached the reader's centers."""

    ALL = "all"
    OWN_WORK_CENTERS = "own_work_centers"


#: The read scope of each role. A role missing here reads nothing.
READ_SCOPE_BY_ROLE: dict[str, Reach] = {
    Role.SUPERVISOR: Reach.ALL,
    Role.QUALITY_ENGINEER: Reach.ALL,
    Role.PROCESS_ENGINEER: Reach.ALL,
    Role.ADMIN: Reach.ALL,
    Role.PLANNER: Reach.ALL,
    # An out-of-window bath sends the lab to the lots it touched, on any work center.
    Role.LAB_TECHNICIAN: Reach.ALL,
    Role.OPERATOR: Reach.OWN_WORK_CENTERS,
}
FULL_READ_ROLES = frozenset(r for r, reach in READ_SCOPE_BY_ROLE.items() if reach is Reach.ALL)
READ_ROLES = frozenset(READ_SCOPE_BY_ROLE)
#: Roles that work lots on the floor (start, pause, complete, record readings).
FLOOR_ROLES = frozenset({Role.OPERATOR, Role.SUPERVISOR, Role.ADMIN})
#: Roles that enter jobs, release them to the floor and ship them.
PLAN_ROLES = frozenset({Role.PLANNER, Role.ADMIN})
#: Roles that author build specs, routings and design imports.
ENGINEER_ROLES = frozenset({Role.PROCESS_ENGINEER, Role.ADMIN})
#: "Supervisor or administrator": reorders queues, releases queue-time warnings, sees and
#: unlocks locked badges, records and signs at any work center. The one spelling of it.
SUPERVISING_ROLES = frozenset({Role.SUPERVISOR, Role.ADMIN})
REORDER_ROLES = SUPERVISING_ROLES
UNLOCK_ROLES = SUPERVISING_ROLES


def is_admin(user: Any) -> bool:
    """The one "is administrator" rule: a signed-in superuser or a member of ``admin``."""
    return Role.ADMIN in roles_of(user)


def has_role(person: Person, roles: frozenset[str] | set[str]) -> bool:
    """Whether a badge holds any of `roles` (a superuser counts as ``admin``)."""
    return bool(roles_of(person.user) & roles)


def is_supervising(person: Person) -> bool:
    """Supervisor or administrator (SUPERVISING_ROLES), superusers included."""
    return has_role(person, SUPERVISING_ROLES)


def require_role(person: Person, roles: frozenset[str], what: str) -> None:
    """Refuse (403) a badge without any of `roles`, naming the roles that may."""
    if not has_role(person, roles):
        who = ", ".join(sorted(r.replace("_", " ") for r in roles))
        raise NotAllowed(f"Only these roles may {what}: {who}.")


def holds_role_q(roles: frozenset[str], user_path: str = "user__") -> Q:
    """The same rule as `has_role`, as a filter on a query of people (or of anything with
    a user at `user_path`): a member of one of `roles`, or a superuser when ``admin`` is
    one of them. For checks that must stay inside one query."""
    q = Q(**{f"{user_path}groups__name__in": sorted(roles)})
    if Role.ADMIN in roles:
        q |= Q(**{f"{user_path}is_superuser": True})
    return q


def is_superuser(user: Any) -> bool:
    """The one superuser rule, for checks that must not query: a superuser is an
    administrator everywhere (`roles_of` adds ``admin`` for one, `holds_role_q` matches
    one when ``admin`` is among the roles)."""
    return bool(getattr(user, "is_superuser", False))


def roles_of(user: Any) -> frozenset[str]:
    """The role names of a user; a superuser counts as ``admin``. Empty when signed out."""
    if user is None or not getattr(user, "is_authenticated", False):
        return frozenset()
    names = set(user.groups.values_list("name", flat=True))
    if is_superuser(user):
        names.add(Role.ADMIN.value)
    return frozenset(names)


def person_of(user: Any) -> Person | None:
    """The badge (Person) of a user, or None (cached on the user, so no repeated query)."""
    try:
        return user.person  # type: ignore[no-any-return]
    except (Person.DoesNotExist, AttributeError):
        return None


@dataclass(frozen=True)
class Scope:
    """What one reader may see: everything, or the lots at a set of work centers."""

    person: Person | None
    roles: frozenset[str]
    sees_all: bool
    work_center_ids: frozenset[int]

    def sees_work_center(self, work_center_id: int | None) -> bool:
        return self.sees_all or (work_center_id in self.work_center_ids)

    @property
    def may_reorder(self) -> bool:
        return bool(self.roles & REORDER_ROLES)

    @property
    def is_admin(self) -> bool:
        return Role.ADMIN in self.roles

    @property
    def actor(self) -> Person:
        """The badge that signs a change; refused (403) for an account without one."""
        if self.person is None:
            raise NotAllowed(
                "This account has no badge on file, so it can read but not sign or change "
                "shop-floor records. Ask an administrator to add your badge."
            )
        return self.person


def scope_for(user: Any) -> Scope:
    """The read scope of a signed-in user; NotAllowed (403) with the reason otherwise."""
    if user is None or not getattr(user, "is_authenticated", False):
        raise NotAllowed("Sign in with your badge to see lots and their records.")
    roles = roles_of(user)
    person = person_of(user)
    reaches = {READ_SCOPE_BY_ROLE[r] for r in roles if r in READ_SCOPE_BY_ROLE}
    if Reach.ALL in reaches:
        return Scope(person, roles, True, frozenset())
    if Reach.OWN_WORK_CENTERS in reaches:
        if person is None:
            raise NotAllowed(
                "This operator account has no badge on file, so it has no work centers and "
                "cannot see lots. Ask an administrator to add your badge."
            )
        centers = frozenset(person.work_centers.values_list("pk", flat=True))
        return Scope(person, roles, False, centers)
    raise NotAllowed(
        "Your account has no shop-floor role (operator, supervisor, process engineer, quality "
        "engineer, planner, lab technician or administrator), so lot records are not shown. "
        "Ask an administrator to give you a role."
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


def lot_visible(scope: Scope, lot: Lot) -> bool:
    return scope.sees_all or visible_lots(scope, Lot.objects.filter(pk=lot.pk)).exists()


def require_lot_visible(scope: Scope, lot: Lot) -> None:
    """Refuse (403) a lot outside an operator's work centers, saying why."""
    if not lot_visible(scope, lot):
        raise NotAllowed(
            f"Lot {lot.code} has not been at any of your work centers. Operators see the lots "
            "at their own work centers; ask a supervisor or quality engineer for this record."
        )


def require_lot_readable(user: Any, lot: Lot) -> Scope:
    """The scope of `user` if it may read `lot` (403 with the reason otherwise)."""
    scope = scope_for(user)
    require_lot_visible(scope, lot)
    return scope


def require_unlocker(scope: Scope) -> None:
    """Refuse (403) anyone but a supervisor or administrator, saying whom to ask."""
    if not scope.roles & UNLOCK_ROLES:
        raise NotAllowed(
            "Only a supervisor or administrator can see and unlock locked badges. Ask the "
            "shift supervisor to unlock yours."
        )
