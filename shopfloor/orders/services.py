"""Use cases of the planner: enter a job, read its status and quantities, release it to
the floor (panels, lots, travellers), release make-up panels for a shortfall, and find a
lot from whatever a tablet scans.

Views, API views and the demo loader call only these functions. The counting and
panel rules are pure (shopfloor.core.panelise); this module stores their results.
"""

from __future__ import annotations

import datetime as dt
import re
from collections import defaultdict
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from decimal import Decimal
from typing import Any

from django.db import IntegrityError, transaction
from django.db.models import Q, QuerySet
from django.utils import timezone

from routing.models import RoutingRevision
from shopfloor.audit import services as audit
from shopfloor.core import panelise, units
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.orders.models import PanelLayout, PartPlanning, PlanningSettings
from shopfloor.plant import services as plant
from shopfloor.plant.models import (
    Customer,
    Job,
    Lot,
    Panel,
    PanelImage,
    Part,
    PartRevision,
    Person,
    Role,
)

PLANNER_ROLES = frozenset({Role.PLANNER, Role.ADMIN})
MAX_QUANTITY = 1_000_000
MAX_NOTES = 4000
JOB_NUMBER_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,19}$")
CODE_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._ -]{0,59}$")
OVERRIDE_KEYS = ("quantity", "step_code", "min", "max", "target", "reason")

#: Job statuses, in the order a job passes through them (plain English, our own words).
STATUSES: dict[str, str] = {
    "entered": "Entered (not released)",
    "released": "Released to the floor",
    "in_process": "In process",
    "held": "On hold",
    "ready_to_ship": "Ready to ship",
    "shipped": "Shipped",
}


def has_nul(value: Any) -> bool:
    """True when any text inside `value` holds a NUL character, which PostgreSQL cannot
    store in text or jsonb: such input is refused with a reason instead of a 500."""
    if isinstance(value, str):
        return "\x00" in value
    if isinstance(value, Mapping):
        return any(has_nul(k) or has_nul(v) for k, v in value.items())
    if isinstance(value, list | tuple):
        return any(has_nul(v) for v in value)
    return False


def refuse_nul(value: Any, what: str = "body") -> None:
    if has_nul(value):
        raise InvalidInput(
            f"The {what} contains a NUL character (\\0), which cannot be stored.",
            problems=[_problem(what, None, "contains a NUL character", "text without \\0")],
        )


def require_planner(person: Person | None) -> Person:
    """Only planners (and administrators) enter and release jobs."""
    if person is None:
        raise NotAllowed("This account has no badge on file; ask an administrator to add one.")
    roles = person.roles() | ({"admin"} if person.user.is_superuser else set())
    if not roles & PLANNER_ROLES:
        raise NotAllowed("Only a planner (or an administrator) can enter and release jobs.")
    return person


def _problem(field_: str, value: Any, problem: str, allowed: Any = None) -> dict[str, Any]:
    if value is not None and not isinstance(value, str | int | float | bool | list | dict):
        value = str(value)
    return {"field": field_, "value": value, "problem": problem, "allowed": allowed}


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


def _text(value: Any) -> str:
    return value.strip() if isinstance(value, str) else ""


def check_job_input(data: JobInput, *, today: dt.date | None = None) -> _CleanJob:
    """Every problem with a job entry at once (InvalidInput), or the cleaned values."""
    today = today or timezone.localdate()
    refuse_nul(data.__dict__, "job")
    problems: list[dict[str, Any]] = []

    def text_field(name: str, value: Any, *, required: bool, what: str) -> str:
        if value is not None and not isinstance(value, str):
            problems.append(_problem(name, value, "must be text", what))
            return ""
        text = _text(value)
        if required and not text:
            problems.append(_problem(name, value, "is required", what))
        elif text and not CODE_RE.match(text):
            problems.append(_problem(name, value, "has characters a label cannot print", what))
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
        problems.append(_problem("part_revision", revision, "too long", "at most 10 characters"))
    customer_name = _text(data.customer_name)[:200]
    description = _text(data.part_description)[:200]

    quantity = 0
    q = data.quantity
    if isinstance(q, str) and q.strip().isdigit():
        q = int(q.strip())
    if isinstance(q, bool) or not isinstance(q, int):
        problems.append(
            _problem("quantity", q, "must be a whole number of boards", f"1 to {MAX_QUANTITY}")
        )
    elif not 1 <= q <= MAX_QUANTITY:
        problems.append(_problem("quantity", q, "out of range", f"1 to {MAX_QUANTITY}"))
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
                _problem("due_date", data.due_date, "not a date", "YYYY-MM-DD, e.g. 2027-03-01")
            )
    else:
        problems.append(_problem("due_date", data.due_date, "is required", "YYYY-MM-DD"))
    if due is not None and due < today:
        problems.append(
            _problem("due_date", due.isoformat(), "is in the past", f"{today.isoformat()} or later")
        )

    ipc = data.ipc_class
    if isinstance(ipc, str) and ipc.strip().isdigit():
        ipc = int(ipc.strip())
    if isinstance(ipc, bool) or ipc not in (1, 2, 3):
        problems.append(
            _problem("ipc_class", data.ipc_class, "IPC class must be 1, 2 or 3", [1, 2, 3])
        )
        ipc = 0

    notes = data.customer_spec_notes
    if notes is None:
        notes = ""
    if not isinstance(notes, str):
        problems.append(_problem("customer_spec_notes", notes, "must be text", None))
        notes = ""
    elif len(notes) > MAX_NOTES:
        problems.append(
            _problem(
                "customer_spec_notes",
                f"{len(notes)} characters",
                "too long",
                f"at most {MAX_NOTES}",
            )
        )

    overrides = _check_overrides(data.customer_overrides, problems)

    number = _text(data.number)
    if data.number not in (None, "") and not isinstance(data.number, str):
        problems.append(_problem("number", data.number, "must be text", "e.g. WO-24120"))
    elif number and not JOB_NUMBER_RE.match(number):
        problems.append(
            _problem(
                "number",
                number,
                "not a usable job number",
                "1 to 20 letters, digits, '-', '.', '_' (leave blank to get the next number)",
            )
        )
    elif number and Job.objects.filter(number__iexact=number).exists():
        problems.append(_problem("number", number, "a job with this number already exists", None))

    if (
        customer
        and not customer_name
        and not Customer.objects.filter(code__iexact=customer).exists()
    ):
        problems.append(
            _problem(
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
            _problem(
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
            problems.append(_problem(where, item, "must be an object", list(OVERRIDE_KEYS)))
            continue
        before = len(problems)
        for key in item:
            if key not in OVERRIDE_KEYS:
                problems.append(
                    _problem(f"{where}.{key}", item[key], "unknown key", list(OVERRIDE_KEYS))
                )
        quantity = item.get("quantity")
        if quantity not in known:
            problems.append(
                _problem(f"{where}.quantity", quantity, "not a measured quantity", known)
            )
        values: dict[str, float] = {}
        for key in ("min", "max", "target"):
            v = item.get(key)
            if v is None or v == "":
                continue
            if isinstance(v, bool) or not isinstance(v, int | float):
                problems.append(_problem(f"{where}.{key}", v, "must be a number", None))
            else:
                values[key] = float(v)
        if not values:
            problems.append(
                _problem(where, None, "gives no limit", "at least one of min, max, target")
            )
        if "min" in values and "max" in values and values["min"] > values["max"]:
            problems.append(
                _problem(f"{where}.min", values["min"], "is above max", f"<= {values['max']:g}")
            )
        if not _text(item.get("reason")):
            problems.append(
                _problem(
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


@dataclass
class Quantities:
    """Boards of one job at each stage (a board is one image on a production panel)."""

    ordered: int
    on_panels: int = 0
    in_process: int = 0
    finished: int = 0
    scrapped: int = 0
    shipped: int = 0

    @property
    def good_remaining(self) -> int:
        """Boards that can still reach the customer: started, not scrapped (shipped included)."""
        return self.on_panels - self.scrapped

    @property
    def shortfall(self) -> int:
        """Boards missing even if every remaining good board passes: make-up is needed."""
        return max(0, self.ordered - self.good_remaining)

    def as_dict(self) -> dict[str, int]:
        return {
            "ordered": self.ordered,
            "on_panels": self.on_panels,
            "in_process": self.in_process,
            "finished": self.finished,
            "scrapped": self.scrapped,
            "shipped": self.shipped,
            "good_remaining": self.good_remaining,
            "shortfall": self.shortfall,
        }


@dataclass
class LotLine:
    code: str
    status: str
    status_label: str
    on_hold: bool
    panels: int
    boards: int
    current_step: str = ""


@dataclass
class JobSummary:
    job: Job
    status: str
    quantities: Quantities
    lots: list[LotLine]
    #: When the job is expected to finish: the P50 and P90 of the newest fresh finish
    #: forecast (shopfloor/planning), its due-date state from P90; None while no fresh
    #: forecast knows the job ("not known yet").
    projected_finish: dt.datetime | None = None
    projected_finish_p90: dt.datetime | None = None
    forecast_due_state: str | None = None

    @property
    def status_label(self) -> str:
        return STATUSES[self.status]

    @property
    def released(self) -> bool:
        return self.status != "entered"


def shipped_quantities(job_ids: Iterable[int]) -> dict[int, int]:
    """Boards shipped per job, from the shipment records (shopfloor.shipping)."""
    from shopfloor.shipping.services import shipped_by_job

    return shipped_by_job(job_ids)


def boards_scrapped_on_live_panels(job_ids: Iterable[int]) -> dict[int, int]:
    """Boards scrapped on panels that are themselves still running (crossed-out images,
    boards final inspection did not accept), from the per-step scrap records."""
    from shopfloor.floor.services import boards_scrapped_on_live_panels as scrapped

    return scrapped(job_ids)


def short_jobs(limit: int = 12) -> list[dict[str, Any]]:
    """Released jobs whose boards on live panels no longer cover the order, in ONE query
    (the supervisor board's budget is fixed): number, ordered, good boards, shortfall.

    Counts whole scrapped panels and scrapped lots; boards scrapped on live panels are on
    the job page (`summaries`), which the board links to.
    """
    from django.db.models import Count, F, Sum
    from django.db.models.functions import Coalesce

    good = Sum(
        "images__count",
        filter=Q(images__panel__scrapped=False)
        & ~Q(images__panel__lot__status=Lot.Status.SCRAPPED),
    )
    rows = (
        Job.objects.annotate(started=Count("images"), good=Coalesce(good, 0))
        .filter(started__gt=0, good__lt=F("quantity"))
        .order_by("due_date", "number")
        .values_list("number", "quantity", "good")[:limit]
    )
    return [{"number": n, "ordered": q, "good": g, "shortfall": q - g} for n, q, g in rows]


def projected_finishes(job_ids: list[int]) -> dict[int, Any]:
    """The jobs' finish forecasts (shopfloor/planning), by job id, in one query."""
    from shopfloor.planning.services import job_projections

    return job_projections(job_ids)


def summaries(jobs: Iterable[Job]) -> list[JobSummary]:
    """Status, quantities and lots of many jobs in a fixed number of queries."""
    jobs = list(jobs)
    ids = [j.pk for j in jobs]
    images = (
        PanelImage.objects.filter(job_id__in=ids)
        .values("job_id", "count", "panel__scrapped", "panel__lot_id")
        .order_by()
    )
    lots = {
        lot.pk: lot
        for lot in Lot.objects.filter(panels__images__job_id__in=ids).distinct().order_by("code")
    }
    per_job_lots: dict[int, dict[int, list[int]]] = defaultdict(lambda: defaultdict(lambda: [0, 0]))
    quantities = {j.pk: Quantities(ordered=j.quantity) for j in jobs}
    for row in images:
        q = quantities[row["job_id"]]
        lot = lots[row["panel__lot_id"]]
        count = row["count"]
        q.on_panels += count
        panel_line = per_job_lots[row["job_id"]][lot.pk]
        panel_line[0] += 1
        panel_line[1] += count
        if row["panel__scrapped"] or lot.status == Lot.Status.SCRAPPED:
            q.scrapped += count
        elif lot.status == Lot.Status.COMPLETE:
            q.finished += count
        else:
            q.in_process += count
    shipped = shipped_quantities(ids)
    crossed = boards_scrapped_on_live_panels(ids)
    out: list[JobSummary] = []
    current = _current_steps(list(lots))
    forecasts = projected_finishes(ids)
    for job in jobs:
        q = quantities[job.pk]
        q.shipped = shipped.get(job.pk, 0)
        extra = crossed.get(job.pk, 0)
        q.scrapped += extra
        q.finished = max(0, q.finished - q.shipped)
        lines = [
            LotLine(
                code=lots[lot_id].code,
                status=lots[lot_id].status,
                status_label=lots[lot_id].get_status_display(),
                on_hold=lots[lot_id].on_hold,
                panels=counts[0],
                boards=counts[1],
                current_step=current.get(lot_id, ""),
            )
            for lot_id, counts in sorted(
                per_job_lots[job.pk].items(), key=lambda kv: lots[kv[0]].code
            )
        ]
        out.append(
            JobSummary(
                job=job,
                status=_status(q, [lots[i] for i in per_job_lots[job.pk]]),
                quantities=q,
                lots=lines,
                projected_finish=forecasts[job.pk].p50 if job.pk in forecasts else None,
                projected_finish_p90=forecasts[job.pk].p90 if job.pk in forecasts else None,
                forecast_due_state=forecasts[job.pk].state if job.pk in forecasts else None,
            )
        )
    return out


def _current_steps(lot_ids: list[int]) -> dict[int, str]:
    from shopfloor.floor.models import LotStep

    out: dict[int, str] = {}
    for lot_id, name in (
        LotStep.objects.filter(
            lot_id__in=lot_ids,
            status__in=[LotStep.Status.WAITING, LotStep.Status.IN_PROGRESS, LotStep.Status.PAUSED],
        )
        .order_by("lot_id", "position")
        .values_list("lot_id", "name")
    ):
        out.setdefault(lot_id, name)
    return out


def _status(q: Quantities, lots: list[Lot]) -> str:
    if q.shipped >= q.ordered:
        return "shipped"
    live = [lot for lot in lots if lot.status != Lot.Status.SCRAPPED]
    if not lots:
        return "entered"
    if any(lot.on_hold for lot in live if lot.status != Lot.Status.COMPLETE):
        return "held"
    if live and all(lot.status == Lot.Status.NOT_STARTED for lot in live):
        return "released"
    if live and all(lot.status == Lot.Status.COMPLETE for lot in live):
        return "ready_to_ship"
    return "in_process"


def job_queryset() -> QuerySet[Job]:
    return Job.objects.select_related("part_revision__part__customer", "routing_revision")


def find_job(number: str) -> Job:
    number = (number or "").strip()
    ok = number and not has_nul(number)
    job = job_queryset().filter(number__iexact=number).first() if ok else None
    if job is None:
        raise NotFound(f"No job numbered {number!r}.")
    return job


def job_summary(number: str, scope: Any = None) -> JobSummary:
    """One job's summary; with a read scope (shopfloor.access.Scope), only the lots that
    reader may see are listed (an operator sees the lots that reached their centers)."""
    summary = summaries([find_job(number)])[0]
    if scope is not None and not scope.sees_all:
        from shopfloor.access import visible_lots

        seen = set(
            visible_lots(
                scope, Lot.objects.filter(code__in=[lot.code for lot in summary.lots])
            ).values_list("code", flat=True)
        )
        summary.lots = [lot for lot in summary.lots if lot.code in seen]
    return summary


@dataclass(frozen=True)
class JobFilter:
    status: str = ""
    customer: str = ""
    due_before: dt.date | None = None


def parse_filter(raw: Mapping[str, Any]) -> JobFilter:
    """Query-string filters, every problem at once."""
    refuse_nul({k: raw.get(k) for k in ("status", "customer", "due_before")}, "filter")
    problems: list[dict[str, Any]] = []
    status = _text(raw.get("status"))
    if status and status not in STATUSES:
        problems.append(_problem("status", status, "not a job status", list(STATUSES)))
    due: dt.date | None = None
    due_text = _text(raw.get("due_before"))
    if due_text:
        from shopfloor.display import read_date

        try:
            due = read_date("due_before", due_text)
        except InvalidInput as exc:
            allowed = exc.problems[0]["allowed"] if exc.problems else "YYYY-MM-DD"
            problems.append(_problem("due_before", due_text, "not a date", allowed))
    customer = _text(raw.get("customer"))[:40]
    if problems:
        raise InvalidInput("The filter has problems.", problems=problems)
    return JobFilter(status=status, customer=customer, due_before=due)


def list_jobs(flt: JobFilter, *, limit: int = 500) -> list[JobSummary]:
    """Jobs by due date; status is derived from lots, so it is filtered after counting."""
    qs = job_queryset().order_by("due_date", "number")
    if flt.customer:
        qs = qs.filter(
            Q(part_revision__part__customer__code__iexact=flt.customer)
            | Q(part_revision__part__customer__name__icontains=flt.customer)
        )
    if flt.due_before:
        qs = qs.filter(due_date__lt=flt.due_before)
    rows = summaries(qs[: limit * 4] if flt.status else qs[:limit])
    if flt.status:
        rows = [r for r in rows if r.status == flt.status]
    return rows[:limit]


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
        problems.append(_problem(name, value, "must be a whole number", f"{low} to {high}"))
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
    refuse_nul([number, share_with or []], "release")
    problems: list[dict[str, Any]] = []
    bpp = _whole(boards_per_panel, "boards_per_panel", 1, panelise.MAX_BOARDS_PER_PANEL, problems)
    partners: list[tuple[str, int]] = []
    for i, (other, count) in enumerate(share_with or []):
        n = _whole(
            count, f"share_with[{i}].boards_per_panel", 1, panelise.MAX_BOARDS_PER_PANEL, problems
        )
        other_number = _text(other)
        if not other_number:
            problems.append(_problem(f"share_with[{i}].job", other, "is required", "a job number"))
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
                problems=[_problem("job", None, r, None) for r in reasons],
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


def lots_for_scan(code: str) -> list[Lot]:
    """The lots a scanned code names: a lot code, a panel serial or a job number.

    A lot code or panel serial names one lot; a job number names its lots still on the
    floor (all of them when none is left). Raises NotFound naming what was tried.
    """
    code = (code or "").strip()
    if not code or has_nul(code):
        raise InvalidInput("Scan or type a lot code, panel serial or job number.")
    lot = Lot.objects.filter(code__iexact=code).first()
    if lot is not None:
        return [lot]
    panel = Panel.objects.select_related("lot").filter(serial__iexact=code).first()
    if panel is not None:
        return [panel.lot]
    job = Job.objects.filter(number__iexact=code).first()
    if job is not None:
        lots = list(Lot.objects.filter(panels__images__job=job).distinct().order_by("code"))
        open_lots = [
            lot for lot in lots if lot.status in (Lot.Status.NOT_STARTED, Lot.Status.IN_PROCESS)
        ]
        if lots:
            return open_lots or lots
        raise NotFound(f"Job {job.number} is not released to the floor yet, so it has no lots.")
    raise NotFound(
        f"No lot with code {code!r}, and no panel serial or job number like it either. "
        "Check the label and scan again."
    )
