"""Planning use cases: run the floor forecast, read it back, quote a new order.

The simulation itself is pure (shopfloor/core/planning); this module reads the live floor
into it and stores what it returns. A run reads everything it needs in a few queries
(open steps of active lots, the jobs on them, capacities, holidays, measured run times),
simulates outside any transaction, then writes its rows in one transaction, so readers
only ever see a complete run. The board never waits for a run: it reads the newest
finished one (or falls back to the flow-factor rule while there is none).
"""

from __future__ import annotations

import datetime as dt
import logging
import math
import random
import time
import zoneinfo
from collections import defaultdict
from dataclasses import dataclass
from typing import Any

from django.conf import settings
from django.db import IntegrityError, transaction
from django.db.models import QuerySet
from django.utils import timezone

from routing.builder import SpecInvalid, build_routing, parse_spec
from routing.services import current_library, spec_problems
from shopfloor.core import schedule
from shopfloor.core.planning import calendar as cal_core
from shopfloor.core.planning import forecast as fc
from shopfloor.core.planning.steptimes import MAX_HISTORY, StepStats, credibility, median
from shopfloor.errors import InvalidInput, NotAllowed
from shopfloor.floor.models import LotStep
from shopfloor.planning.models import (
    ForecastRun,
    Holiday,
    JobForecast,
    LotForecast,
    WorkCenterCapacity,
    parse_shifts,
)
from shopfloor.plant.models import Job, Lot, PanelImage, WorkCenter
from shopfloor.quality import outbox

log = logging.getLogger("shopfloor.planning")

#: The forecast task, queued by name (services never import tasks; see quality.outbox).
RUN_FORECAST = "shopfloor.planning.tasks.run_forecast"

ACTIVE_LOT = Lot.ACTIVE_STATUSES
# Measured times older than this are not read: the floor changes (new machines, recipes).
HISTORY_DAYS = 180
# Finished runs kept (the newest is read; older ones show how forecasts moved).
KEEP_RUNS = 12
# A run still "running" after this long died with its worker; it no longer blocks others.
RUN_TIMEOUT_MINUTES = 30
# Who may ask for a forecast run or a quote (the planner role joins when it exists).
PLANNING_ROLES = frozenset({"planner", "supervisor", "process_engineer", "admin"})


def _site_tz() -> str:
    return str(settings.SITE_TIME_ZONE)


def due_end(day: dt.date) -> dt.datetime:
    """A job due on a date is due at the end of that day, in the site's time zone."""
    return dt.datetime.combine(day, dt.time(23, 59, 59), tzinfo=zoneinfo.ZoneInfo(_site_tz()))


# --- reading the floor ----------------------------------------------------------------


def capacities() -> dict[str, fc.Capacity]:
    """Each work center's capacity and calendar (site and own holidays), by code."""
    site_holidays: set[dt.date] = set()
    own: dict[int, set[dt.date]] = defaultdict(set)
    for day, center_id in Holiday.objects.values_list("date", "work_center_id"):
        (own[center_id] if center_id else site_holidays).add(day)
    out: dict[str, fc.Capacity] = {}
    for cap in WorkCenterCapacity.objects.select_related("work_center"):
        shifts = tuple(cal_core.Shift(a, b) for a, b in parse_shifts(cap.shifts)) or (
            cal_core.Shift(dt.time(0), dt.time(0)),
        )
        holidays = frozenset(site_holidays | own.get(cap.work_center_id, set()))
        out[cap.work_center.code] = fc.Capacity(
            units=cap.units,
            batch_size=cap.batch_size,
            calendar=cal_core.ShiftCalendar(
                weekdays=frozenset(cap.weekdays), shifts=shifts, holidays=holidays
            ),
        )
    # A center without a capacity record still closes on the site's holidays.
    if site_holidays:
        for code in WorkCenter.objects.exclude(capacity__isnull=False).values_list(
            "code", flat=True
        ):
            out[code] = fc.Capacity(
                calendar=cal_core.ShiftCalendar(holidays=frozenset(site_holidays))
            )
    return out


@dataclass(frozen=True)
class MeasuredTimes:
    run: dict[tuple[str, str], list[float]]
    queue: dict[tuple[str, str], list[float]]


def measured_times(now: dt.datetime | None = None) -> MeasuredTimes:
    """Run (start -> complete) and queue (arrival -> start) minutes per (operation, work
    center) from the steps completed in the last HISTORY_DAYS, oldest first."""
    now = now or timezone.now()
    rows = (
        LotStep.objects.filter(
            status=LotStep.Status.DONE,
            completed_at__gte=now - dt.timedelta(days=HISTORY_DAYS),
            started_at__isnull=False,
            is_rework=False,
        )
        .order_by("completed_at")
        .values_list("code", "work_center__code", "arrived_at", "started_at", "completed_at")
    )
    run: dict[tuple[str, str], list[float]] = defaultdict(list)
    queue: dict[tuple[str, str], list[float]] = defaultdict(list)
    for code, center, arrived, started, completed in rows:
        if started is None or completed is None:
            continue
        run[(code, center)].append((completed - started).total_seconds() / 60.0)
        if arrived is not None and started >= arrived:
            queue[(code, center)].append((started - arrived).total_seconds() / 60.0)
    for values in (*run.values(), *queue.values()):
        del values[:-MAX_HISTORY]
    return MeasuredTimes(run=dict(run), queue=dict(queue))


def step_stats(times: MeasuredTimes) -> dict[tuple[str, str], StepStats]:
    """For display: how much history each (operation, work center) has and its weight."""
    keys = set(times.run) | set(times.queue)
    return {
        k: StepStats(
            count=len(times.run.get(k, ())),
            run_median=median(times.run.get(k, [])),
            queue_median=median(times.queue.get(k, [])),
            weight=credibility(len(times.run.get(k, ()))),
        )
        for k in sorted(keys)
    }


def wip_lots() -> tuple[list[fc.WipLot], dict[str, int], dict[str, int]]:
    """Every active lot with its open steps (current first), and the ids of lots and jobs
    by code / number. Two queries."""
    rows = (
        LotStep.objects.open()
        .filter(lot__status__in=ACTIVE_LOT)
        .order_by("lot_id", "position")
        .values_list(
            "lot_id",
            "lot__code",
            "lot__priority",
            "lot__on_hold",
            "lot__created_at",
            "code",
            "work_center__code",
            "standard_minutes",
            "status",
            "queue_priority",
            "arrived_at",
            "started_at",
        )
    )
    # Read in one go, not through a server-side cursor: PostgreSQL plans a cursor for its
    # first rows (cursor_tuple_fraction) and picked a nested loop that took 40 s at
    # 2,000 lots (bench/bench_forecast.py); the whole result is ~40,000 small tuples.
    jobs_of: dict[int, list[str]] = defaultdict(list)
    job_ids: dict[str, int] = {}
    for lot_id, job_id, number in (
        PanelImage.objects.filter(panel__lot__status__in=ACTIVE_LOT)
        .order_by("job__number")
        .values_list("panel__lot_id", "job_id", "job__number")
        .distinct()
    ):
        jobs_of[lot_id].append(number)
        job_ids[number] = job_id
    lots: list[fc.WipLot] = []
    lot_ids: dict[str, int] = {}
    current: dict[str, Any] | None = None
    steps: list[fc.RemainingStep] = []

    def flush() -> None:
        if current is not None:
            lots.append(fc.WipLot(steps=tuple(steps), **current))

    last_lot = None
    for (
        lot_id,
        code,
        priority,
        on_hold,
        created_at,
        step_code,
        center,
        minutes,
        status,
        queue_priority,
        arrived_at,
        started_at,
    ) in rows:
        if lot_id != last_lot:
            flush()
            last_lot = lot_id
            lot_ids[code] = lot_id
            steps = []
            in_work = status != LotStep.Status.WAITING and started_at is not None
            current = {
                "code": code,
                "jobs": tuple(jobs_of.get(lot_id, ())),
                "lot_priority": priority,
                "queue_priority": queue_priority,
                "arrived_at": arrived_at or created_at,
                "started_at": started_at if in_work else None,
                "on_hold": on_hold,
            }
        steps.append(fc.RemainingStep(step_code, center, float(minutes)))
    flush()
    return lots, lot_ids, job_ids


# --- running a forecast ---------------------------------------------------------------


def _start_run(trigger: str, user: Any, replications: int, seed: int) -> ForecastRun | None:
    """A new 'running' row, or None while another run is under way (one at a time)."""
    stale = timezone.now() - dt.timedelta(minutes=RUN_TIMEOUT_MINUTES)
    ForecastRun.objects.filter(status=ForecastRun.Status.RUNNING, started_at__lt=stale).update(
        status=ForecastRun.Status.FAILED, error="did not finish (worker stopped?)"
    )
    try:
        with transaction.atomic():
            return ForecastRun.objects.create(
                trigger=trigger,
                requested_by=user,
                replications=replications,
                seed=seed,
            )
    except IntegrityError:
        return None


def run_forecast(
    trigger: str = ForecastRun.Trigger.PERIODIC,
    *,
    user: Any = None,
    replications: int | None = None,
    seed: int | None = None,
    now: dt.datetime | None = None,
) -> ForecastRun | None:
    """Simulate the floor and store each active lot's and job's P50 / P90 finish.

    Returns the finished run, or None when another run is in progress (the periodic task
    and an on-demand request may meet; the second one simply does nothing)."""
    replications = replications or int(settings.FORECAST_REPLICATIONS)
    seed = seed if seed is not None else random.SystemRandom().randrange(1, 2**31)
    run = _start_run(trigger, user, replications, seed)
    if run is None:
        return None
    try:
        now = now or timezone.now()
        lots, lot_ids, job_ids = wip_lots()
        result = fc.forecast(
            now,
            lots,
            capacities(),
            measured_times(now).run,
            tz=_site_tz(),
            replications=replications,
            seed=seed,
            processes=int(settings.FORECAST_PROCESSES),
        )
        dues = dict(
            Job.objects.filter(pk__in=[job_ids[n] for n in result.jobs]).values_list(
                "pk", "due_date"
            )
        )
        with transaction.atomic():
            LotForecast.objects.bulk_create(
                [
                    LotForecast(run=run, lot_id=lot_ids[code], p50=f.p50, p90=f.p90)
                    for code, f in result.lots.items()
                ],
                batch_size=2000,
            )
            JobForecast.objects.bulk_create(
                [
                    JobForecast(
                        run=run,
                        job_id=job_ids[number],
                        p50=f.p50,
                        p90=f.p90,
                        at_risk=f.p90 > due_end(dues[job_ids[number]]),
                    )
                    for number, f in result.jobs.items()
                ],
                batch_size=2000,
            )
            run.status = ForecastRun.Status.DONE
            run.finished_at = timezone.now()
            run.lot_count = len(result.lots)
            run.job_count = len(result.jobs)
            run.step_count = result.step_count
            run.seconds = round(result.seconds, 3)
            run.save()
    except Exception as exc:
        ForecastRun.objects.filter(pk=run.pk).update(
            status=ForecastRun.Status.FAILED, finished_at=timezone.now(), error=str(exc)[:2000]
        )
        raise
    _prune()
    log.info(
        "forecast %s: %s lots, %s jobs, %s replications in %.2f s",
        run.pk,
        run.lot_count,
        run.job_count,
        replications,
        run.seconds or 0.0,
    )
    return run


def _prune() -> None:
    keep = list(
        ForecastRun.objects.filter(status=ForecastRun.Status.DONE)
        .order_by("-finished_at")
        .values_list("pk", flat=True)[:KEEP_RUNS]
    )
    if len(keep) == KEEP_RUNS:
        ForecastRun.objects.exclude(pk__in=keep).exclude(status=ForecastRun.Status.RUNNING).delete()


def fresh_runs(now: dt.datetime | None = None) -> QuerySet[ForecastRun]:
    """Finished runs young enough to trust, newest first (readers take the first)."""
    now = now or timezone.now()
    stale = now - dt.timedelta(minutes=int(settings.FORECAST_STALE_MINUTES))
    return ForecastRun.objects.filter(
        status=ForecastRun.Status.DONE, finished_at__gte=stale
    ).order_by("-finished_at")


def latest_run() -> ForecastRun | None:
    return fresh_runs().first()


def require_planning(roles: set[str] | frozenset[str], what: str) -> None:
    """Planning pages and calls are for these roles (superusers count as admin)."""
    if not set(roles) & PLANNING_ROLES:
        raise NotAllowed(
            f"Only a planner, supervisor, process engineer or administrator can {what}."
        )


def request_forecast(roles: set[str] | frozenset[str], user_id: int) -> str:
    """Queue a forecast run now (the page does not wait for it)."""
    require_planning(roles, "ask for a forecast run")
    outbox.queue_task(
        RUN_FORECAST, kwargs={"trigger": ForecastRun.Trigger.ON_DEMAND, "user_id": user_id}
    )
    return "A forecast run was asked for; the board shows it when it finishes."


# --- reading a forecast back ------------------------------------------------------------


@dataclass(frozen=True)
class Projection:
    """A projected finish as pages and the API show it."""

    p50: dt.datetime
    p90: dt.datetime
    run_at: dt.datetime
    due: dt.date | None = None
    state: str = ""

    def as_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "p50": self.p50.isoformat(),
            "p90": self.p90.isoformat(),
            "forecast_at": self.run_at.isoformat(),
        }
        if self.due is not None:
            out["due_state"] = self.state
        return out


def lot_projection(lot: Lot) -> Projection | None:
    row = (
        LotForecast.objects.filter(lot=lot, run__in=fresh_runs()[:1])
        .values_list("p50", "p90", "run__finished_at")
        .first()
    )
    if not row or row[2] is None:
        return None
    return Projection(row[0], row[1], row[2])


def job_projection(job: Job, now: dt.datetime | None = None) -> Projection | None:
    now = now or timezone.now()
    row = (
        JobForecast.objects.filter(job=job, run__in=fresh_runs(now)[:1])
        .values_list("p50", "p90", "run__finished_at")
        .first()
    )
    if not row or row[2] is None:
        return None
    state = schedule.forecast_due_state(now, due_end(job.due_date), row[1])
    return Projection(row[0], row[1], row[2], due=job.due_date, state=state.value)


def job_projections(job_ids: list[int], now: dt.datetime | None = None) -> dict[int, Projection]:
    """The newest fresh forecast of many jobs, by job id, in one query (the jobs list
    and API)."""
    now = now or timezone.now()
    rows = JobForecast.objects.filter(job_id__in=job_ids, run__in=fresh_runs(now)[:1]).values_list(
        "job_id", "p50", "p90", "run__finished_at", "job__due_date"
    )
    out: dict[int, Projection] = {}
    for job_id, p50, p90, run_at, due in rows:
        if run_at is None:
            continue
        state = schedule.forecast_due_state(now, due_end(due), p90)
        out[job_id] = Projection(p50, p90, run_at, due=due, state=state.value)
    return out


# --- quoting a new order ------------------------------------------------------------------

QUOTE_CODE = "QUOTE"
# Shop-practice defaults for turning a quantity of boards into lots (the planner may
# give their own): boards per production panel and panels per lot.
DEFAULT_BOARDS_PER_PANEL = 4
DEFAULT_PANELS_PER_LOT = 20
MAX_QUOTE_LOTS = 200
QUOTE_REPLICATIONS = 50


@dataclass(frozen=True)
class Quote:
    p50_ship: dt.date
    p90_ship: dt.date
    p50: dt.datetime
    p90: dt.datetime
    lots: int
    panels: int
    steps: int
    standard_minutes: int
    replications: int
    wip_lots: int
    seconds: float

    def as_dict(self) -> dict[str, Any]:
        return {
            "p50_ship_date": self.p50_ship.isoformat(),
            "p90_ship_date": self.p90_ship.isoformat(),
            "p50_finish": self.p50.isoformat(),
            "p90_finish": self.p90.isoformat(),
            "lots": self.lots,
            "panels": self.panels,
            "steps_per_lot": self.steps,
            "standard_minutes_per_lot": self.standard_minutes,
            "replications": self.replications,
            "wip_lots": self.wip_lots,
        }


def _whole(data: dict[str, Any], name: str, default: int | None, lo: int, hi: int) -> int:
    raw = data.get(name)
    if raw is None or raw == "":
        if default is None:
            raise InvalidInput(
                f"{name} is required: a whole number from {lo} to {hi}.",
                problems=[{"field": name, "allowed": f"{lo}-{hi}"}],
            )
        return default
    try:
        value = int(str(raw).strip())
    except ValueError:
        value = None
    if value is None or not lo <= value <= hi or isinstance(raw, bool):
        raise InvalidInput(
            f"{name} {raw!r} is not a whole number from {lo} to {hi}.",
            problems=[{"field": name, "value": str(raw)[:40], "allowed": f"{lo}-{hi}"}],
        )
    return value


def quote(roles: set[str] | frozenset[str], data: Any, now: dt.datetime | None = None) -> Quote:
    """P50 / P90 ship dates for a spec and quantity not yet released, inserted into
    today's work in progress (with an optional lot priority; lower runs first).

    The spec goes through the routing builder with the current process library, the
    quantity becomes lots (boards per panel, panels per lot), and those lots join the
    floor now, queued behind the supervisor's orders like any new lot."""
    require_planning(roles, "quote a ship date")
    if not isinstance(data, dict):
        raise InvalidInput("Send an object with spec, quantity and optional priority.")
    spec_raw = data.get("spec")
    if not isinstance(spec_raw, dict):
        raise InvalidInput(
            "spec must be a build spec object (see README 'Build spec').",
            problems=[{"field": "spec", "allowed": "a build spec object"}],
        )
    quantity = _whole(data, "quantity", None, 1, 1_000_000)
    priority = _whole(data, "priority", 100, -1000, 1000)
    per_panel = _whole(data, "boards_per_panel", DEFAULT_BOARDS_PER_PANEL, 1, 500)
    per_lot = _whole(data, "panels_per_lot", DEFAULT_PANELS_PER_LOT, 1, 500)
    try:
        spec = parse_spec(spec_raw)
    except SpecInvalid as exc:
        raise InvalidInput(
            "The build spec has problems; fix them and quote again.",
            problems=spec_problems(exc),
        ) from exc
    _, library = current_library()
    routing = build_routing(spec, library)
    panels = math.ceil(quantity / per_panel)
    lot_count = math.ceil(panels / per_lot)
    if lot_count > MAX_QUOTE_LOTS:
        raise InvalidInput(
            f"{quantity} boards make {lot_count} lots; a quote takes at most "
            f"{MAX_QUOTE_LOTS} lots (raise boards_per_panel or panels_per_lot).",
            problems=[{"field": "quantity", "value": quantity}],
        )
    now = now or timezone.now()
    steps = tuple(
        fc.RemainingStep(s.code, s.work_center, float(s.standard_minutes)) for s in routing.steps
    )
    lots, _, _ = wip_lots()
    new = [
        fc.WipLot(
            code=f"~{QUOTE_CODE}-{k:03d}",  # '~' sorts after lot codes: ties go to the floor
            steps=steps,
            jobs=(QUOTE_CODE,),
            lot_priority=priority,
            arrived_at=now,
        )
        for k in range(lot_count)
    ]
    clock = time.perf_counter()
    result = fc.forecast(
        now,
        [*lots, *new],
        capacities(),
        measured_times(now).run,
        tz=_site_tz(),
        replications=QUOTE_REPLICATIONS,
        seed=20_260_101,
        processes=int(settings.FORECAST_PROCESSES),
    )
    finish = result.jobs[QUOTE_CODE]
    zone = zoneinfo.ZoneInfo(_site_tz())
    return Quote(
        p50_ship=finish.p50.astimezone(zone).date(),
        p90_ship=finish.p90.astimezone(zone).date(),
        p50=finish.p50,
        p90=finish.p90,
        lots=lot_count,
        panels=panels,
        steps=len(steps),
        standard_minutes=routing.standard_minutes,
        replications=QUOTE_REPLICATIONS,
        wip_lots=len(lots),
        seconds=time.perf_counter() - clock,
    )


# --- demo -----------------------------------------------------------------------------

DEMO_CAPACITY: dict[str, dict[str, Any]] = {
    # Invented demo shop: two shifts on weekdays for most rooms, round the clock for the
    # wet lines and the press (they do not stop mid-cycle), batch loads at the press
    # and the plating line.
    "cam": {"units": 2, "shifts": "07:00-16:00", "weekend": False},
    "imaging": {"units": 2, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "inner_wet": {"units": 1, "shifts": ""},
    "aoi": {"units": 2, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "lamination": {"units": 1, "batch": 4, "shifts": ""},
    "drilling": {"units": 3, "shifts": ""},
    "laser": {"units": 1, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "wet_process": {"units": 1, "shifts": ""},
    "plating": {"units": 1, "batch": 3, "shifts": ""},
    "outer_wet": {"units": 1, "shifts": ""},
    "solder_mask": {"units": 2, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "legend": {"units": 1, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "finish_line": {"units": 1, "shifts": "06:00-14:00, 14:00-22:00"},
    "hasl": {"units": 1, "shifts": "06:00-14:00", "weekend": False},
    "etest": {"units": 2, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "profiling": {"units": 2, "shifts": "06:00-14:00, 14:00-22:00", "weekend": False},
    "inspection": {"units": 2, "shifts": "07:00-16:00", "weekend": False},
    "shipping": {"units": 1, "shifts": "08:00-17:00", "weekend": False},
}


def ensure_demo_capacity() -> int:
    """Give the demo's work centers capacities and calendars (existing ones are kept)."""
    made = 0
    for center in WorkCenter.objects.filter(code__in=DEMO_CAPACITY, capacity__isnull=True):
        d = DEMO_CAPACITY[center.code]
        weekend = d.get("weekend", True)
        WorkCenterCapacity.objects.create(
            work_center=center,
            units=d["units"],
            batch_size=d.get("batch", 1),
            shifts=d["shifts"],
            saturday=weekend,
            sunday=weekend,
        )
        made += 1
    return made
