"""Use cases for plant data: start a lot of panels on a released routing."""

from __future__ import annotations

from django.db import transaction
from django.utils import timezone

from routing.models import RoutingRevision
from routing.services import library_of, lot_step_fields
from shopfloor.audit import services as audit
from shopfloor.errors import Conflict, InvalidInput
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot, Panel, PanelImage


def create_lot(
    *,
    actor: object | None,
    code: str,
    routing_revision: RoutingRevision,
    images: list[tuple[Job, int]],
    panels: int,
    priority: int = 100,
    split_from: Lot | None = None,
) -> Lot:
    """A lot of `panels` panels, each carrying `images` (job, images per panel).

    The lot's steps are copied from the released revision now; that snapshot is what the
    lot runs on (later revisions never touch it unless an engineer moves the lot).
    """
    if not routing_revision.is_released:
        raise Conflict("Lots can only start on a released routing revision.")
    if panels < 1:
        raise InvalidInput("A lot needs at least one panel.")
    if not images:
        raise InvalidInput("A lot's panels must carry at least one job's images.")
    with transaction.atomic():
        lot = Lot.objects.create(
            code=code,
            routing_revision=routing_revision,
            priority=priority,
            split_from=split_from,
            panel_count=panels,
        )
        for n in range(1, panels + 1):
            panel = Panel.objects.create(serial=f"{code}-P{n:02d}", lot=lot)
            PanelImage.objects.bulk_create(
                [PanelImage(panel=panel, job=job, count=count) for job, count in images]
            )
        library = library_of(routing_revision)
        steps = [
            LotStep(lot=lot, position=(i + 1) * 10, **lot_step_fields(rstep, library))
            for i, rstep in enumerate(
                routing_revision.steps.select_related("revision").order_by("seq")
            )
        ]
        if steps:
            steps[0].arrived_at = timezone.now()
        LotStep.objects.bulk_create(steps)
        audit.record(
            actor=actor,
            action="lot.created",
            object_type="lot",
            object_id=lot.pk,
            after={
                "code": code,
                "routing_revision": routing_revision.pk,
                "panels": panels,
                "jobs": [j.number for j, _ in images],
            },
        )
        return lot
