"""Quantities: boards scrapped per panel and job, accepted at final inspection, yields."""

from __future__ import annotations

import logging
from typing import Any

from django.db import transaction
from django.db.models import Count, Q, Sum

from routing.builder.library import base_code
from shopfloor.audit import services as audit
from shopfloor.core import yields
from shopfloor.errors import Conflict, InvalidInput
from shopfloor.floor.lookups import lock_step, require_workable
from shopfloor.floor.models import (
    AcceptedQuantity,
    LotStep,
    ScrapReason,
    ScrapRecord,
)
from shopfloor.plant.models import (
    Job,
    Lot,
    Panel,
    PanelImage,
    Person,
)
from shopfloor.plant.people import check_assigned

log = logging.getLogger("shopfloor.floor")


# --- quantities: scrap and acceptance ---------------------------------------------------

FINAL_INSPECTION = "final_inspection"


def is_final_inspection(step: LotStep) -> bool:
    """The step that records the accepted quantity (the library's final inspection)."""

    return base_code(step.code) == FINAL_INSPECTION and not step.is_rework


def panel_good_boards(panels: list[Panel]) -> dict[tuple[int, int], int]:
    """(panel id, job id) -> boards still good: images less boards crossed out."""
    ids = [p.pk for p in panels if not p.scrapped]
    good: dict[tuple[int, int], int] = {}
    for panel_id, job_id, count in PanelImage.objects.filter(panel_id__in=ids).values_list(
        "panel_id", "job_id", "count"
    ):
        good[(panel_id, job_id)] = good.get((panel_id, job_id), 0) + count
    for panel_id, job_id, boards in ScrapRecord.objects.filter(
        panel_id__in=ids, panel_scrapped=False
    ).values_list("panel_id", "job_id", "boards"):
        key = (panel_id, job_id)
        if key in good:
            good[key] = max(good[key] - boards, 0)
    return good


def lot_good_boards(lot: Lot) -> dict[int, int]:
    """Job id -> good boards on the lot's live panels now."""
    out: dict[int, int] = {}
    for (_, job_id), n in panel_good_boards(list(lot.panels.all())).items():
        out[job_id] = out.get(job_id, 0) + n
    return out


def scrap_reason(code: str) -> ScrapReason:
    reason = ScrapReason.objects.filter(code=(code or "").strip(), active=True).first()
    if reason is None:
        allowed = ", ".join(ScrapReason.objects.filter(active=True).values_list("code", flat=True))
        raise InvalidInput(
            f"Scrap reason {code!r} is not on the site's list. Allowed: {allowed}.",
            problems=[{"field": "reason", "value": code, "allowed": allowed}],
        )
    return reason


def scrap_panel_boards(
    *,
    step: LotStep,
    lot: Lot,
    panel: Panel,
    boards: int | None,
    job: Job | None,
    reason: ScrapReason,
    note: str,
    person: Person,
    source: str,
    ncr: Any = None,
) -> list[ScrapRecord]:
    """Cross out boards on a panel, or scrap the whole panel (boards=None); the caller
    holds the lot's lock. Shared by the operator's scrap and the NCR disposition."""
    good = {
        job_id: n
        for (panel_id, job_id), n in panel_good_boards([panel]).items()
        if panel_id == panel.pk
    }
    records: list[ScrapRecord] = []
    if boards is None or (sum(good.values()) == (boards or 0) and job is None):
        for job_id, n in sorted(good.items()):
            records.append(
                ScrapRecord(
                    lot_step=step,
                    panel=panel,
                    job_id=job_id,
                    boards=n,
                    panel_scrapped=True,
                    reason=reason,
                    note=note,
                    source=source,
                    ncr=ncr,
                    recorded_by=person,
                )
            )
        if not records:  # a panel with no images: still a panel lost
            records.append(
                ScrapRecord(
                    lot_step=step,
                    panel=panel,
                    boards=0,
                    panel_scrapped=True,
                    reason=reason,
                    note=note,
                    source=source,
                    ncr=ncr,
                    recorded_by=person,
                )
            )
        panel.scrapped = True
        panel.save(update_fields=["scrapped"])
        lot.panel_count = max(lot.panel_count - 1, 0)
        lot.save(update_fields=["panel_count"])
    else:
        if job is None:
            if len(good) != 1:
                raise InvalidInput(
                    f"Panel {panel.serial} carries boards of several jobs; say which job's "
                    "boards are crossed out."
                )
            job_id = next(iter(good))
        else:
            job_id = job.pk
        left = good.get(job_id)
        if left is None:
            raise InvalidInput(f"Panel {panel.serial} carries no boards of that job.")
        if not 1 <= boards <= left:
            raise InvalidInput(
                f"Panel {panel.serial} has {left} good board(s) of that job; cross out 1 to "
                f"{left}, or scrap the whole panel.",
                problems=[{"field": "boards", "value": boards, "allowed": f"1..{left}"}],
            )
        records.append(
            ScrapRecord(
                lot_step=step,
                panel=panel,
                job_id=job_id,
                boards=boards,
                reason=reason,
                note=note,
                source=source,
                ncr=ncr,
                recorded_by=person,
            )
        )
    ScrapRecord.objects.bulk_create(records)
    if not lot.panels.filter(scrapped=False).exists():
        lot.status = Lot.Status.SCRAPPED
        lot.save(update_fields=["status"])
    return records


def record_scrap(
    *,
    person: Person,
    lot_step_id: int,
    panel_serial: str,
    reason_code: str,
    boards: int | None = None,
    job_number: str | None = None,
    note: str = "",
) -> list[ScrapRecord]:
    """An operator scraps at the current step: boards crossed out on a panel, or the
    whole panel (leave `boards` out). The reason comes from the site's list."""
    reason = scrap_reason(reason_code)
    note = (note or "").strip()[:300]
    if reason.code == "other" and len(note) < 3:
        raise InvalidInput("Scrap reason 'other' needs a note saying what was wrong.")
    if boards is not None and (isinstance(boards, bool) or not isinstance(boards, int)):
        raise InvalidInput("boards must be a whole number (leave it out to scrap the panel).")
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        require_workable(step, lot)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording scrap.")
        panel = (
            Panel.objects.select_for_update(no_key=True)
            .filter(lot=lot, serial__iexact=(panel_serial or "").strip())
            .first()
        )
        if panel is None:
            serials = ", ".join(lot.panels.filter(scrapped=False).values_list("serial", flat=True))
            raise InvalidInput(
                f"Panel {panel_serial!r} is not in lot {lot.code}. Its live panels: {serials}.",
                problems=[{"field": "panel", "value": panel_serial, "allowed": serials}],
            )
        if panel.scrapped:
            raise Conflict(f"Panel {panel.serial} is already scrapped.")
        job = None
        if job_number:
            job = Job.objects.filter(number=job_number.strip()).first()
            if job is None:
                raise InvalidInput(f"No job {job_number!r}.")
        records = scrap_panel_boards(
            step=step,
            lot=lot,
            panel=panel,
            boards=boards,
            job=job,
            reason=reason,
            note=note,
            person=person,
            source=ScrapRecord.Source.OPERATOR,
        )
        audit.record(
            actor=person.user,
            action="scrap.recorded",
            object_type="lot_step",
            object_id=step.pk,
            after={
                "lot": lot.code,
                "step": step.code,
                "panel": panel.serial,
                "boards": sum(r.boards for r in records),
                "panel_scrapped": records[0].panel_scrapped,
                "reason": reason.code,
                "note": note,
            },
        )
        return records


def record_acceptance(
    *, person: Person, lot_step_id: int, accepted: dict[str, int], reason_code: str = ""
) -> list[AcceptedQuantity]:
    """Final inspection records the boards accepted per job (job number -> boards).

    Accepted may not exceed the good boards on the lot's live panels; boards inspected
    but not accepted are scrapped at this step with a reason from the site's list.
    Recording again before sign-off replaces the figures (audited before and after).
    """
    with transaction.atomic():
        step, lot = lock_step(lot_step_id)
        check_assigned(person, step.work_center_id)
        require_workable(step, lot)
        if not is_final_inspection(step):
            raise Conflict(
                f"Accepted quantities are recorded at final inspection, not at '{step.name}'."
            )
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording the accepted quantity.")
        good = lot_good_boards(lot)
        jobs = {j.number: j for j in Job.objects.filter(pk__in=list(good))}
        problems: list[dict[str, Any]] = []
        for number in sorted(set(jobs) - set(accepted)):
            problems.append({"field": f"accepted.{number}", "problem": "missing"})
        for number, n in accepted.items():
            job = jobs.get(number)
            if job is None:
                problems.append(
                    {
                        "field": f"accepted.{number}",
                        "problem": "this lot carries no boards of that job",
                        "allowed": sorted(jobs),
                    }
                )
            elif isinstance(n, bool) or not isinstance(n, int) or not 0 <= n <= good[job.pk]:
                problems.append(
                    {
                        "field": f"accepted.{number}",
                        "value": n,
                        "problem": f"{good[job.pk]} good board(s) of job {number} are on the lot",
                        "allowed": f"0..{good[job.pk]}",
                    }
                )
        if problems:
            raise InvalidInput(
                f"The accepted quantities have {len(problems)} problem(s); nothing was saved.",
                problems=problems,
            )
        rejected = {number: good[jobs[number].pk] - n for number, n in accepted.items()}
        reason = None
        if any(rejected.values()):
            if not reason_code:
                raise InvalidInput(
                    "Some good boards were not accepted: give the scrap reason for them."
                )
            reason = scrap_reason(reason_code)
        before = {
            a.job.number: a.boards
            for a in AcceptedQuantity.objects.filter(lot_step=step).select_related("job")
        }
        ScrapRecord.objects.filter(lot_step=step, source=ScrapRecord.Source.INSPECTION).delete()
        AcceptedQuantity.objects.filter(lot_step=step).delete()
        rows = [
            AcceptedQuantity(lot_step=step, job=jobs[number], boards=n, recorded_by=person)
            for number, n in sorted(accepted.items())
        ]
        AcceptedQuantity.objects.bulk_create(rows)
        for number, n in rejected.items():
            if n and reason is not None:
                ScrapRecord.objects.create(
                    lot_step=step,
                    job=jobs[number],
                    boards=n,
                    reason=reason,
                    note="not accepted at final inspection",
                    source=ScrapRecord.Source.INSPECTION,
                    recorded_by=person,
                )
        audit.record(
            actor=person.user,
            action="acceptance.recorded",
            object_type="lot_step",
            object_id=step.pk,
            before=before or None,
            after={"lot": lot.code, "accepted": accepted, "rejected": rejected},
        )
        return rows


def require_acceptance(step: LotStep) -> None:
    if is_final_inspection(step) and not AcceptedQuantity.objects.filter(lot_step=step).exists():
        raise Conflict(
            "Record the accepted quantity before signing off final inspection.",
            problems=[{"field": "accepted", "missing": ["accepted quantity"]}],
        )


def lot_yields(lot: Lot) -> list[Any]:
    """Boards in, scrapped and out at every step of the lot (shopfloor.core.yields)."""

    steps = list(lot.steps.order_by("position").values_list("pk", "name", "position"))
    totals: dict[int, dict[str, Any]] = {
        row["lot_step_id"]: dict(row)
        for row in ScrapRecord.objects.filter(lot_step__lot=lot)
        .values("lot_step_id")
        .annotate(
            boards=Sum("boards"),
            panels=Count("panel", distinct=True, filter=Q(panel_scrapped=True)),
        )
    }
    good_now = sum(lot_good_boards(lot).values())
    return yields.step_yields(
        good_now,
        [
            yields.StepScrap(
                key=position,
                name=name,
                boards_scrapped=int(totals.get(pk, {}).get("boards") or 0),
                panels_scrapped=int(totals.get(pk, {}).get("panels") or 0),
            )
            for pk, name, position in steps
        ],
    )


def boards_scrapped_on_live_panels(job_ids: Any) -> dict[int, int]:
    """Boards of each job scrapped while their panel runs on: crossed out at a step, or
    not accepted at final inspection (whole scrapped panels are counted by the panel)."""

    rows = (
        ScrapRecord.objects.filter(job_id__in=list(job_ids), panel_scrapped=False)
        .filter(Q(panel__isnull=True) | Q(panel__scrapped=False))
        .values("job_id")
        .annotate(n=Sum("boards"))
        .values_list("job_id", "n")
    )
    return {job_id: int(n or 0) for job_id, n in rows}
