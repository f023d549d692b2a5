"""Finding lots and steps, locking a step with its lot, and the checks every floor use
case makes before it changes a step (workable, equipment usable).
"""

from __future__ import annotations

import logging
from datetime import timedelta
from typing import Any

from django.db.models import Exists, OuterRef

from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import (
    LotStep,
)
from shopfloor.plant.models import (
    Equipment,
    Lot,
)
from shopfloor.quality.models import Hold

log = logging.getLogger("shopfloor.floor")


# A reading's capture time may lag its recording (offline tablet) but not by days,
# and may not be in the future beyond clock skew.
MAX_CAPTURE_AGE = timedelta(hours=24)
MAX_CLOCK_SKEW = timedelta(minutes=5)


# --- lookups ------------------------------------------------------------------------


def find_lot(code: str) -> Lot:
    code = (code or "").strip()
    if not code:
        raise InvalidInput("Scan or type a lot code.")
    lot = Lot.objects.select_related("routing_revision").with_code(code).first()
    if lot is None:
        raise NotFound(f"No lot with code {code!r}. Check the traveller label and scan again.")
    return lot


def find_current_step(code: str) -> LotStep:
    """The current step of the lot with this code, with its lot and work center (one query).

    Raises NotFound for an unknown lot and Conflict for a lot with no open step.
    """
    step = LotStep.objects.current_for_code(code)
    if step is None:
        lot = find_lot(code)  # says why: no code, no such lot, or nothing left to do
        raise Conflict(f"Lot {lot.code} has no open step (it is {lot.get_status_display()}).")
    return step


def lock_step(lot_step_id: int) -> tuple[LotStep, Lot]:
    """Lock the step and its lot (one query) and note whether an earlier step is open."""
    earlier_open = LotStep.objects.filter(
        lot_id=OuterRef("lot_id"), position__lt=OuterRef("position")
    ).open()
    step = (
        LotStep.objects.select_related("lot")
        .select_for_update(no_key=True, of=("self", "lot"))
        .annotate(earlier_step_open=Exists(earlier_open))
        .filter(pk=lot_step_id)
        .first()
    )
    if step is None:
        raise NotFound(f"No lot step {lot_step_id}.")
    return step, step.lot


def require_workable(
    step: LotStep, lot: Lot, *, held_step_readings: bool = False, held_here: bool | None = None
) -> None:
    """Refuse work on a held, finished or not-current step.

    `held_step_readings`: a held lot still takes readings and corrections at the step
    whose reading put it on hold (the rest of the sample set, so quality sees the whole
    set, and corrections of typing slips); the hold itself stays until a disposition.
    Costs one query, and only when the lot is on hold (none when the caller already
    knows whether an open hold names this step: `held_here`).
    """
    if lot.on_hold and not (held_step_readings and _held_here(step, lot, held_here)):
        raise Conflict(
            f"Lot {lot.code} is on hold. It cannot be worked until quality dispositions the "
            "nonconformance."
        )
    if lot.status in {Lot.Status.COMPLETE, Lot.Status.SCRAPPED}:
        raise Conflict(f"Lot {lot.code} is {lot.get_status_display().lower()}; nothing to do.")
    if not step.is_open or getattr(step, "earlier_step_open", True):
        current = LotStep.objects.current_for(lot)  # only to say where the lot is
        where = f"'{current.name}' at {current.work_center.name}" if current else "none"
        raise Conflict(
            f"'{step.name}' is not the lot's current step. The lot is at {where}; steps run "
            "in routing order."
        )


def _held_here(step: LotStep, lot: Lot, known: bool | None) -> bool:
    if known is not None:
        return known
    return Hold.objects.filter(lot=lot, lot_step=step, released_at__isnull=True).exists()


def step_state(step: LotStep) -> dict[str, Any]:
    return {
        "status": step.status,
        "started_at": step.started_at,
        "completed_at": step.completed_at,
        "equipment": step.equipment_id,
    }


def usable_equipment(equipment_id: int, work_center_id: int) -> Equipment:
    equipment = Equipment.objects.filter(pk=equipment_id).first()
    return check_equipment(equipment, equipment_id, work_center_id)


def check_equipment(
    equipment: Equipment | None, equipment_id: int, work_center_id: int
) -> Equipment:
    """Refuse an unknown gauge, one of another work center, or one past calibration."""
    if equipment is None:
        raise InvalidInput(f"No equipment with id {equipment_id}.")
    if equipment.work_center_id != work_center_id:
        raise InvalidInput(f"{equipment.code} belongs to another work center.")
    if not equipment.calibration_current():
        due = equipment.calibration_due
        raise NotAllowed(
            f"{equipment.code} is past its calibration due date"
            f"{f' ({due:%Y-%m-%d})' if due else ''} and cannot be used for readings. "
            "Use a calibrated gauge or ask the metrology lab."
        )
    return equipment
