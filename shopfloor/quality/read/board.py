"""The supervisor board: every work center's queue, WIP age, queue-time and due-date risk.

A lot is at the work center of its current step: the first LotStep that is not done or
skipped. The board is read in a fixed number of SQL queries whatever the number of lots
(one query for the current steps, with the first open position and the remaining
standard minutes as window functions over each lot's open steps; one for the jobs on the
lots shown, or on every lot when sorting by due date; one each for open holds, open
alerts, finishes and customers), so a wall screen polling every few seconds costs the
same at 20 lots as at 2,000.

Time, not only queries: the overview shows the head of each queue (15 rows a center), so
a lot's derived values (ages, queue-time and due-date state, display text, links) are
worked out when first read, links come from one `reverse()` per URL pattern, and the
rows are written out by shopfloor/quality/templatetags/board_rows.py. Measured with
bench/bench_board.py.

This module only reads. The board's writes (moving a lot in a queue, releasing a
queue-time warning) are services: shopfloor/quality/services/queue.py and
shopfloor/quality/services/__init__.py (release_queue_warning).
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from django.db.models import (
    Exists,
    F,
    OuterRef,
    Q,
    QuerySet,
    Subquery,
    Window,
)
from django.db.models.functions import FirstValue
from django.utils import timezone
from django.utils.text import Truncator

from shopfloor.access import Scope
from shopfloor.core import schedule
from shopfloor.core.dates import ISO, DateFormat
from shopfloor.display import carried_settings, read_date, with_site_settings
from shopfloor.errors import InvalidInput
from shopfloor.floor.models import LotStep
from shopfloor.planning.models import JobForecast, LotForecast
from shopfloor.planning.services import fresh_runs
from shopfloor.plant.models import Customer, IpcClass, Lot, PanelImage, WorkCenter
from shopfloor.quality.models import Alert, Hold
from shopfloor.quality.read.board_display import (
    BoardLinks,
    due_end,
    duration_text,
    format_of,
    when_text,
)

ACTIVE_LOT = Lot.ACTIVE_STATUSES
SORTS = {
    "queue": "queue order",
    "due": "earliest due date first",
    "age": "longest waiting first",
    "lot": "lot code",
}
MAX_DUE_RANGE_DAYS = 400
ALERT_LIMIT = 200
MAX_ROWS_PER_CENTER = 400
# The all-centers overview (the wall screen) shows the first rows of each center: held
# lots first, then in work, then the head of the queue. Filtering to one work center
# shows its whole queue (up to MAX_ROWS_PER_CENTER). Counts stay exact either way.
OVERVIEW_ROWS_PER_CENTER = 15

# Worst first: a lot shows the worst state among the jobs imaged on its panels.
_DUE_RANK = {schedule.DueState.LATE: 0, schedule.DueState.AT_RISK: 1, schedule.DueState.ON_TIME: 2}
DUE_WORDS = {
    schedule.DueState.LATE: "LATE",
    schedule.DueState.AT_RISK: "AT RISK",
    schedule.DueState.ON_TIME: "on time",
}


@dataclass(frozen=True)
class BoardFilters:
    """Parsed board filters; `as_query()` gives them back for links and the poll URL."""

    customer: str = ""
    due_from: dt.date | None = None
    due_to: dt.date | None = None
    ipc_class: int | None = None
    finish: str = ""
    work_center: str = ""
    sort: str = "queue"

    def as_query(self) -> dict[str, str]:
        raw = {
            "customer": self.customer,
            "due_from": self.due_from.isoformat() if self.due_from else "",
            "due_to": self.due_to.isoformat() if self.due_to else "",
            "ipc_class": str(self.ipc_class) if self.ipc_class else "",
            "finish": self.finish,
            "work_center": self.work_center,
            "sort": self.sort if self.sort != "queue" else "",
        }
        return {k: v for k, v in raw.items() if v}


def parse_filters(params: Any) -> BoardFilters:
    """Read the board's query string; a bad value raises InvalidInput saying what is allowed.

    Dates are read in ISO 8601 (links carry it) or the site's format (what people type)."""
    due_from = read_date("due_from", params.get("due_from", ""))
    due_to = read_date("due_to", params.get("due_to", ""))
    if due_from and due_to:
        if due_to < due_from:
            raise InvalidInput("The due date range ends before it starts; swap the two dates.")
        if (due_to - due_from).days > MAX_DUE_RANGE_DAYS:
            raise InvalidInput(
                f"The due date range spans more than {MAX_DUE_RANGE_DAYS} days; narrow it."
            )
    ipc_raw = (params.get("ipc_class", "") or "").strip()
    ipc_class = None
    if ipc_raw:
        if ipc_raw not in {"1", "2", "3"}:
            raise InvalidInput(f"IPC class {ipc_raw!r} is not 1, 2 or 3.")
        ipc_class = int(ipc_raw)
    sort = (params.get("sort", "") or "queue").strip()
    if sort not in SORTS:
        raise InvalidInput(f"Sort {sort!r} is not known; allowed: {', '.join(SORTS)}.")
    return BoardFilters(
        customer=(params.get("customer", "") or "").strip()[:20],
        due_from=due_from,
        due_to=due_to,
        ipc_class=ipc_class,
        finish=(params.get("finish", "") or "").strip()[:40],
        work_center=(params.get("work_center", "") or "").strip()[:40],
        sort=sort,
    )


@dataclass(eq=False)
class JobOnLot:
    """A job imaged on a lot's panels; one object per job, shared by all its lots."""

    id: int
    number: str
    part_number: str
    customer_code: str
    due_date: dt.date
    ipc_class: int
    due_at: dt.datetime  # the end of the due date in the site's time zone
    url: str = ""
    # The newest fresh finish forecast (shopfloor/planning), None while there is none.
    p50: dt.datetime | None = None
    p90: dt.datetime | None = None
    detail: str = field(init=False)

    def __post_init__(self) -> None:
        self.detail = f"{self.customer_code} {self.part_number} · C{self.ipc_class}"


def queue_order(
    queue_priority: int,
    lot_priority: int,
    arrived_at: dt.datetime | None,
    lot_created_at: dt.datetime,
    code: str,
) -> tuple[Any, ...]:
    """The order of a queue: the supervisor's order, then lot priority, then first come.

    The board shows this order and `move_in_queue` moves lots within it, so both use it."""
    return (queue_priority, lot_priority, arrived_at or lot_created_at, code)


@dataclass(eq=False)
class BoardLot:
    """One lot as the board shows it at its current work center.

    Built for every active lot (counts and sorting need them all), but the board shows
    only the head of each queue, so everything derived (ages, queue-time and due-date
    state, display text, links) is worked out when first read, not up front."""

    step_id: int
    step_name: str
    step_status: str
    lot_id: int
    lot_code: str
    on_hold: bool
    finish: str
    arrived_at: dt.datetime | None
    lot_started_at: dt.datetime | None
    lot_created_at: dt.datetime
    queue_limit_minutes: int | None
    queue_released: str
    queue_priority: int
    lot_priority: int
    remaining_minutes: int
    now: dt.datetime
    links: BoardLinks
    hold_reason: str = ""
    date_format: DateFormat = ISO
    # None until read: build_board reads the jobs of the rows it shows (of every lot
    # when sorting by due date), so the lots behind "... and N more" have none.
    jobs: list[JobOnLot] | None = None
    alerts: list[Alert] = field(default_factory=list)
    # The lot's own forecast finish, read with its jobs (None: no fresh forecast).
    p50: dt.datetime | None = None
    p90: dt.datetime | None = None

    @property
    def job_list(self) -> list[JobOnLot]:
        """The jobs on the lot's panels, by number."""
        if self.jobs is None:
            raise LookupError(
                f"The jobs on lot {self.lot_code} were not read: the board reads them for "
                "the rows it shows, and for every lot when it sorts by due date."
            )
        return self.jobs

    @cached_property
    def state(self) -> str:
        if self.on_hold:
            return "on_hold"
        if self.step_status == LotStep.Status.WAITING:
            return "queued"
        return "in_work"

    @property
    def state_word(self) -> str:
        if self.on_hold:
            return "ON HOLD"
        if self.step_status == LotStep.Status.PAUSED:
            return "IN WORK (paused)"
        return "QUEUED" if self.step_status == LotStep.Status.WAITING else "IN WORK"

    @cached_property
    def minutes_at_step(self) -> float:
        since = self.arrived_at or self.lot_started_at or self.lot_created_at
        return (self.now - since).total_seconds() / 60.0

    @cached_property
    def minutes_in_wip(self) -> float:
        since = self.lot_started_at or self.lot_created_at
        return (self.now - since).total_seconds() / 60.0

    @cached_property
    def queue(self) -> schedule.QueueState | None:
        if not (
            self.queue_limit_minutes
            and self.arrived_at
            and self.step_status == LotStep.Status.WAITING
        ):
            return None
        return schedule.queue_state(self.arrived_at, self.now, self.queue_limit_minutes)

    @property
    def queue_word(self) -> str:
        if self.queue is None:
            return ""
        if self.queue_released:
            return "queue limit released"
        if self.queue.exceeded:
            return "QUEUE TIME EXCEEDED"
        if self.queue.warn:
            return "QUEUE TIME WARNING"
        return ""

    @property
    def queue_text(self) -> str:
        if self.queue is None:
            return ""
        waited = duration_text(self.queue.minutes_waited)
        return f"{waited} of {duration_text(self.queue.limit_minutes)}"

    @property
    def releasable(self) -> bool:
        """A queue-time warning that a supervisor has not released yet."""
        return self.queue is not None and self.queue.warn and not self.queue_released

    @property
    def at_step_text(self) -> str:
        return duration_text(self.minutes_at_step)

    @property
    def wip_text(self) -> str:
        return duration_text(self.minutes_in_wip)

    @cached_property
    def due_state(self) -> schedule.DueState:
        """The worst state among the jobs on the lot's panels: from a job's forecast P90
        where one exists, else from the flow-factor rule (the fallback)."""
        if not self.job_list:
            return schedule.DueState.ON_TIME
        return min(
            (
                schedule.forecast_due_state(self.now, j.due_at, j.p90)
                if j.p90 is not None
                else schedule.due_state(self.now, j.due_at, self.remaining_minutes)
                for j in self.job_list
            ),
            key=_DUE_RANK.__getitem__,
        )

    @property
    def forecast_text(self) -> str:
        """'P50 Thu 14:05 · P90 Fri 09:40' in the site's time zone, '' without a forecast."""
        if self.p50 is None or self.p90 is None:
            return ""
        fmt = self.date_format
        return (
            f"P50 {when_text(self.p50, self.now, fmt)} · P90 {when_text(self.p90, self.now, fmt)}"
        )

    @property
    def forecast_lines(self) -> tuple[str, str] | None:
        """('P50 Thu 14:05', 'P90 Fri 09:40'), or None without a forecast."""
        if not self.forecast_text:
            return None
        p50, _, p90 = self.forecast_text.partition(" · ")
        return p50, p90

    @property
    def due_word(self) -> str:
        return DUE_WORDS[self.due_state]

    @cached_property
    def earliest_due(self) -> dt.date | None:
        return min((j.due_date for j in self.job_list), default=None)

    @property
    def due_detail(self) -> str:
        if self.earliest_due is None:
            return ""
        if any(j.p90 is not None for j in self.job_list):
            return f"due {self.date_format.format(self.earliest_due)} · forecast"
        due = self.date_format.format(self.earliest_due)
        return f"{due} · {self.remaining_minutes} std min left"

    @property
    def hold_summary(self) -> str:
        return Truncator(self.hold_reason).chars(60) if self.hold_reason else ""

    @property
    def alert_words(self) -> list[str]:
        """Each kind of open alert once ('Reading out of window ×3' when repeated)."""
        counts: dict[str, int] = {}
        for a in self.alerts:
            word = str(a.get_kind_display())
            counts[word] = counts.get(word, 0) + 1
        return [f"{w} ×{n}" if n > 1 else w for w, n in counts.items()]

    @property
    def lot_url(self) -> str:
        return self.links.lot(self.lot_code)

    @property
    def release_url(self) -> str:
        return self.links.release(self.step_id)

    @property
    def queue_key(self) -> tuple[Any, ...]:
        return queue_order(
            self.queue_priority,
            self.lot_priority,
            self.arrived_at,
            self.lot_created_at,
            self.lot_code,
        )


@dataclass
class BoardColumn:
    work_center: WorkCenter
    queued: list[BoardLot] = field(default_factory=list)
    in_work: list[BoardLot] = field(default_factory=list)
    on_hold: list[BoardLot] = field(default_factory=list)
    limit: int = MAX_ROWS_PER_CENTER
    move_url: str = ""

    @property
    def count(self) -> int:
        return len(self.queued) + len(self.in_work) + len(self.on_hold)

    @property
    def form_id(self) -> str:
        """The id of the column's one reorder form (each row's buttons name it)."""
        return f"order-{self.work_center.pk}"

    @property
    def rows(self) -> list[BoardLot]:
        """Held lots first (they need someone), then the ones in work, then the queue;
        at most `limit` (a wall screen cannot show more; counts stay exact)."""
        return (self.on_hold + self.in_work + self.queued)[: self.limit]

    @property
    def hidden(self) -> int:
        return max(self.count - self.limit, 0)

    @property
    def warnings(self) -> int:
        return sum(1 for lot in self.queued if lot.queue_word.isupper())


@dataclass
class Board:
    columns: list[BoardColumn]
    alerts: list[Alert]
    alert_count: int
    filters: BoardFilters
    customers: list[Customer]
    finishes: list[str]
    work_centers: list[WorkCenter]
    ipc_classes: list[tuple[int, str]]
    now: dt.datetime
    lot_count: int
    # When the finish forecast the rows use was made; None: due-date risk comes from the
    # flow-factor fallback (no fresh forecast yet).
    forecast_at: dt.datetime | None = None
    # The site's settings (date format, wall board sizes), read with the work centers.
    site: Any = None
    # True when a filter narrows the lots (alerts then follow the lots shown).
    filtered: bool = False

    @property
    def date_format(self) -> DateFormat:
        return format_of(self.site)


def current_steps(scope: Scope | None = None) -> QuerySet[LotStep]:
    """Each active lot's current step (LotStep.objects.current()), limited to the work
    centers `scope` sees. The board reads the same steps with `board_steps`, which is
    faster on many lots but takes its filters itself."""
    qs = LotStep.objects.current()
    if scope is not None and not scope.sees_all:
        qs = qs.filter(work_center_id__in=scope.work_center_ids)
    return qs


# The columns board_steps reads, in this order (see build_board's loop).
_STEP_COLUMNS = (
    "id",
    "name",
    "status",
    "arrived_at",
    "queue_time_limit_minutes",
    "queue_priority",
    "queue_warning_released_reason",
    "work_center_id",
    "lot_id",
    "lot__code",
    "lot__on_hold",
    "lot__priority",
    "lot__started_at",
    "lot__created_at",
    "lot__routing_revision_id",
    "remaining",
)
_LOT_ID = _STEP_COLUMNS.index("lot_id")


def board_steps(
    scope: Scope, f: BoardFilters, centers: list[WorkCenter]
) -> QuerySet[LotStep, tuple[Any, ...]]:
    """The current step of every active lot the board shows, as tuples of _STEP_COLUMNS.

    The same steps as `current_steps`, found with window functions over each lot's open
    steps (one pass, instead of two subqueries per open step: about 5x faster at 20,000
    lots). Filters on the lot go in WHERE; filters on the step's work center must test
    `at_center` (a window value), so that they apply after the current step is chosen,
    not before (a WHERE on work_center would find a later open step there)."""
    # The lot's finish is not read here but per routing revision (build_board): carrying
    # each build_spec through the window's sort made it spill to disk at 20,000 lots.
    per_lot = [F("lot_id")]
    qs = LotStep.objects.current_by_window()
    center_ids: set[int] | None = None
    if not scope.sees_all:
        center_ids = set(scope.work_center_ids)
    if f.work_center:
        wanted = {c.pk for c in centers if c.code == f.work_center}
        center_ids = wanted if center_ids is None else center_ids & wanted
    if center_ids is not None:
        qs = qs.annotate(
            at_center=Window(
                FirstValue("work_center_id"), partition_by=per_lot, order_by=F("position").asc()
            )
        ).filter(at_center__in=sorted(center_ids))
    if f.finish:
        qs = qs.filter(lot__routing_revision__build_spec__finish=f.finish)
    job_q = Q()
    if f.customer:
        job_q &= Q(job__part_revision__part__customer__code=f.customer)
    if f.due_from:
        job_q &= Q(job__due_date__gte=f.due_from)
    if f.due_to:
        job_q &= Q(job__due_date__lte=f.due_to)
    if f.ipc_class:
        job_q &= Q(job__ipc_class=f.ipc_class)
    if job_q:
        qs = qs.filter(Exists(PanelImage.objects.filter(job_q, panel__lot=OuterRef("lot_id"))))
    return qs.values_list(*_STEP_COLUMNS)


def _sort_key(sort: str) -> Any:
    far = dt.date.max
    if sort == "due":
        return lambda b: (b.earliest_due or far, b.lot_code)
    if sort == "age":
        return lambda b: (-b.minutes_at_step, b.lot_code)
    if sort == "lot":
        return lambda b: b.lot_code
    return lambda b: b.queue_key


def _read_jobs(
    lots: list[BoardLot], links: BoardLinks, now: dt.datetime, *, every_active_lot: bool
) -> dt.datetime | None:
    """Set `jobs` on each of `lots`: the jobs imaged on its panels, by number, one
    JobOnLot per job. One query: with `every_active_lot` (the due-date sort needs every
    lot's jobs) it reads all active lots' and matches them here, a plain join being
    cheaper than repeating the current-step query inside an IN (...); otherwise it reads
    only these lots' (the rows the board shows)."""
    by_id = {lot.lot_id: lot for lot in lots}
    for lot in lots:
        lot.jobs = []
    if every_active_lot:
        images = PanelImage.objects.filter(panel__lot__status__in=ACTIVE_LOT)
    else:
        images = PanelImage.objects.filter(panel__lot_id__in=list(by_id))
    # The forecasts ride along in the same query: the newest fresh run is one uncorrelated
    # subquery (PostgreSQL evaluates it once), each job's and lot's row an index look-up.
    fresh = fresh_runs(now)
    run = Subquery(fresh.values("pk")[:1])
    job_fc = JobForecast.objects.filter(run_id=run, job_id=OuterRef("job_id"))
    lot_fc = LotForecast.objects.filter(run_id=run, lot_id=OuterRef("panel__lot_id"))
    rows = (
        images.order_by()
        .annotate(
            job_p50=Subquery(job_fc.values("p50")[:1]),
            job_p90=Subquery(job_fc.values("p90")[:1]),
            lot_p50=Subquery(lot_fc.values("p50")[:1]),
            lot_p90=Subquery(lot_fc.values("p90")[:1]),
            run_at=Subquery(fresh.values("finished_at")[:1]),
        )
        .values_list(
            "panel__lot_id",
            "job_id",
            "job__number",
            "job__due_date",
            "job__ipc_class",
            "job__part_revision__part__number",
            "job__part_revision__part__customer__code",
            "job_p50",
            "job_p90",
            "lot_p50",
            "lot_p90",
            "run_at",
        )
        .distinct()
    )
    jobs: dict[int, JobOnLot] = {}
    forecast_at = None
    for (
        lot_id,
        job_id,
        number,
        due_date,
        ipc_class,
        part_number,
        customer_code,
        job_p50,
        job_p90,
        lot_p50,
        lot_p90,
        run_at,
    ) in rows:
        forecast_at = forecast_at or run_at
        on_lot = by_id.get(lot_id)
        if on_lot is None:
            continue
        job = jobs.get(job_id)
        if job is None:
            job = jobs[job_id] = JobOnLot(
                id=job_id,
                number=number,
                part_number=part_number,
                customer_code=customer_code,
                due_date=due_date,
                ipc_class=ipc_class,
                due_at=due_end(due_date),
                url=links.job(number),
                p50=job_p50,
                p90=job_p90,
            )
        on_lot.job_list.append(job)
        on_lot.p50, on_lot.p90 = lot_p50, lot_p90
    for lot in lots:
        if len(lot.job_list) > 1:
            lot.job_list.sort(key=lambda j: j.number)
    return forecast_at


def lot_filters_set(f: BoardFilters) -> bool:
    """Whether a filter on the lots themselves (customer, due dates, class, finish) is set."""
    return bool(f.customer or f.due_from or f.due_to or f.ipc_class or f.finish)


_CENTER = _STEP_COLUMNS.index("work_center_id")


def _alerts_for_filters(
    alerts: QuerySet[Alert], f: BoardFilters, steps: list[Any], centers: list[WorkCenter]
) -> QuerySet[Alert]:
    """The open alerts that belong to what the filters show.

    No filter: every open alert. A work center alone: alerts raised there and alerts on
    the lots waiting or in work there. A filter on lots (customer, due dates, class,
    finish): alerts on the lots shown, and alerts with no lot (a bath, an instrument) at
    a work center where one of those lots is now."""
    lot_filtered = lot_filters_set(f)
    if not lot_filtered and not f.work_center:
        return alerts
    lot_ids = [s[_LOT_ID] for s in steps]
    if lot_filtered:
        where = {s[_CENTER] for s in steps}
        return alerts.filter(
            Q(lot_id__in=lot_ids) | Q(lot__isnull=True, work_center_id__in=sorted(where))
        )
    wanted = [c.pk for c in centers if c.code == f.work_center]
    return alerts.filter(Q(lot_id__in=lot_ids) | Q(work_center_id__in=wanted))


def build_board(
    scope: Scope,
    filters: BoardFilters,
    now: dt.datetime | None = None,
    *,
    rows_per_center: int | Callable[[Any], int] | None = None,
) -> Board:
    """Everything the board shows, in a number of queries that does not grow with lots.

    `rows_per_center` caps the rows each work center lists (the wall board's own cap; a
    function of the site settings when the cap is the site's); counts stay exact."""
    now = now or timezone.now()
    links = BoardLinks()
    centers = list(with_site_settings(WorkCenter.objects.order_by("code")))
    site = carried_settings(centers[0] if centers else None)
    date_format = format_of(site)
    # Plain tuples, not model instances: the board reads thousands of them every poll.
    steps = list(board_steps(scope, filters, centers))
    lot_ids = [s[_LOT_ID] for s in steps]
    wanted = set(lot_ids)
    hold_reasons: dict[int, str] = {}
    for lot_id, reason in (
        Hold.objects.filter(released_at__isnull=True, lot__status__in=ACTIVE_LOT)
        .order_by("opened_at")
        .values_list("lot_id", "reason")
    ):
        if lot_id in wanted:
            hold_reasons.setdefault(lot_id, reason)

    open_alerts = Alert.objects.filter(closed_at__isnull=True)
    if not scope.sees_all:
        open_alerts = open_alerts.filter(
            Q(work_center_id__in=scope.work_center_ids) | Q(lot_id__in=lot_ids)
        )
    open_alerts = _alerts_for_filters(open_alerts, filters, steps, centers)
    alerts = list(
        open_alerts.select_related("lot", "work_center", "job").order_by("-created_at")[
            :ALERT_LIMIT
        ]
    )
    alerts_by_lot: dict[int, list[Alert]] = defaultdict(list)
    for alert in alerts:
        if alert.lot_id:
            alerts_by_lot[alert.lot_id].append(alert)

    # A lot's finish comes from its routing revision's build spec; few revisions are active.
    finish_of: dict[int, str] = {
        revision_id: str(finish) if finish else ""
        for revision_id, finish in Lot.objects.filter(status__in=ACTIVE_LOT)
        .order_by()
        .values_list("routing_revision_id", "routing_revision__build_spec__finish")
        .distinct()
    }
    by_center: dict[int, BoardColumn] = {
        c.pk: BoardColumn(c, move_url=links.move(c.pk)) for c in centers
    }
    no_alerts: list[Alert] = []
    waiting = LotStep.Status.WAITING
    lots: list[BoardLot] = []
    for (
        step_id,
        step_name,
        step_status,
        arrived_at,
        queue_limit,
        queue_priority,
        queue_released,
        work_center_id,
        lot_id,
        lot_code,
        on_hold,
        lot_priority,
        started_at,
        created_at,
        routing_revision_id,
        remaining,
    ) in steps:
        column = by_center.get(work_center_id)
        if column is None:
            continue
        item = BoardLot(
            step_id=step_id,
            step_name=step_name,
            step_status=step_status,
            lot_id=lot_id,
            lot_code=lot_code,
            on_hold=on_hold,
            finish=finish_of.get(routing_revision_id, ""),
            arrived_at=arrived_at,
            lot_started_at=started_at,
            lot_created_at=created_at,
            queue_limit_minutes=queue_limit,
            queue_released=queue_released,
            queue_priority=queue_priority,
            lot_priority=lot_priority,
            remaining_minutes=int(remaining or 0),
            now=now,
            links=links,
            hold_reason=hold_reasons.get(lot_id, ""),
            date_format=date_format,
            alerts=alerts_by_lot.get(lot_id, no_alerts),
        )
        lots.append(item)
        if on_hold:
            column.on_hold.append(item)
        elif step_status == waiting:
            column.queued.append(item)
        else:
            column.in_work.append(item)
    by_due = filters.sort == "due"
    forecast_at = None
    if by_due:
        forecast_at = _read_jobs(lots, links, now, every_active_lot=True)
    key = _sort_key(filters.sort)
    limit = MAX_ROWS_PER_CENTER if filters.work_center else OVERVIEW_ROWS_PER_CENTER
    if rows_per_center is not None:
        limit = rows_per_center if isinstance(rows_per_center, int) else rows_per_center(site)
    for column in by_center.values():
        column.limit = limit
        column.queued.sort(key=key)
        column.in_work.sort(key=key)
        column.on_hold.sort(key=key)
    columns = [
        by_center[c.pk]
        for c in centers
        if scope.sees_work_center(c.pk)
        and (not filters.work_center or c.code == filters.work_center)
    ]
    if not by_due:
        shown = [lot for c in columns for lot in c.rows]
        forecast_at = _read_jobs(shown, links, now, every_active_lot=False)
    finishes = sorted({f for f in finish_of.values() if f})
    return Board(
        columns=columns,
        alerts=alerts,
        alert_count=len(alerts),
        filters=filters,
        customers=list(Customer.objects.order_by("code")),
        finishes=finishes,
        work_centers=[c for c in centers if scope.sees_work_center(c.pk)],
        ipc_classes=[(c.value, c.label) for c in IpcClass],
        now=now,
        lot_count=len(steps),
        forecast_at=forecast_at,
        site=site,
        filtered=bool(filters.as_query().keys() - {"sort"}),
    )
