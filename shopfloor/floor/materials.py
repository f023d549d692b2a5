"""Materials consumed by a step: usability (shelf life, expiry) and recording the
material lot used.
"""

from __future__ import annotations

import datetime as dt
import logging
from typing import Any

from django.db import transaction
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.core import materials as materials_core
from shopfloor.errors import Conflict, InvalidInput
from shopfloor.floor.lookups import lock_step, require_workable
from shopfloor.floor.models import (
    LotStep,
    MaterialUse,
    ShelfLife,
)
from shopfloor.plant.models import (
    MaterialLot,
    Person,
)
from shopfloor.plant.people import check_assigned

log = logging.getLogger("shopfloor.floor")


# --- materials ----------------------------------------------------------------------


def material_label(kind: str) -> str:
    return str(dict(MaterialLot.Kind.choices).get(kind, kind.replace("_", " ")))


def material_usability(
    material: MaterialLot, shelf_lives: dict[str, int] | None = None
) -> materials_core.Usability:
    """Shelf life and expiry of a material lot today (site shelf lives from the admin;
    pass `shelf_lives` when checking many lots, to read them once)."""
    if shelf_lives is None:
        shelf = ShelfLife.objects.filter(kind=material.kind).values_list("days", flat=True).first()
    else:
        shelf = shelf_lives.get(material.kind)
    facts = materials_core.MaterialFacts(
        code=material.code,
        kind=material.kind,
        kind_label=material_label(material.kind),
        received_on=material.received_on,
        expires_on=material.expires_on,
    )
    return materials_core.usability(facts, timezone.localdate(), shelf)


def missing_materials(step: LotStep) -> list[str]:
    """The material kinds the step consumes that have no material lot recorded yet."""
    if not step.materials:
        return []
    have = set(MaterialUse.objects.filter(lot_step=step).values_list("kind", flat=True))
    return [material_label(k) for k in step.materials if k not in have]


def use_material(step: LotStep, material: MaterialLot, person: Person, via: str) -> MaterialUse:
    """Check and record one material lot at a step (the caller holds the step's lock)."""
    wanted = list(step.materials or [])
    if material.kind not in wanted and material.kind != MaterialLot.Kind.OTHER:
        allowed = ", ".join(material_label(k) for k in wanted) or "none (it consumes no material)"
        raise InvalidInput(
            f"{material.code} is {material_label(material.kind).lower()}, which '{step.name}' "
            f"does not use. This step takes: {allowed}.",
            problems=[{"field": "material_lot", "value": material.code, "allowed": allowed}],
        )
    check = material_usability(material)
    if not check.usable:
        raise Conflict(check.reason, problems=[{"field": "material_lot", "value": material.code}])
    use = MaterialUse.objects.filter(lot_step=step, material_lot=material).first()
    if use is not None:
        return use
    use = MaterialUse.objects.create(
        lot_step=step, material_lot=material, kind=material.kind, recorded_by=person, via=via
    )
    step.material_lots.add(material)  # the recall and genealogy pages read this link
    audit.record(
        actor=person.user,
        action="material.used",
        object_type="lot_step",
        object_id=step.pk,
        after={
            "lot": step.lot.code,
            "step": step.code,
            "material_lot": material.code,
            "kind": material.kind,
            "expires_on": check.expires_on,
        },
    )
    return use


def record_material(
    *, person: Person, lot_step_id: int, code: str, via: str = "tablet"
) -> MaterialUse:
    """An operator scans (or picks) the material lot a step consumes.

    Refused with the reason: an unknown code, a kind the step does not use, a lot past
    its expiry or shelf life (or whose age cannot be checked). The use is recorded per
    lot step, so a recall (material lot -> lots -> jobs -> customers) is complete.
    """
    code = (code or "").strip()
    if not code:
        raise InvalidInput("Scan or type the material lot code from its label.")
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        require_workable(step, lot)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording the material used.")
        material = MaterialLot.objects.filter(code__iexact=code).first()
        if material is None:
            raise InvalidInput(
                f"No material lot {code!r} is on record. Check the label; a lot stores has "
                "not received cannot be used.",
                problems=[{"field": "material_lot", "value": code}],
            )
        return use_material(step, material, person, via)


def usable_material_lots(step: LotStep) -> dict[str, list[tuple[MaterialLot, str]]]:
    """Per material kind the step consumes: the lots on record that may be used today,
    soonest expiry first (first expired, first out: common practice for shelf-life
    materials), each with its expiry text (for the tablet's pick list)."""
    out: dict[str, list[tuple[MaterialLot, str, Any]]] = {k: [] for k in step.materials or []}
    if not out:
        return {}
    shelf_lives = dict(ShelfLife.objects.values_list("kind", "days"))
    for m in MaterialLot.objects.filter(kind__in=list(out)).order_by("code")[:500]:
        check = material_usability(m, shelf_lives)
        if check.usable:
            when = f"use by {check.expires_on:%Y-%m-%d}" if check.expires_on else "no expiry"
            out[m.kind].append((m, when, check.expires_on))
    return {
        kind: [
            (m, when)
            for m, when, _ in sorted(rows, key=lambda r: (r[2] is None, r[2] or dt.date.max))
        ]
        for kind, rows in out.items()
    }
