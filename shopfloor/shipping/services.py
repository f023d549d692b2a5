"""Shipping use cases: how many boards of a job may ship, and shipping them with a
certificate of conformance issued only when the records show conformance.

Why the gate lives here and nowhere else: a certificate is the shop's signed statement to
the customer. It is issued only when every included lot has completed every step, every
required reading is in window or covered by a signed deviation or disposition, and no NCR
on those lots is open. Otherwise the shipment is refused (409) with every reason at once,
and nothing is saved.
"""

from __future__ import annotations

import uuid
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from django.db import transaction
from django.db.models import Sum

from shopfloor import access
from shopfloor.audit import services as audit
from shopfloor.audit.models import Signature
from shopfloor.core import certificate as wording
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import AcceptedQuantity, LotStep, Reading
from shopfloor.floor.services import missing_readings
from shopfloor.plant.models import Job, Lot, PanelImage, Person
from shopfloor.quality.models import Nonconformance
from shopfloor.shipping.models import Certificate, Shipment, ShipmentLot
from shopfloor.shipping.pdf import certificate_pdf

SHIP_ROLES = access.PLAN_ROLES
#: Who reads shipping status and certificates of conformance (pages and API).
CERTIFICATE_READ_ROLES = frozenset({"planner", "quality_engineer", "supervisor", "admin"})
MAX_LOTS = 50


@dataclass
class LotAvailability:
    lot: Lot
    accepted: int
    shipped: int

    @property
    def available(self) -> int:
        return max(self.accepted - self.shipped, 0)


@dataclass
class JobShipping:
    """A job's quantities as the planner and the ERP see them."""

    job: Job
    ordered: int
    accepted: int
    shipped: int
    lots: list[LotAvailability] = field(default_factory=list)

    @property
    def remaining(self) -> int:
        return max(self.ordered - self.shipped, 0)

    @property
    def closed(self) -> bool:
        return self.shipped >= self.ordered

    @property
    def available(self) -> int:
        return sum(a.available for a in self.lots)


def find_job(number: str) -> Job:
    job = (
        Job.objects.select_related("part_revision__part__customer")
        .filter(number=(number or "").strip())
        .first()
    )
    if job is None:
        raise NotFound(f"No job {number!r}.")
    return job


def shipped_quantity(job: Job) -> int:
    return int(Shipment.objects.filter(job=job).aggregate(n=Sum("quantity"))["n"] or 0)


def shipped_by_job(job_ids: Iterable[int]) -> dict[int, int]:
    """Boards shipped per job (for the job status and the job API)."""
    rows = (
        Shipment.objects.filter(job_id__in=list(job_ids))
        .values("job_id")
        .annotate(n=Sum("quantity"))
        .values_list("job_id", "n")
    )
    return {job_id: int(n or 0) for job_id, n in rows}


def job_closed(job: Job) -> bool:
    """A job closes when its ordered quantity has shipped."""
    return shipped_quantity(job) >= job.quantity


def job_shipping(job: Job) -> JobShipping:
    """Ordered, accepted at final inspection, shipped; per lot what may still ship."""
    lot_ids = list(
        PanelImage.objects.filter(job=job).values_list("panel__lot_id", flat=True).distinct()
    )
    accepted = dict(
        AcceptedQuantity.objects.filter(job=job, lot_step__lot_id__in=lot_ids)
        .values("lot_step__lot_id")
        .annotate(n=Sum("boards"))
        .values_list("lot_step__lot_id", "n")
    )
    shipped = dict(
        ShipmentLot.objects.filter(shipment__job=job)
        .values("lot_id")
        .annotate(n=Sum("boards"))
        .values_list("lot_id", "n")
    )
    lots = [
        LotAvailability(lot, int(accepted.get(lot.pk, 0)), int(shipped.get(lot.pk, 0)))
        for lot in Lot.objects.filter(pk__in=lot_ids).order_by("code")
    ]
    return JobShipping(
        job=job,
        ordered=job.quantity,
        accepted=sum(a.accepted for a in lots),
        shipped=shipped_quantity(job),
        lots=lots,
    )


# --- the gate -------------------------------------------------------------------------


def _covering_ncrs(lot: Lot) -> dict[int, Nonconformance]:
    """Reading id -> the closed, signed NCR that dispositioned it."""
    out: dict[int, Nonconformance] = {}
    for ncr in Nonconformance.objects.filter(
        lot=lot, status=Nonconformance.Status.CLOSED, disposition_signature__isnull=False
    ).prefetch_related("readings"):
        for r in ncr.readings.all():
            out[r.pk] = ncr
    return out


def lot_problems(lot: Lot, job: Job) -> list[dict[str, Any]]:
    """Why a certificate for `job` could not include `lot` (empty: it may)."""

    problems: list[dict[str, Any]] = []

    def add(problem: str, **extra: Any) -> None:
        problems.append({"field": "lots", "value": lot.code, "problem": problem, **extra})

    if not PanelImage.objects.filter(panel__lot=lot, job=job).exists():
        add(f"lot {lot.code} carries no boards of job {job.number}")
        return problems
    if lot.status == Lot.Status.SCRAPPED:
        add(f"lot {lot.code} is scrapped")
        return problems
    if lot.on_hold:
        add(f"lot {lot.code} is on hold")
    steps = list(lot.steps.order_by("position").select_related("work_center"))
    open_steps = [s for s in steps if s.is_open]
    if open_steps or lot.status != Lot.Status.COMPLETE:
        names = ", ".join(f"'{s.name}'" for s in open_steps[:5])
        more = f" and {len(open_steps) - 5} more" if len(open_steps) > 5 else ""
        add(
            f"lot {lot.code} has not completed every step ({len(open_steps)} open: {names}{more})",
            open_steps=[s.name for s in open_steps],
        )
    for ncr in Nonconformance.objects.filter(lot=lot, status=Nonconformance.Status.OPEN):
        add(f"{ncr.number} on lot {lot.code} is open (not dispositioned)", ncr=ncr.number)
    covered = _covering_ncrs(lot)
    outside = Reading.objects.filter(
        lot_step__lot=lot, superseded_by__isnull=True, in_window=False
    ).select_related("lot_step")
    for r in outside:
        if r.pk not in covered:
            add(
                f"lot {lot.code}: {r.quantity} sample {r.sample_index} at '{r.lot_step.name}' "
                f"is out of window ({r.value:g} {r.unit}) and no signed disposition covers it"
            )
    for s in steps:
        if s.status == LotStep.Status.DONE:
            missing = missing_readings(s)
            if missing:
                add(f"lot {lot.code}: '{s.name}' lacks required readings: {'; '.join(missing)}")
    if not AcceptedQuantity.objects.filter(lot_step__lot=lot, job=job).exists():
        add(f"lot {lot.code} has no accepted quantity from final inspection")
    return problems


def _require_planner(person: Person) -> None:
    if not access.has_role(person, SHIP_ROLES):
        raise NotAllowed("Only a planner (or an administrator) can ship.")


def _parse(quantity: Any, lot_codes: Any) -> tuple[int, list[str]]:
    problems: list[dict[str, Any]] = []
    if isinstance(quantity, bool) or not isinstance(quantity, int) or quantity < 1:
        problems.append(
            {
                "field": "quantity",
                "value": quantity,
                "problem": "a whole number of boards, 1 or more",
            }
        )
    codes: list[str] = []
    if (
        not isinstance(lot_codes, list)
        or not 1 <= len(lot_codes) <= MAX_LOTS
        or not all(isinstance(c, str) and c.strip() for c in lot_codes)
    ):
        problems.append(
            {
                "field": "lots",
                "value": lot_codes,
                "problem": f"a list of 1 to {MAX_LOTS} lot codes the boards come from",
            }
        )
    else:
        codes = list(dict.fromkeys(c.strip() for c in lot_codes))
    if problems:
        raise InvalidInput(
            f"The shipment has {len(problems)} problem(s); nothing was saved.", problems=problems
        )
    return int(quantity), codes


def ship(*, person: Person, job_number: str, quantity: Any, lot_codes: Any) -> Certificate:
    """Ship `quantity` boards of a job from the named completed lots and issue the
    certificate of conformance, or refuse with every reason (nothing saved)."""
    _require_planner(person)
    qty, codes = _parse(quantity, lot_codes)
    with transaction.atomic():
        job = find_job(job_number)
        Job.objects.select_for_update(no_key=True).filter(pk=job.pk).first()  # one at a time
        lots = {lot.code.upper(): lot for lot in Lot.objects.with_codes(codes)}
        problems: list[dict[str, Any]] = []
        for code in codes:
            if code.upper() not in lots:
                problems.append({"field": "lots", "value": code, "problem": "no such lot"})
        chosen = [lots[c.upper()] for c in codes if c.upper() in lots]
        for lot in chosen:
            problems += lot_problems(lot, job)
        status = job_shipping(job)
        avail = {a.lot.pk: a.available for a in status.lots}
        can = sum(avail.get(lot.pk, 0) for lot in chosen)
        if qty > can:
            problems.append(
                {
                    "field": "quantity",
                    "value": qty,
                    "problem": f"the lots named hold {can} accepted board(s) of job "
                    f"{job.number} not yet shipped",
                    "allowed": f"1..{can}",
                }
            )
        if qty > status.remaining:
            problems.append(
                {
                    "field": "quantity",
                    "value": qty,
                    "problem": f"job {job.number} has {status.remaining} board(s) left to ship "
                    f"of {status.ordered} ordered",
                    "allowed": f"1..{status.remaining}" if status.remaining else "none",
                }
            )
        if problems:
            raise Conflict(
                f"Job {job.number} cannot ship and no certificate was issued: "
                f"{len(problems)} reason(s).",
                problems=problems,
            )
        shipment = Shipment.objects.create(
            number=f"SH-T{uuid.uuid4().hex[:12]}", job=job, quantity=qty, shipped_by=person
        )
        shipment.number = f"SH-{shipment.pk:06d}"
        shipment.save(update_fields=["number"])
        left = qty
        from_lots: list[tuple[Lot, int]] = []
        for lot in chosen:
            take = min(avail.get(lot.pk, 0), left)
            if take:
                ShipmentLot.objects.create(shipment=shipment, lot=lot, boards=take)
                from_lots.append((lot, take))
                left -= take
        cert = _issue_certificate(shipment, job, from_lots, person)
        closed = shipped_quantity(job) >= job.quantity
        audit.record(
            actor=person.user,
            action="shipment.made",
            object_type="job",
            object_id=job.pk,
            after={
                "shipment": shipment.number,
                "quantity": qty,
                "lots": {lot.code: n for lot, n in from_lots},
                "certificate": cert.number,
                "job_closed": closed,
            },
        )
        return cert


# --- the certificate --------------------------------------------------------------------


def _final_signature(lots: list[Lot]) -> Signature | None:
    step = (
        LotStep.objects.filter(lot__in=lots, status=LotStep.Status.DONE, signature__isnull=False)
        .filter(code__startswith="final_inspection")
        .select_related("signature")
        .order_by("-completed_at")
        .first()
    )
    return step.signature if step else None


def certificate_content(
    shipment: Shipment, job: Job, from_lots: list[tuple[Lot, int]], issuer: Person
) -> dict[str, Any]:
    """What the certificate states, in customer wording (no internal ids)."""
    lots = [lot for lot, _ in from_lots]
    part_rev = job.part_revision
    rev = lots[0].routing_revision if lots else None
    spec = (rev.build_spec if rev else part_rev.build_spec) or {}
    values: list[wording.MeasuredValue] = []
    covered: dict[int, Nonconformance] = {}
    for lot in lots:
        covered.update(_covering_ncrs(lot))
    for r in Reading.objects.filter(lot_step__lot__in=lots, superseded_by__isnull=True).order_by(
        "pk"
    ):
        values.append(
            wording.MeasuredValue(
                quantity=r.quantity,
                value=r.value,
                unit=r.unit,
                window=dict(r.window or {}),
                in_window=r.in_window,
            )
        )
    deviations: list[str] = []
    seen_dev: set[str] = set()
    for lot in lots:
        for step in lot.steps.all():
            for m in step.plan or []:
                if m.get("deviation"):
                    text = (
                        f"{wording.CHARACTERISTICS.get(m['quantity'], m['quantity'])}: "
                        f"requirement {wording.requirement_text(m)} agreed with the customer"
                        + (f" ({m['reason']})" if m.get("reason") else "")
                    )
                    if text not in seen_dev:
                        seen_dev.add(text)
                        deviations.append(text)
    for ncr in sorted({n.pk: n for n in covered.values()}.values(), key=lambda n: n.opened_at):
        sig = ncr.disposition_signature
        step_name = ncr.lot_step.name if ncr.lot_step else "the process"
        deviations.append(
            f"Nonconformance {ncr.number} at '{step_name}' (lot {ncr.lot.code}): "
            f"{ncr.get_disposition_display().lower()}, signed by "
            f"{sig.printed_name if sig else 'quality'} on "
            f"{(sig.signed_at if sig else ncr.dispositioned_at):%Y-%m-%d}"
            f"{' — ' + ncr.disposition_note if ncr.disposition_note else ''}"
        )
    final = _final_signature(lots)
    shipped_total = shipped_quantity(job)
    return {
        "number": "",
        "customer": job.part_revision.part.customer.name,
        "part_number": part_rev.part.number,
        "revision": part_rev.revision,
        "description": part_rev.part.description,
        "order": job.number,
        "quantity_ordered": job.quantity,
        "quantity_this_shipment": shipment.quantity,
        "quantity_shipped_to_date": shipped_total,
        "quantity_remaining": max(job.quantity - shipped_total, 0),
        "lots": [
            {
                "lot": lot.code,
                "boards": n,
                "completed": f"{lot.completed_at:%Y-%m-%d}" if lot.completed_at else "",
            }
            for lot, n in from_lots
        ],
        "specification": wording.specification_line(spec, int(job.ipc_class)),
        "characteristics": [row.as_dict() for row in wording.characteristic_rows(values)],
        "deviations": deviations,
        "quality_signature": {
            "meaning": "Final inspection performed and signed by",
            "name": final.printed_name if final else "",
            "signed": f"{final.signed_at:%Y-%m-%d %H:%M} UTC" if final else "",
        },
        "issued_by": issuer.printed_name,
        "issued": f"{shipment.shipped_at:%Y-%m-%d}",
        "statement": (
            "We certify that the boards listed above were manufactured, inspected and tested "
            "to the purchase order, the customer's drawing and the specification named, and "
            "that they conform to them, except as listed under Deviations."
        ),
    }


def _issue_certificate(
    shipment: Shipment, job: Job, from_lots: list[tuple[Lot, int]], issuer: Person
) -> Certificate:

    content = certificate_content(shipment, job, from_lots, issuer)
    cert = Certificate.objects.create(
        number=f"CT-{shipment.pk}", shipment=shipment, content=content, pdf=b""
    )
    cert.number = f"COC-{cert.pk:06d}"
    content["number"] = cert.number
    cert.content = content
    cert.pdf = certificate_pdf(content)
    final = _final_signature([lot for lot, _ in from_lots])
    cert.quality_signature = final
    cert.save()
    return cert


def certificate_by_number(number: str) -> Certificate:
    cert = (
        Certificate.objects.select_related("shipment__job")
        .filter(number=(number or "").strip())
        .first()
    )
    if cert is None:
        raise NotFound(f"No certificate {number!r}.")
    return cert
