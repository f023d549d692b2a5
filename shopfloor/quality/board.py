"""The supervisor board: every work center's queue, WIP age, queue-time and due-date risk.

A lot is at the work center of its current step: the first LotStep that is not done or
skipped. The board is read in a fixed number of SQL queries whatever the number of lots
(one query for the current steps, with the first open position and the remaining
standard minutes as correlated subqueries; one for the jobs on those lots; one each for
open holds, open alerts and the filter choices), so a wall screen polling every few
seconds costs the same at 20 lots as at 2,000.

Reordering a queue is the one state change here: `reorder_queue` writes
LotStep.queue_priority for the lots waiting at a work center, with an audit entry.
"""

from __future__ import annotations

import datetime as dt
import zoneinfo
from collections import defaultdict
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any

from django.conf import settings
from django.db import transaction
from django.db.models import Exists, F, IntegerField, OuterRef, Q, QuerySet, Subquery, Sum
from django.db.models.fields.json import KeyTextTransform
from django.db.models.functions import Coalesce
from django.utils import timezone

from shopfloor import schedule
from shopfloor.audit import services as audit
from shopfloor.errors import InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Customer, IpcClass, Lot, PanelImage, Person, WorkCenter
from shopfloor.quality.access import Scope
from shopfloor.quality.models import Alert, Hold

OPEN_STEP = (LotStep.Status.WAITING, LotStep.Status.IN_PROGRESS, LotStep.Status.PAUSED)
ACTIVE_LOT = (Lot.Status.NOT_STARTED, Lot.Status.IN_PROCESS)
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


def _parse_date(name: str, value: str) -> dt.date | None:
    value = (value or "").strip()
    if not value:
        return None
    try:
        return dt.date.fromisoformat(value)
    except ValueError as exc:
        raise InvalidInput(
            f"{name} {value!r} is not a date; use YYYY-MM-DD (for example 2030-01-31).",
            problems=[{"field": name, "value": value, "allowed": "YYYY-MM-DD"}],
        ) from exc


def parse_filters(params: Any) -> BoardFilters:
    """Read the board's query string; a bad value raises InvalidInput saying what is allowed."""
    due_from = _parse_date("due_from", params.get("due_from", ""))
    due_to = _parse_date("due_to", params.get("due_to", ""))
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


@dataclass
class JobOnLot:
    id: int
    number: str
    part_number: str
    customer_code: str
    due_date: dt.date
    ipc_class: int
    due_state: schedule.DueState = schedule.DueState.ON_TIME

    @property
    def due_word(self) -> str:
        return DUE_WORDS[self.due_state]


@dataclass
class BoardLot:
    """One lot as the board shows it at its current work center."""

    step_id: int
    step_name: str
    step_status: str
    lot_id: int
    lot_code: str
    on_hold: bool
    hold_reason: str
    finish: str
    arrived_at: dt.datetime | None
    lot_started_at: dt.datetime | None
    minutes_at_step: float
    minutes_in_wip: float
    remaining_minutes: int
    queue: schedule.QueueState | None
    queue_released: str
    queue_priority: int
    lot_priority: int
    jobs: list[JobOnLot] = field(default_factory=list)
    alerts: list[Alert] = field(default_factory=list)

    @property
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
    def at_step_text(self) -> str:
        return duration_text(self.minutes_at_step)

    @property
    def wip_text(self) -> str:
        return duration_text(self.minutes_in_wip)

    @property
    def queue_text(self) -> str:
        if self.queue is None:
            return ""
        waited = duration_text(self.queue.minutes_waited)
        return f"{waited} of {duration_text(self.queue.limit_minutes)}"

    @property
    def due_state(self) -> schedule.DueState:
        if not self.jobs:
            return schedule.DueState.ON_TIME
        return min((j.due_state for j in self.jobs), key=_DUE_RANK.__getitem__)

    @property
    def due_word(self) -> str:
        return DUE_WORDS[self.due_state]

    @property
    def earliest_due(self) -> dt.date | None:
        return min((j.due_date for j in self.jobs), default=None)


@dataclass
class BoardColumn:
    work_center: WorkCenter
    queued: list[BoardLot] = field(default_factory=list)
    in_work: list[BoardLot] = field(default_factory=list)
    on_hold: list[BoardLot] = field(default_factory=list)
    limit: int = MAX_ROWS_PER_CENTER

    @property
    def count(self) -> int:
        return len(self.queued) + len(self.in_work) + len(self.on_hold)

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


def duration_text(minutes: float) -> str:
    """'3 d 4 h', '5 h 10 min', '12 min' for a wall screen."""
    m = max(int(minutes), 0)
    days, rest = divmod(m, 1440)
    hours, mins = divmod(rest, 60)
    if days:
        return f"{days} d {hours} h"
    if hours:
        return f"{hours} h {mins} min"
    return f"{mins} min"


def _due_end(day: dt.date) -> dt.datetime:
    """A job due on a date is due at the end of that day, in the site's time zone."""
    tz = zoneinfo.ZoneInfo(settings.SITE_TIME_ZONE)
    return dt.datetime.combine(day, dt.time(23, 59, 59), tzinfo=tz)


def current_steps(scope: Scope | None = None) -> QuerySet[LotStep]:
    """Each active lot's current step (first step not done/skipped), in one query."""
    first_open = (
        LotStep.objects.filter(lot=OuterRef("lot_id"), status__in=OPEN_STEP)
        .order_by("position")
        .values("position")[:1]
    )
    remaining = (
        LotStep.objects.filter(lot=OuterRef("lot_id"), status__in=OPEN_STEP)
        .order_by()
        .values("lot")
        .annotate(total=Sum("standard_minutes"))
        .values("total")
    )
    qs = (
        LotStep.objects.filter(status__in=OPEN_STEP, lot__status__in=ACTIVE_LOT)
        .annotate(
            first_open=Subquery(first_open),
            remaining=Coalesce(Subquery(remaining, output_field=IntegerField()), 0),
        )
        .filter(position=F("first_open"))
    )
    if scope is not None and not scope.sees_all:
        qs = qs.filter(work_center_id__in=scope.work_center_ids)
    return qs


def _filtered(qs: QuerySet[LotStep], f: BoardFilters) -> QuerySet[LotStep]:
    if f.work_center:
        qs = qs.filter(work_center__code=f.work_center)
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
    return qs


def _sort_key(sort: str) -> Any:
    far = dt.date.max
    if sort == "due":
        return lambda b: (b.earliest_due or far, b.lot_code)
    if sort == "age":
        return lambda b: (-b.minutes_at_step, b.lot_code)
    if sort == "lot":
        return lambda b: b.lot_code
    return lambda b: (
        b.queue_priority,
        b.lot_priority,
        b.arrived_at or b.lot_started_at or timezone.now(),
        b.lot_code,
    )


def build_board(scope: Scope, filters: BoardFilters, now: dt.datetime | None = None) -> Board:
    """Everything the board shows, in a number of queries that does not grow with lots."""
    now = now or timezone.now()
    centers = list(WorkCenter.objects.order_by("code"))
    # Plain rows, not model instances: the board reads thousands of them every poll.
    steps = [
        SimpleNamespace(
            **row,
            lot=SimpleNamespace(
                pk=row["lot_id"],
                code=row["lot__code"],
                on_hold=row["lot__on_hold"],
                priority=row["lot__priority"],
                started_at=row["lot__started_at"],
                created_at=row["lot__created_at"],
            ),
        )
        for row in _filtered(current_steps(scope), filters)
        .annotate(finish=KeyTextTransform("finish", "lot__routing_revision__build_spec"))
        .values(
            "id",
            "name",
            "status",
            "arrived_at",
            "queue_time_limit_minutes",
            "queue_priority",
            "queue_warning_released_reason",
            "work_center_id",
            "position",
            "lot_id",
            "lot__code",
            "lot__on_hold",
            "lot__priority",
            "lot__started_at",
            "lot__created_at",
            "finish",
            "remaining",
        )
    ]
    lot_ids = [s.lot_id for s in steps]
    wanted = set(lot_ids)
    # Jobs and holds are read for every active lot and matched here: a plain join is
    # cheaper than repeating the current-step subquery inside an IN (...).
    jobs_by_lot: dict[int, dict[int, JobOnLot]] = defaultdict(dict)
    for row in (
        PanelImage.objects.filter(panel__lot__status__in=ACTIVE_LOT)
        .order_by()
        .values(
            "panel__lot_id",
            "job_id",
            "job__number",
            "job__due_date",
            "job__ipc_class",
            "job__part_revision__part__number",
            "job__part_revision__part__customer__code",
        )
        .distinct()
    ):
        if row["panel__lot_id"] not in wanted:
            continue
        jobs_by_lot[row["panel__lot_id"]][row["job_id"]] = JobOnLot(
            id=row["job_id"],
            number=row["job__number"],
            part_number=row["job__part_revision__part__number"],
            customer_code=row["job__part_revision__part__customer__code"],
            due_date=row["job__due_date"],
            ipc_class=row["job__ipc_class"],
        )
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
    alerts = list(
        open_alerts.select_related("lot", "work_center", "job").order_by("-created_at")[
            :ALERT_LIMIT
        ]
    )
    alerts_by_lot: dict[int, list[Alert]] = defaultdict(list)
    for alert in alerts:
        if alert.lot_id:
            alerts_by_lot[alert.lot_id].append(alert)

    by_center: dict[int, BoardColumn] = {c.pk: BoardColumn(c) for c in centers}
    for s in steps:
        lot = s.lot
        started = lot.started_at or lot.created_at
        arrived = s.arrived_at or started
        queue = None
        if s.queue_time_limit_minutes and s.arrived_at and s.status == LotStep.Status.WAITING:
            queue = schedule.queue_state(s.arrived_at, now, s.queue_time_limit_minutes)
        jobs = list(jobs_by_lot.get(s.lot_id, {}).values())
        for job in jobs:
            job.due_state = schedule.due_state(now, _due_end(job.due_date), s.remaining)
        item = BoardLot(
            step_id=s.id,
            step_name=s.name,
            step_status=s.status,
            lot_id=lot.pk,
            lot_code=lot.code,
            on_hold=lot.on_hold,
            hold_reason=hold_reasons.get(lot.pk, ""),
            finish=s.finish or "",
            arrived_at=s.arrived_at,
            lot_started_at=lot.started_at,
            minutes_at_step=(now - arrived).total_seconds() / 60.0,
            minutes_in_wip=(now - started).total_seconds() / 60.0,
            remaining_minutes=int(s.remaining),
            queue=queue,
            queue_released=s.queue_warning_released_reason,
            queue_priority=s.queue_priority,
            lot_priority=lot.priority,
            jobs=sorted(jobs, key=lambda j: j.number),
            alerts=alerts_by_lot.get(lot.pk, []),
        )
        column = by_center.get(s.work_center_id)
        if column is None:
            continue
        bucket = {"on_hold": column.on_hold, "queued": column.queued, "in_work": column.in_work}
        bucket[item.state].append(item)
    key = _sort_key(filters.sort)
    limit = MAX_ROWS_PER_CENTER if filters.work_center else OVERVIEW_ROWS_PER_CENTER
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
    finishes = sorted(
        {
            str(f)
            for f in Lot.objects.filter(status__in=ACTIVE_LOT)
            .order_by()
            .values_list("routing_revision__build_spec__finish", flat=True)
            .distinct()
            if f
        }
    )
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
    )


# --- reordering a queue (the board's one write) -------------------------------------


def _queue(work_center_id: int) -> list[LotStep]:
    """The lots waiting at a work center, in the order the board shows them."""
    steps = list(
        current_steps()
        .filter(work_center_id=work_center_id, status=LotStep.Status.WAITING, lot__on_hold=False)
        .select_related("lot")
    )
    steps.sort(
        key=lambda s: (
            s.queue_priority,
            s.lot.priority,
            s.arrived_at or s.lot.created_at,
            s.lot.code,
        )
    )
    return steps


def _require_reorder(person: Person) -> None:
    if not person.roles() & {"supervisor", "admin"}:
        raise NotAllowed("Only a supervisor or administrator can change the order of a queue.")


@transaction.atomic
def reorder_queue(
    person: Person, work_center_id: int, ordered_lot_step_ids: list[int]
) -> list[LotStep]:
    """Put a work center's waiting lots in the order given (first runs first).

    Lots named come first, in the order named; lots not named keep their order after
    them. Priorities are written as -n..-1, so lots that arrive later (priority 0) queue
    behind the order a supervisor set rather than jumping ahead of it.
    """
    _require_reorder(person)
    center = WorkCenter.objects.filter(pk=work_center_id).first()
    if center is None:
        raise NotFound(f"No work center {work_center_id}.")
    if len(set(ordered_lot_step_ids)) != len(ordered_lot_step_ids):
        raise InvalidInput("A lot appears twice in the new order; name each lot once.")
    # Lock the queue's rows so two supervisors reordering at once apply one after the other.
    list(
        LotStep.objects.select_for_update(no_key=True).filter(
            work_center_id=work_center_id, status=LotStep.Status.WAITING
        )
    )
    queue = _queue(work_center_id)
    by_id = {s.pk: s for s in queue}
    unknown = [i for i in ordered_lot_step_ids if i not in by_id]
    if unknown:
        raise InvalidInput(
            f"Lot step(s) {unknown} are not waiting in the queue at {center.name}; "
            "reload the board and try again.",
            problems=[{"field": "ordered_lot_step_ids", "value": unknown}],
        )
    before = [s.lot.code for s in queue]
    named = [by_id[i] for i in ordered_lot_step_ids]
    rest = [s for s in queue if s.pk not in set(ordered_lot_step_ids)]
    new_order = named + rest
    n = len(new_order)
    for i, step in enumerate(new_order):
        step.queue_priority = i - n
    LotStep.objects.bulk_update(new_order, ["queue_priority"])
    audit.record(
        actor=person.user,
        action="queue.reordered",
        object_type="work_center",
        object_id=center.pk,
        before={"order": before},
        after={"order": [s.lot.code for s in new_order]},
    )
    return new_order


MOVES = ("up", "down", "top")


def move_in_queue(
    person: Person, work_center_id: int, lot_step_id: int, move: str
) -> list[LotStep]:
    """Move one lot up, down or to the top of its work center's queue."""
    if move not in MOVES:
        raise InvalidInput(f"Move {move!r} is not known; allowed: {', '.join(MOVES)}.")
    _require_reorder(person)
    ids = [s.pk for s in _queue(work_center_id)]
    if lot_step_id not in ids:
        raise InvalidInput(
            "That lot is not waiting in this queue any more (it may have started or moved "
            "on); reload the board."
        )
    i = ids.index(lot_step_id)
    ids.pop(i)
    target = {"top": 0, "up": max(i - 1, 0), "down": min(i + 1, len(ids))}[move]
    ids.insert(target, lot_step_id)
    return reorder_queue(person, work_center_id, ids)


def release_queue_warning(person: Person, lot_step_id: int, reason: str) -> Any:
    """Hand a queue-time release to the quality service that owns it (signature + audit)."""
    reason = (reason or "").strip()
    if len(reason) < 3:
        raise InvalidInput("Releasing a queue-time warning needs a reason (why it may wait).")
    from shopfloor.quality import services as quality_services

    release = quality_services.release_queue_warning
    return release(person, lot_step_id, reason)
