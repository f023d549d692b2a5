"""Use cases of the floor: badge login, PIN checks, starting, recording and completing steps.

Each public function is one use case, owns its transaction, locks the rows that a
concurrent request could change, writes its audit entry and (for readings) its outbox
event in the same transaction. The tablet views and the API call these functions only.
"""

from __future__ import annotations

import logging
from typing import Any

from django.db import transaction
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.audit.models import Signature
from shopfloor.chemistry.services import record_tank_use
from shopfloor.errors import Conflict, InvalidInput

# The floor's use cases live in small modules; this module keeps the step use cases and
# re-exports the rest, so `services.X` stays the one name callers use. People (badge,
# PIN, qualification) live with the plant app: shopfloor.plant.people.
from shopfloor.floor.lookups import (
    MAX_CAPTURE_AGE,
    MAX_CLOCK_SKEW,
    find_current_step,
    find_lot,
    lock_step,
    require_workable,
    step_state,
    usable_equipment,
)
from shopfloor.floor.materials import (
    material_label,
    material_usability,
    missing_materials,
    record_material,
    usable_material_lots,
    use_material,
)
from shopfloor.floor.models import (
    LotStep,
    Reading,
)
from shopfloor.floor.quantities import (
    FINAL_INSPECTION,
    boards_scrapped_on_live_panels,
    is_final_inspection,
    lot_good_boards,
    lot_yields,
    panel_good_boards,
    record_acceptance,
    record_scrap,
    require_acceptance,
    scrap_panel_boards,
    scrap_reason,
)
from shopfloor.floor.readings import (
    ConfirmationNeeded,
    ReadingInput,
    correct_reading,
    missing_readings,
    parse_reading,
    quantity_plan,
    record_reading,
    window_for,
)
from shopfloor.plant.models import (
    Lot,
    MaterialLot,
    Person,
)
from shopfloor.plant.people import check_assigned, check_qualified, verify_pin

__all__ = [
    "FINAL_INSPECTION",
    "MAX_CAPTURE_AGE",
    "MAX_CLOCK_SKEW",
    "ConfirmationNeeded",
    "ReadingInput",
    "boards_scrapped_on_live_panels",
    "complete_step",
    "correct_reading",
    "find_current_step",
    "find_lot",
    "is_final_inspection",
    "lock_step",
    "lot_good_boards",
    "lot_yields",
    "material_label",
    "material_usability",
    "missing_materials",
    "missing_readings",
    "panel_good_boards",
    "parse_reading",
    "pause_step",
    "quantity_plan",
    "record_acceptance",
    "record_material",
    "record_reading",
    "record_scrap",
    "require_acceptance",
    "require_workable",
    "scrap_panel_boards",
    "scrap_reason",
    "start_step",
    "step_content",
    "step_state",
    "usable_equipment",
    "usable_material_lots",
    "use_material",
    "window_for",
]

log = logging.getLogger("shopfloor.floor")


# --- steps --------------------------------------------------------------------------


def start_step(
    *,
    person: Person,
    lot_step_id: int,
    equipment_id: int | None = None,
    material_lot_ids: list[int] | None = None,
) -> LotStep:
    """Begin (or resume) work on the lot's current step."""
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        require_workable(step, lot)
        check_qualified(person, step.work_center_id)
        if step.status == LotStep.Status.IN_PROGRESS:
            raise Conflict(f"'{step.name}' is already in progress.")
        before = step_state(step)
        if equipment_id is not None:
            step.equipment = usable_equipment(equipment_id, step.work_center_id)
        now = timezone.now()
        if step.started_at is None:
            step.started_at = now
            step.started_by = person
        step.status = LotStep.Status.IN_PROGRESS
        step.save()
        # Which tank(s) a wet step ran in, so an out-of-window bath analysis can list it.

        record_tank_use(step, step.started_at)
        if material_lot_ids:
            found = {m.pk: m for m in MaterialLot.objects.filter(pk__in=material_lot_ids)}
            unknown = sorted(set(material_lot_ids) - set(found))
            if unknown:
                raise InvalidInput(
                    f"Material lot id(s) {unknown} are not on record.",
                    problems=[{"field": "material_lots", "value": unknown}],
                )
            for material_id in dict.fromkeys(material_lot_ids):
                use_material(step, found[material_id], person, "api")
        if lot.status == Lot.Status.NOT_STARTED:
            lot.status = Lot.Status.IN_PROCESS
            lot.started_at = now
            lot.save(update_fields=["status", "started_at"])
        audit.record(
            actor=person.user,
            action="step.started",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after=step_state(step),
        )
        return step


def pause_step(*, person: Person, lot_step_id: int, reason: str = "") -> LotStep:
    with transaction.atomic():
        step, _lot = lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"'{step.name}' is not in progress, so it cannot be paused.")
        before = step_state(step)
        step.status = LotStep.Status.PAUSED
        step.save(update_fields=["status"])
        audit.record(
            actor=person.user,
            action="step.paused",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after={**step_state(step), "reason": reason},
        )
        return step


def _step_content(step: LotStep) -> dict[str, Any]:
    readings = list(
        Reading.objects.filter(lot_step=step, superseded_by__isnull=True)
        .order_by("pk")
        .values_list("pk", "quantity", "sample_index", "value")
    )
    return {
        "lot": step.lot_id,
        "position": step.position,
        "code": step.code,
        "started_at": step.started_at,
        "completed_at": step.completed_at,
        "completed_by": step.completed_by_id,
        "equipment": step.equipment_id,
        "readings": [list(r) for r in readings],
    }


def step_content(step: LotStep) -> dict[str, Any]:
    """The signed content of a step (used to verify its signature later)."""
    return _step_content(step)


def complete_step(
    *, person: Person, lot_step_id: int, pin: str, meaning: str = "performed_by"
) -> LotStep:
    """Sign off the current step (PIN re-entry) and move the lot to its next step."""

    if meaning not in {Signature.Meaning.PERFORMED, Signature.Meaning.VERIFIED}:
        raise InvalidInput("A step is signed as 'performed_by' or 'verified_by'.")
    verify_pin(person, pin)
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        if step.status == LotStep.Status.DONE:
            raise Conflict(f"'{step.name}' was already signed off by someone else.")
        require_workable(step, lot)
        check_qualified(person, step.work_center_id)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before signing it off.")
        missing = missing_readings(step)
        if missing:
            raise Conflict(
                "This step cannot be completed yet; readings missing: " + "; ".join(missing),
                problems=[{"field": "readings", "missing": missing}],
            )
        lacking = missing_materials(step)
        if lacking:
            raise Conflict(
                "This step cannot be completed yet; scan the material lot used for: "
                + ", ".join(lacking)
                + ".",
                problems=[{"field": "materials", "missing": lacking}],
            )
        require_acceptance(step)
        before = step_state(step)
        now = timezone.now()
        step.status = LotStep.Status.DONE
        step.completed_at = now
        step.completed_by = person
        sig = audit.sign(
            person=person,
            meaning=meaning,
            record_type="lot_step",
            record_id=step.pk,
            content=_step_content(step),
        )
        step.signature = sig
        step.save()
        nxt = LotStep.objects.current_for(lot)
        if nxt is None:
            lot.status = Lot.Status.COMPLETE
            lot.completed_at = now
            lot.save(update_fields=["status", "completed_at"])
        else:
            nxt.arrived_at = now
            nxt.save(update_fields=["arrived_at"])
        audit.record(
            actor=person.user,
            action="step.completed",
            object_type="lot_step",
            object_id=step.pk,
            before=before,
            after={**step_state(step), "signature": sig.pk, "next": nxt.code if nxt else None},
        )
        return step
