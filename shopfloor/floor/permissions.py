"""Who may call which API endpoint, in one place (the role matrix test reads the same rules).

Roles are Django groups (shopfloor.plant.models.Role); a superuser counts as admin (the
one rule, `shopfloor.access.roles_of`). Which lots a caller may *read* is decided by
`shopfloor.access` too (`require_lot_readable`), for the API exactly as for the pages.
Instrument tokens (request.auth is an InstrumentToken) may only post readings, and only
at their own work center. Data-dependent checks (the lot step's work center) are the
`check_*` helpers below, called by the API views before the one service call.
"""

from __future__ import annotations

from typing import Any

from rest_framework.permissions import BasePermission
from rest_framework.request import Request

from shopfloor.access import (
    ENGINEER_ROLES,
    FLOOR_ROLES,
    PLAN_ROLES,
    SUPERVISING_ROLES,
    roles_of,
)
from shopfloor.access import READ_ROLES as _READ_ROLES
from shopfloor.api_base import RolePermission, is_instrument
from shopfloor.errors import Conflict, NotAllowed, NotFound
from shopfloor.floor.models import InstrumentToken, LotStep, Reading

#: Roles that may read lot status, windows and routing previews (lots: within their scope).
READ_ROLES: frozenset[str] = _READ_ROLES
#: Operators are limited to the work centers on their badge; these roles are not.
ANY_WORK_CENTER_ROLES = SUPERVISING_ROLES


__all__ = ["READ_ROLES", "roles_of"]


class CanRead(RolePermission):
    """Lot status, windows and routing previews: every role, no instruments."""

    roles = READ_ROLES
    what = "read lots and preview routings"


class CanEngineer(RolePermission):
    """Author build specs, draft and release routings: process engineers (and admins)."""

    roles = ENGINEER_ROLES
    what = "author build specs and routings"


class CanPlan(RolePermission):
    """Enter jobs and release them to the floor: planners (and administrators)."""

    roles = PLAN_ROLES
    what = "enter and release jobs"


class CanWorkSteps(RolePermission):
    """Start, pause, complete steps and correct readings: floor roles only (people)."""

    roles = FLOOR_ROLES
    what = "work lot steps"


class CanPostReadings(BasePermission):
    """People with a floor role, or an instrument token (scoped to its work center later)."""

    message = "Only operators, supervisors, administrators or instruments may post readings."

    def has_permission(self, request: Request, view: Any) -> bool:
        if not request.user or not request.user.is_authenticated:
            return False
        if is_instrument(request):
            return True
        return bool(roles_of(request.user) & FLOOR_ROLES)


def check_work_center(request: Request, step: LotStep) -> None:
    """Refuse a step at a work center the caller is not assigned to.

    An instrument belongs to exactly one work center. An operator may only work at the
    work centers on their badge; supervisors and admins may work anywhere (the services
    still check qualification when a step is started or signed).
    """
    token = getattr(request, "auth", None)
    if isinstance(token, InstrumentToken):
        if token.work_center_id != step.work_center_id:
            raise NotAllowed(
                f"This instrument token belongs to {token.work_center.name}; the lot's step "
                f"'{step.name}' is at another work center."
            )
        return
    user = request.user
    if roles_of(user) & ANY_WORK_CENTER_ROLES:
        return
    person = getattr(user, "person", None)
    if person is None or not person.work_centers.filter(pk=step.work_center_id).exists():
        raise NotAllowed(
            f"You are not assigned to the work center of step '{step.name}'. Ask a supervisor "
            "to add it to your badge."
        )


def access_lot_step(request: Request, lot: Any, step_id: int | None) -> LotStep:
    """The lot step a request names (default: the lot's current step), if the caller may.

    Raises NotFound for a step of another lot, Conflict when the lot has no open step,
    NotAllowed when the step is at a work center the caller does not work at.
    """

    if step_id is None:
        step = LotStep.objects.current_for(lot)
        if step is None:
            raise Conflict(f"Lot {lot.code} has no open step (it is {lot.get_status_display()}).")
    else:
        step = LotStep.objects.select_related("work_center").filter(pk=step_id, lot=lot).first()
        if step is None:
            raise NotFound(f"Lot {lot.code} has no step with id {step_id}.")
    check_work_center(request, step)
    return step


def access_step(request: Request, step_id: int) -> LotStep:
    """A lot step by id, if the caller works at its work center."""

    step = LotStep.objects.select_related("work_center", "lot").filter(pk=step_id).first()
    if step is None:
        raise NotFound(f"No lot step with id {step_id}.")
    check_work_center(request, step)
    return step


def access_reading(request: Request, reading_id: int) -> Any:
    """A reading by id, if the caller works at its step's work center."""

    reading = Reading.objects.select_related("lot_step__work_center").filter(pk=reading_id).first()
    if reading is None:
        raise NotFound(f"No reading with id {reading_id}.")
    check_work_center(request, reading.lot_step)
    return reading
