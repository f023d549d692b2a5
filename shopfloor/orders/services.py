"""Use cases of the planner: enter a job, read its status and quantities, release it to
the floor (panels, lots, travellers), release make-up panels for a shortfall, and find a
lot from whatever a tablet scans.

Views, API views and the demo loader call only these functions. The counting and
panel rules are pure (shopfloor.core.panelise); this module stores their results.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from decimal import Decimal
from typing import Any

from django.db import IntegrityError, transaction
from django.utils import timezone

from routing.models import RoutingRevision
from shopfloor import access, parsing
from shopfloor.audit import services as audit
from shopfloor.core import panelise, units
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.orders.models import PanelLayout, PartPlanning, PlanningSettings
from shopfloor.orders.read import job_queryset, summaries
from shopfloor.plant import services as plant
from shopfloor.plant.models import (
    Customer,
    Job,
    Lot,
    Panel,
    Part,
    PartRevision,
    Person,
)

PLANNER_ROLES = access.PLAN_ROLES
MAX_QUANTITY = 1_000_000
MAX_NOTES = 4000
JOB_NUMBER_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,19}$")
CODE_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._ -]{0,59}$")
OVERRIDE_KEYS = ("quantity", "step_code", "min", "max", "target", "reason")

#: Job statuses, in the order a job passes through them (plain English, our own words).


def require_planner(person: Person | None) -> Person:
    """Only planners (and administrators) enter and release jobs."""
    if person is None:
        raise NotAllowed("This account has no badge on file; ask an administrator to add one.")
    if not access.has_role(person, PLANNER_ROLES):
        raise NotAllowed("Only a planner (or an administrator) can enter and release jobs.")
    return person


# --- job entry --------------------------------------------------------------------------


@dataclass(frozen=True)
class JobInput:
    """What a planner (or the ERP) sends to enter a job; raw values, checked together."""

    customer: Any = ""
    part_number: Any = ""
    part_revision: Any = ""
    quantity: Any = None
    due_date: Any = None
    ipc_class: Any = None
    customer_name: Any = ""
    part_description: Any = ""
    customer_spec_notes: Any = ""
    customer_overrides: Any = field(default_factory=list)
    number: Any = ""


@dataclass(frozen=True)
class _CleanJob:
    customer: str
    customer_name: str
    part_number: str
    part_description: str
    part_revision: str
    quantity: int
    due_date: dt.date
    ipc_class: int
    notes: str
    overrides: list[dict[str, Any]]
    number: str


def check_job_input(data: JobInput, *, today: dt.date | None = None) -> _CleanJob:
    """Every problem with a job entry at once (InvalidInput), or the cleaned values."""
    today = today or timezone.localdate()
    parsing.refuse_nul(data.__dict__, "job")
    problems: list[dict[str, Any]] = []

    def text_field(name: str, value: Any, *, required: bool, what: str) -> str:
        if value is not None and not isinstance(value, str):
            problems.append(parsing.problem(name, value, "must be text", what))
            return ""
        text = parsing.text(value)
        if required and not text:
            problems.append(parsing.problem(name, value, "is required", what))
        elif text and not CODE_RE.match(text):
            problems.append(
                parsing.problem(name, value, "has characters a label cannot print", what)
            )
        return text

    customer = text_field(
        "customer", data.customer, required=True, what="a customer code (letters, digits, - . _)"
    )
    part_number = text_field(
        "part_number", data.part_number, required=True, what="the customer's part number"
    )
    revision = text_field(
        "part_revision", data.part_revision, required=True, what="a revision such as A or 02"
    )
    if revision and len(revision) > 10:
        problems.append(
            parsing.problem("part_revision", revision, "too long", "at most 10 characters")
        )
    customer_name = parsing.text(data.customer_name)[:200]
    description = parsing.text(data.part_description)[:200]

    quantity = 0
    q = data.quantity
    if isinstance(q, str) and q.strip().isdigit():
        q = int(q.strip())
    if isinstance(q, bool) or not isinstance(q, int):
        problems.append(
            parsing.problem(
                "quantity", q, "must be a whole number of boards", f"1 to {MAX_QUANTITY}"
            )
        )
    elif not 1 <= q <= MAX_QUANTITY:
        problems.append(parsing.problem("quantity", q, "out of range", f"1 to {MAX_QUANTITY}"))
    else:
        quantity = q

    due: dt.date | None = None
    if isinstance(data.due_date, dt.datetime):
        due = data.due_date.date()
    elif isinstance(data.due_date, dt.date):
        due = data.due_date
    elif isinstance(data.due_date, str) and data.due_date.strip():
        try:
            due = dt.date.fromisoformat(data.due_date.strip())
        except ValueError:
            problems.append(
                parsing.problem(
                    "due_date", data.due_date, "not a date", "YYYY-MM-DD, e.g. 2027-03-01"
                )
            )
    else:
        problems.append(parsing.problem("due_date", data.due_date, "is required", "YYYY-MM-DD"))
    if due is not None and due < today:
        problems.append(
            parsing.problem(
                "due_date", due.isoformat(), "is in the past", f"{today.isoformat()} or later"
            )
        )

    ipc = data.ipc_class
    if isinstance(ipc, str) and ipc.strip().isdigit():
        ipc = int(ipc.strip())
    if isinstance(ipc, bool) or ipc not in (1, 2, 3):
        problems.append(
            parsing.problem("ipc_class", data.ipc_class, "IPC class must be 1, 2 or 3", [1, 2, 3])
        )
        ipc = 0

    notes = data.customer_spec_notes
    if notes is None:
        notes = ""
    if not isinstance(notes, str):
        problems.append(parsing.problem("customer_spec_notes", notes, "must be text", None))
        notes = ""
    elif len(notes) > MAX_NOTES:
        problems.append(
            parsing.problem(
                "customer_spec_notes",
                f"{len(notes)} characters",
                "too long",
                f"at most {MAX_NOTES}",
            )
        )

    overrides = _check_overrides(data.customer_overrides, problems)

    number = parsing.text(data.number)
    if data.number not in (None, "") and not isinstance(data.number, str):
        problems.append(parsing.problem("number", data.number, "must be text", "e.g. WO-24120"))
    elif number and not JOB_NUMBER_RE.match(number):
        problems.append(
            parsing.problem(
                "number",
                number,
                "not a usable job number",
                "1 to 20 letters, digits, '-', '.', '_' (leave blank to get the next number)",
            )
        )
    elif number and Job.objects.filter(number__iexact=number).exists():
        problems.append(
            parsing.problem("number", number, "a job with this number already exists", None)
        )

    if (
        customer
        and not customer_name
        and not Customer.objects.filter(code__iexact=customer).exists()
    ):
        problems.append(
            parsing.problem(
                "customer",
                customer,
                "no customer with this code; give customer_name to add it",
                list(Customer.objects.order_by("code").values_list("code", flat=True)[:50]),
            )
        )
    if problems:
        raise InvalidInput(
            f"The job has {len(problems)} problem(s); nothing was saved.", problems=problems
        )
    assert due is not None
    return _CleanJob(
        customer=customer,
        customer_name=customer_name,
        part_number=part_number,
        part_description=description,
        part_revision=revision,
        quantity=quantity,
        due_date=due,
        ipc_class=int(ipc),
        notes=notes,
        overrides=overrides,
        number=number,
    )


def _check_overrides(raw: Any, problems: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Customer window overrides, in the shape the routing builder takes (README)."""
    if raw in (None, ""):
        return []
    if not isinstance(raw, list):
        problems.append(
            parsing.problem(
                "customer_overrides",
                raw,
                "must be a list of objects",
                "[{quantity, step_code, min, max, target, reason}]",
            )
        )
        return []
    known = units.quantities()
    out: list[dict[str, Any]] = []
    for i, item in enumerate(raw):
        where = f"customer_overrides[{i}]"
        if not isinstance(item, Mapping):
            problems.append(parsing.problem(where, item, "must be an object", list(OVERRIDE_KEYS)))
            continue
        before = len(problems)
        for key in item:
            if key not in OVERRIDE_KEYS:
                problems.append(
                    parsing.problem(f"{where}.{key}", item[key], "unknown key", list(OVERRIDE_KEYS))
                )
        quantity = item.get("quantity")
        if quantity not in known:
            problems.append(
                parsing.problem(f"{where}.quantity", quantity, "not a measured quantity", known)
            )
        values: dict[str, float] = {}
        for key in ("min", "max", "target"):
            v = item.get(key)
            if v is None or v == "":
                continue
            if isinstance(v, bool) or not isinstance(v, int | float):
                problems.append(parsing.problem(f"{where}.{key}", v, "must be a number", None))
            else:
                values[key] = float(v)
        if not values:
            problems.append(
                parsing.problem(where, None, "gives no limit", "at least one of min, max, target")
            )
        if "min" in values and "max" in values and values["min"] > values["max"]:
            problems.append(
                parsing.problem(
                    f"{where}.min", values["min"], "is above max", f"<= {values['max']:g}"
                )
            )
        if not parsing.text(item.get("reason")):
            problems.append(
                parsing.problem(
                    f"{where}.reason",
                    item.get("reason"),
                    "is required",
                    "why the customer asks for it",
                )
            )
        if len(problems) == before:
            out.append(
                {k: item[k] for k in OVERRIDE_KEYS if k in item and item[k] not in (None, "")}
            )
    return out


def _next_number(prefix: str) -> str:
    best = 0
    for number in Job.objects.filter(number__startswith=prefix).values_list("number", flat=True):
        tail = number[len(prefix) :]
        if tail.isdigit():
            best = max(best, int(tail))
    return f"{prefix}{best + 1:05d}"


def enter_job(*, person: Person | None, data: JobInput) -> Job:
    """Enter a job; the customer, part and part revision are picked or created.

    A new part revision has no build spec yet ({}); the process engineer authors it
    before the job can be released (release refuses without a released routing).
    """
    require_planner(person)
    assert person is not None
    clean = check_job_input(data)
    with transaction.atomic():
        settings_row = PlanningSettings.objects.select_for_update().filter(pk=1).first()
        if settings_row is None:
            PlanningSettings.current()
            settings_row = PlanningSettings.objects.select_for_update().get(pk=1)
        customer = Customer.objects.filter(code__iexact=clean.customer).first()
        if customer is None:
            customer = Customer.objects.create(code=clean.customer, name=clean.customer_name)
        part = Part.objects.filter(customer=customer, number__iexact=clean.part_number).first()
        if part is None:
            part = Part.objects.create(
                customer=customer, number=clean.part_number, description=clean.part_description
            )
        revision = PartRevision.objects.filter(
            part=part, revision__iexact=clean.part_revision
        ).first()
        if revision is None:
            revision = PartRevision.objects.create(
                part=part, revision=clean.part_revision, build_spec={}
            )
        number = clean.number or _next_number(settings_row.job_number_prefix)
        try:
            with transaction.atomic():
                job = Job.objects.create(
                    number=number,
                    part_revision=revision,
                    quantity=clean.quantity,
                    due_date=clean.due_date,
                    ipc_class=clean.ipc_class,
                    customer_spec_notes=clean.notes,
                    customer_overrides=clean.overrides,
                )
        except IntegrityError as exc:
            raise Conflict(f"A job numbered {number} already exists.") from exc
        audit.record(
            actor=person.user,
            action="job.entered",
            object_type="job",
            object_id=job.pk,
            after={
                "number": job.number,
                "customer": customer.code,
                "part": f"{part.number} rev {revision.revision}",
                "quantity": job.quantity,
                "due_date": job.due_date.isoformat(),
                "ipc_class": job.ipc_class,
            },
        )
        return job


# --- status and quantities ----------------------------------------------------------------


# --- release to the floor ------------------------------------------------------------------


@dataclass(frozen=True)
class ReleaseResult:
    jobs: list[Job]
    lots: list[Lot]
    panels: list[Panel]
    created: bool
    routing_revision: RoutingRevision


def released_routing(part_revision: PartRevision) -> RoutingRevision | None:
    return (
        RoutingRevision.objects.filter(
            part_revision=part_revision, status=RoutingRevision.Status.RELEASED
        )
        .order_by("-number")
        .first()
    )


def scrap_allowance_for(part: Part) -> tuple[Decimal, str]:
    """(allowance %, where it comes from): the part's own, else the site's."""
    planning = PartPlanning.objects.filter(part=part).first()
    if planning is not None and planning.scrap_allowance_pct is not None:
        return planning.scrap_allowance_pct, f"part {part.number}"
    return PlanningSettings.current().scrap_allowance_pct, "site default"


def _whole(value: Any, name: str, low: int, high: int, problems: list[dict[str, Any]]) -> int:
    if isinstance(value, str) and value.strip().isdigit():
        value = int(value.strip())
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        problems.append(parsing.problem(name, value, "must be a whole number", f"{low} to {high}"))
        return 0
    return value


def _existing_release(job: Job) -> ReleaseResult | None:
    panels = list(
        Panel.objects.filter(images__job=job).select_related("lot").order_by("serial").distinct()
    )
    if not panels:
        return None
    lots = sorted({p.lot for p in panels}, key=lambda lot: lot.code)
    routing = lots[0].routing_revision
    return ReleaseResult(
        jobs=[job], lots=lots, panels=panels, created=False, routing_revision=routing
    )


def _lot_base(job: Job) -> str:
    base = job.number
    for prefix in ("WO-", "WO"):
        if base.upper().startswith(prefix) and len(base) > len(prefix):
            base = base[len(prefix) :]
            break
    return f"LOT-{base}"[:22]


def _new_lot_codes(job: Job, count: int) -> list[str]:
    base = _lot_base(job)
    taken = set(Lot.objects.filter(code__istartswith=base).values_list("code", flat=True))
    codes: list[str] = []
    n = 1
    while len(codes) < count:
        code = f"{base}-{n}"
        if code not in taken:
            codes.append(code)
        n += 1
    return codes


def release_job(
    *,
    person: Person | None,
    number: str,
    boards_per_panel: Any,
    share_with: list[tuple[str, Any]] | None = None,
) -> ReleaseResult:
    """Release a job to the floor: panel layout, panels with serials, lots, travellers.

    Idempotent: a job that already has panels gets back the lots and panels it has
    (make-up panels are `release_makeup`). Other jobs may share the panels when their
    specs are compatible; the panels then follow the strictest class's routing.
    Refused, with every reason, when a job has no released routing revision.
    """
    require_planner(person)
    assert person is not None
    parsing.refuse_nul([number, share_with or []], "release")
    problems: list[dict[str, Any]] = []
    bpp = _whole(boards_per_panel, "boards_per_panel", 1, panelise.MAX_BOARDS_PER_PANEL, problems)
    partners: list[tuple[str, int]] = []
    for i, (other, count) in enumerate(share_with or []):
        n = _whole(
            count, f"share_with[{i}].boards_per_panel", 1, panelise.MAX_BOARDS_PER_PANEL, problems
        )
        other_number = parsing.text(other)
        if not other_number:
            problems.append(
                parsing.problem(f"share_with[{i}].job", other, "is required", "a job number")
            )
        partners.append((other_number, n))
    if problems:
        raise InvalidInput("The release has problems; nothing was released.", problems=problems)
    with transaction.atomic():
        numbers = [number, *[p for p, _ in partners]]
        if len({n.upper() for n in numbers}) != len(numbers):
            raise InvalidInput("A job can share a panel with another job only once, not itself.")
        locked = {
            j.number.upper(): j
            for j in Job.objects.select_for_update(no_key=True)
            .filter(number__in=numbers)
            .order_by("pk")
        }
        for typed in numbers:  # case-insensitive fallback for typed numbers
            if typed.upper() not in locked:
                found = (
                    Job.objects.select_for_update(no_key=True).filter(number__iexact=typed).first()
                )
                if found is None:
                    raise NotFound(f"No job numbered {typed!r}.")
                locked[typed.upper()] = found
        main = locked[number.upper()]
        existing = _existing_release(main)
        if existing is not None:
            return existing
        jobs = [main] + [locked[p.upper()] for p, _ in partners]
        counts = [bpp] + [c for _, c in partners]
        reasons: list[str] = []
        routings: dict[int, RoutingRevision] = {}
        for job in jobs:
            if job is not main and Panel.objects.filter(images__job=job).exists():
                reasons.append(f"{job.number} is already released on panels of its own.")
                continue
            routing = released_routing(job.part_revision)
            if routing is None:
                reasons.append(
                    f"{job.number}: part {job.part_revision} has no released routing revision; "
                    "a process engineer drafts and releases one on the engineering pages."
                )
                continue
            if routing.ipc_class < job.ipc_class:
                reasons.append(
                    f"{job.number} orders IPC class {job.ipc_class} but routing "
                    f"r{routing.number} of {job.part_revision} is built for class "
                    f"{routing.ipc_class}; the spec must be raised to class {job.ipc_class} first."
                )
            routings[job.pk] = routing
        if not reasons and len(jobs) > 1:
            images = [
                panelise.SharedImage(
                    label=j.number,
                    ipc_class=routings[j.pk].ipc_class,
                    spec=routings[j.pk].build_spec,
                )
                for j in jobs
            ]
            reasons += [
                f"These jobs cannot share a panel: {r}." for r in panelise.incompatibilities(images)
            ]
        if reasons:
            raise Conflict(
                "Not released: " + " ".join(reasons),
                problems=[parsing.problem("job", None, r, None) for r in reasons],
            )
        strictest = max(jobs, key=lambda j: (routings[j.pk].ipc_class, j is main))
        routing = routings[strictest.pk]
        panels_for: list[int] = []
        allowances: list[Decimal] = []
        for job, count in zip(jobs, counts, strict=True):
            allowance, _ = scrap_allowance_for(job.part_revision.part)
            allowances.append(allowance)
            panels_for.append(panelise.panels_needed(job.quantity, count, float(allowance)))
        total = max(panels_for)
        site = PlanningSettings.current()
        sizes = panelise.lot_sizes(total, site.max_panels_per_lot)
        codes = _new_lot_codes(main, len(sizes))
        lots: list[Lot] = []
        for code, size in zip(codes, sizes, strict=True):
            lots.append(
                plant.create_lot(
                    actor=person.user,
                    code=code,
                    routing_revision=routing,
                    images=list(zip(jobs, counts, strict=True)),
                    panels=size,
                )
            )
        now = timezone.now()
        for job, count, allowance in zip(jobs, counts, allowances, strict=True):
            layout = PanelLayout.objects.create(
                job=job,
                boards_per_panel=count,
                scrap_allowance_pct=allowance,
                released_at=now,
                released_by=person.user,
            )
            layout.shared_with.set([j for j in jobs if j is not job])
            job.routing_revision = routing  # the revision its boards actually run on
            job.save(update_fields=["routing_revision"])
            audit.record(
                actor=person.user,
                action="job.released",
                object_type="job",
                object_id=job.pk,
                after={
                    "boards_per_panel": count,
                    "scrap_allowance_pct": str(allowance),
                    "panels": total,
                    "lots": [lot.code for lot in lots],
                    "routing_revision": routing.pk,
                    "shared_with": [j.number for j in jobs if j is not job],
                },
            )
        panels = list(Panel.objects.filter(lot__in=lots).order_by("serial"))
        return ReleaseResult(
            jobs=jobs, lots=lots, panels=panels, created=True, routing_revision=routing
        )


def release_makeup(*, person: Person | None, number: str, panels: Any = None) -> ReleaseResult:
    """Start make-up panels for a job whose remaining good boards no longer cover the order.

    `panels` defaults to what covers the shortfall with the job's scrap allowance. The
    make-up lot runs on the newest released routing revision of the job's part revision,
    carrying only this job's images at its released layout.
    """
    require_planner(person)
    assert person is not None
    with transaction.atomic():
        job = (
            Job.objects.select_for_update(no_key=True)
            .filter(number__iexact=(number or "").strip())
            .first()
        )
        if job is None:
            raise NotFound(f"No job numbered {number!r}.")
        layout = PanelLayout.objects.filter(job=job).first()
        if layout is None:
            raise Conflict(f"{job.number} is not released yet; release it first.")
        summary = summaries([job])[0]
        shortfall = summary.quantities.shortfall
        if shortfall < 1:
            raise Conflict(
                f"{job.number} has no shortfall: {summary.quantities.good_remaining} good boards "
                f"remain for {job.quantity} ordered."
            )
        default = panelise.makeup_panels(
            shortfall, layout.boards_per_panel, float(layout.scrap_allowance_pct)
        )
        count = default
        if panels not in (None, ""):
            problems: list[dict[str, Any]] = []
            count = _whole(panels, "panels", 1, 500, problems)
            if problems:
                raise InvalidInput("The make-up release has problems.", problems=problems)
        routing = released_routing(job.part_revision)
        if routing is None:
            raise Conflict(
                f"Part {job.part_revision} has no released routing revision; make-up panels "
                "need one."
            )
        site = PlanningSettings.current()
        sizes = panelise.lot_sizes(count, site.max_panels_per_lot)
        codes = _new_lot_codes(job, len(sizes))
        lots = [
            plant.create_lot(
                actor=person.user,
                code=code,
                routing_revision=routing,
                images=[(job, layout.boards_per_panel)],
                panels=size,
                priority=50,  # make-up runs ahead of new work in the queues
            )
            for code, size in zip(codes, sizes, strict=True)
        ]
        audit.record(
            actor=person.user,
            action="job.makeup_released",
            object_type="job",
            object_id=job.pk,
            after={"shortfall": shortfall, "panels": count, "lots": [lot.code for lot in lots]},
        )
        panel_rows = list(Panel.objects.filter(lot__in=lots).order_by("serial"))
        return ReleaseResult(
            jobs=[job], lots=lots, panels=panel_rows, created=True, routing_revision=routing
        )


def release_plan(job: Job, boards_per_panel: int | None = None) -> dict[str, Any]:
    """What a release would start, for the release form (nothing saved)."""
    part = job.part_revision.part
    allowance, source = scrap_allowance_for(part)
    planning = PartPlanning.objects.filter(part=part).first()
    bpp = boards_per_panel or (planning.boards_per_panel if planning else None)
    site = PlanningSettings.current()
    routing = released_routing(job.part_revision)
    plan: dict[str, Any] = {
        "boards_per_panel": bpp,
        "scrap_allowance_pct": allowance,
        "allowance_source": source,
        "max_panels_per_lot": site.max_panels_per_lot,
        "routing": routing,
        "panels": None,
        "lot_sizes": [],
    }
    if bpp:
        panels = panelise.panels_needed(job.quantity, bpp, float(allowance))
        plan["panels"] = panels
        plan["lot_sizes"] = panelise.lot_sizes(panels, site.max_panels_per_lot)
    return plan


def shareable_jobs(job: Job) -> list[Job]:
    """Unreleased jobs whose routing could share a panel with this one (for the form)."""
    mine = released_routing(job.part_revision)
    if mine is None:
        return []
    out: list[Job] = []
    for other in (
        job_queryset().exclude(pk=job.pk).filter(panels__isnull=True).order_by("due_date")[:200]
    ):
        routing = released_routing(other.part_revision)
        if routing is None:
            continue
        images = [
            panelise.SharedImage(job.number, mine.ipc_class, mine.build_spec),
            panelise.SharedImage(other.number, routing.ipc_class, routing.build_spec),
        ]
        if not panelise.incompatibilities(images):
            out.append(other)
    return out


# --- scanning ---------------------------------------------------------------------------
