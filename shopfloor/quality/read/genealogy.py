"""Genealogy both ways: a job's lots and panels, a panel's lot and jobs, and a material
lot's recall (every lot it went into), each through the reader's scope."""

from __future__ import annotations

from dataclasses import dataclass

from django.db.models import Prefetch

from shopfloor.access import Scope, require_lot_visible, visible_lots
from shopfloor.errors import NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot, MaterialLot, Panel, PanelImage

# --- genealogy ----------------------------------------------------------------------


@dataclass
class JobGenealogy:
    job: Job
    panels: list[Panel]
    lots: list[Lot]


def job_genealogy(scope: Scope, number: str) -> JobGenealogy:
    """Job -> the production panels carrying its images -> the lots those panels ran in."""
    job = (
        Job.objects.select_related("part_revision__part__customer", "routing_revision")
        .filter(number__iexact=(number or "").strip())
        .first()
    )
    if job is None:
        raise NotFound(f"No job with number {number!r}.")
    lots = list(
        visible_lots(scope, Lot.objects.filter(panels__images__job=job).distinct()).order_by("code")
    )
    panels = list(
        Panel.objects.filter(images__job=job, lot__in=lots)
        .select_related("lot")
        .prefetch_related("images__job")
        .order_by("serial")
    )
    if not scope.sees_all and not lots:
        raise NotAllowed(f"Job {job.number} has no lot at your work centers.")
    return JobGenealogy(job, panels, lots)


def panel_genealogy(scope: Scope, serial: str) -> Panel:
    """A panel -> every job imaged on it (PanelImage), and the lot it ran in."""
    panel = (
        Panel.objects.select_related("lot")
        .prefetch_related(
            Prefetch(
                "images",
                queryset=PanelImage.objects.select_related("job__part_revision__part__customer"),
            )
        )
        .filter(serial__iexact=(serial or "").strip())
        .first()
    )
    if panel is None:
        raise NotFound(f"No panel with serial {serial!r}.")
    require_lot_visible(scope, panel.lot)
    return panel


@dataclass
class RecallRow:
    lot: Lot
    steps: list[LotStep]
    jobs: list[Job]


@dataclass
class MaterialRecall:
    material: MaterialLot
    rows: list[RecallRow]

    @property
    def jobs(self) -> list[Job]:
        seen: dict[int, Job] = {}
        for row in self.rows:
            for j in row.jobs:
                seen[j.pk] = j
        return sorted(seen.values(), key=lambda j: j.number)


def material_recall(scope: Scope, code: str) -> MaterialRecall:
    """Which lots (and so which jobs) used a material lot: the recall question."""
    material = MaterialLot.objects.filter(code__iexact=(code or "").strip()).first()
    if material is None:
        raise NotFound(f"No material lot with code {code!r}.")
    steps = list(
        LotStep.objects.filter(material_lots=material, lot__in=visible_lots(scope))
        .select_related("lot", "work_center")
        .order_by("lot__code", "position")
    )
    lot_ids = {s.lot_id for s in steps}
    jobs_by_lot: dict[int, dict[int, Job]] = {}
    for img in PanelImage.objects.filter(panel__lot_id__in=lot_ids).select_related(
        "job__part_revision__part__customer", "panel"
    ):
        jobs_by_lot.setdefault(img.panel.lot_id, {})[img.job_id] = img.job
    rows: dict[int, RecallRow] = {}
    for s in steps:
        row = rows.setdefault(
            s.lot_id,
            RecallRow(
                s.lot, [], sorted(jobs_by_lot.get(s.lot_id, {}).values(), key=lambda j: j.number)
            ),
        )
        row.steps.append(s)
    return MaterialRecall(material, list(rows.values()))
