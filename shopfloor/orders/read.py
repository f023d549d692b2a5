"""Jobs' status and quantities, as the job pages, the API and the board read them: boards
ordered, on panels, in process, finished, scrapped and shipped; each lot's current step;
the job list and its filter; jobs short of their order. They only read; job entry and
release are in shopfloor/orders/services.py.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from django.db.models import Count, F, Q, QuerySet, Sum
from django.db.models.functions import Coalesce

from shopfloor import parsing
from shopfloor.access import visible_lots
from shopfloor.display import read_date
from shopfloor.errors import InvalidInput, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.floor.services import boards_scrapped_on_live_panels as scrapped
from shopfloor.planning.services import job_projections
from shopfloor.plant.models import (
    Job,
    Lot,
    Panel,
    PanelImage,
)
from shopfloor.shipping.services import shipped_by_job

STATUSES: dict[str, str] = {
    "entered": "Entered (not released)",
    "released": "Released to the floor",
    "in_process": "In process",
    "held": "On hold",
    "ready_to_ship": "Ready to ship",
    "shipped": "Shipped",
}


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

    return shipped_by_job(job_ids)


def boards_scrapped_on_live_panels(job_ids: Iterable[int]) -> dict[int, int]:
    """Boards scrapped on panels that are themselves still running (crossed-out images,
    boards final inspection did not accept), from the per-step scrap records."""

    return scrapped(job_ids)


def short_jobs(limit: int = 12) -> list[dict[str, Any]]:
    """Released jobs whose boards on live panels no longer cover the order, in ONE query
    (the supervisor board's budget is fixed): number, ordered, good boards, shortfall.

    Counts whole scrapped panels and scrapped lots; boards scrapped on live panels are on
    the job page (`summaries`), which the board links to.
    """

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

    out: dict[int, str] = {}
    for lot_id, name in (
        LotStep.objects.filter(lot_id__in=lot_ids)
        .open()
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
    ok = number and not parsing.has_nul(number)
    job = job_queryset().filter(number__iexact=number).first() if ok else None
    if job is None:
        raise NotFound(f"No job numbered {number!r}.")
    return job


def job_summary(number: str, scope: Any = None) -> JobSummary:
    """One job's summary; with a read scope (shopfloor.access.Scope), only the lots that
    reader may see are listed (an operator sees the lots that reached their centers)."""
    summary = summaries([find_job(number)])[0]
    if scope is not None and not scope.sees_all:
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
    parsing.refuse_nul({k: raw.get(k) for k in ("status", "customer", "due_before")}, "filter")
    problems: list[dict[str, Any]] = []
    status = parsing.text(raw.get("status"))
    if status and status not in STATUSES:
        problems.append(parsing.problem("status", status, "not a job status", list(STATUSES)))
    due: dt.date | None = None
    due_text = parsing.text(raw.get("due_before"))
    if due_text:
        try:
            due = read_date("due_before", due_text)
        except InvalidInput as exc:
            allowed = exc.problems[0]["allowed"] if exc.problems else "YYYY-MM-DD"
            problems.append(parsing.problem("due_before", due_text, "not a date", allowed))
    customer = parsing.text(raw.get("customer"))[:40]
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


def lots_for_scan(code: str) -> list[Lot]:
    """The lots a scanned code names: a lot code, a panel serial or a job number.

    A lot code or panel serial names one lot; a job number names its lots still on the
    floor (all of them when none is left). Raises NotFound naming what was tried.
    """
    code = (code or "").strip()
    if not code or parsing.has_nul(code):
        raise InvalidInput("Scan or type a lot code, panel serial or job number.")
    lot = Lot.objects.with_code(code).first()
    if lot is not None:
        return [lot]
    panel = Panel.objects.select_related("lot").filter(serial__iexact=code).first()
    if panel is not None:
        return [panel.lot]
    job = Job.objects.filter(number__iexact=code).first()
    if job is not None:
        lots = list(Lot.objects.filter(panels__images__job=job).distinct().order_by("code"))
        open_lots = [lot for lot in lots if lot.status in Lot.ACTIVE_STATUSES]
        if lots:
            return open_lots or lots
        raise NotFound(f"Job {job.number} is not released to the floor yet, so it has no lots.")
    raise NotFound(
        f"No lot with code {code!r}, and no panel serial or job number like it either. "
        "Check the label and scan again."
    )
