"""A floor's work in progress -> P50 / P90 finish times per lot and per job.

The Django side reads the live floor into these plain records (every active lot with its
remaining steps, each work center's capacity and calendar, the measured run times per
operation and work center) and stores what `forecast` returns. A what-if quote is the
same call with the quoted order's lots added (`extra_lots`).

Rules beyond the engine's (engine.py):
- A lot on hold joins its queue after `hold_minutes` (a planning allowance for the
  disposition; HOLD_ALLOWANCE_MINUTES by default), then runs as usual.
- A work center without a capacity record has one unit and works round the clock.
- A job finishes when the last of its lots does: in each replication the job's finish is
  the latest finish among its lots, and P50 / P90 are taken over those.
"""

from __future__ import annotations

import datetime as dt
import os
import time
from collections import defaultdict
from collections.abc import Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from multiprocessing import get_context

from . import engine
from .calendar import ShiftCalendar, compile_calendar
from .steptimes import Sampler, blended_sampler

# A held lot waits this long for its disposition before it queues again (a planning
# assumption: most holds are dispositioned within a shift; the shop tunes it).
HOLD_ALLOWANCE_MINUTES = 480.0
DEFAULT_REPLICATIONS = 100
MAX_REPLICATIONS = 1000


@dataclass(frozen=True)
class Capacity:
    """A work center's capacity: parallel units, batch size and shift calendar."""

    units: int = 1
    batch_size: int = 1
    calendar: ShiftCalendar = field(default_factory=ShiftCalendar)


@dataclass(frozen=True)
class RemainingStep:
    operation: str
    work_center: str
    standard_minutes: float


@dataclass(frozen=True)
class WipLot:
    """A lot and what it still has to do; `steps[0]` is its current step."""

    code: str
    steps: tuple[RemainingStep, ...]
    jobs: tuple[str, ...] = ()
    lot_priority: int = 100
    queue_priority: int = 0
    arrived_at: dt.datetime | None = None  # joined the current step's queue
    started_at: dt.datetime | None = None  # set when the current step is in work
    on_hold: bool = False
    release_at: dt.datetime | None = None  # joins the floor later (a quoted order)


@dataclass(frozen=True)
class Finish:
    p50: dt.datetime
    p90: dt.datetime


@dataclass
class ForecastResult:
    started_at: dt.datetime
    lots: dict[str, Finish]
    jobs: dict[str, Finish]
    replications: int
    seconds: float
    step_count: int


def build_samplers(
    lots: Sequence[WipLot],
    history: Mapping[tuple[str, str], Sequence[float]],
) -> tuple[list[Sampler], dict[tuple[str, str, float], int]]:
    """One blended sampler per (operation, work center, standard minutes) in the WIP."""
    index: dict[tuple[str, str, float], int] = {}
    samplers: list[Sampler] = []
    for lot in lots:
        for s in lot.steps:
            key = (s.operation, s.work_center, float(s.standard_minutes))
            if key not in index:
                index[key] = len(samplers)
                samplers.append(
                    blended_sampler(
                        float(s.standard_minutes), history.get((s.operation, s.work_center), ())
                    )
                )
    return samplers, index


def forecast(
    now: dt.datetime,
    lots: Sequence[WipLot],
    capacities: Mapping[str, Capacity],
    history: Mapping[tuple[str, str], Sequence[float]],
    *,
    tz: str = "UTC",
    replications: int = DEFAULT_REPLICATIONS,
    seed: int = 1,
    hold_minutes: float = HOLD_ALLOWANCE_MINUTES,
    processes: int = 1,
) -> ForecastResult:
    """Simulate the floor `replications` times and read each lot's and job's P50 / P90."""
    if now.tzinfo is None:
        raise ValueError("now must carry a time zone")
    if not 1 <= replications <= MAX_REPLICATIONS:
        raise ValueError(f"replications must be 1 to {MAX_REPLICATIONS}")
    clock = time.perf_counter()
    live = sorted((lot for lot in lots if lot.steps), key=lambda lot: lot.code)
    codes = sorted({s.work_center for lot in live for s in lot.steps} | set(capacities))
    center_index = {code: k for k, code in enumerate(codes)}
    compiled = {}
    centers = []
    for code in codes:
        cap = capacities.get(code, Capacity())
        cal_key = cap.calendar
        if cal_key not in compiled:
            compiled[cal_key] = compile_calendar(cap.calendar, now, tz)
        centers.append(
            engine.Center(units=cap.units, batch_size=cap.batch_size, working=compiled[cal_key])
        )
    samplers, sampler_index = build_samplers(live, history)
    sim_lots = []
    for lot in live:
        steps = tuple(
            (
                center_index[s.work_center],
                sampler_index[(s.operation, s.work_center, float(s.standard_minutes))],
            )
            for s in lot.steps
        )
        arrived = _minutes(lot.arrived_at, now) if lot.arrived_at else 0.0
        release = 0.0
        elapsed = None
        queue_priority = lot.queue_priority
        if lot.release_at is not None:
            release = max(_minutes(lot.release_at, now), 0.0)
        if lot.on_hold:
            release = max(release, hold_minutes)
            queue_priority = 0
        elif lot.started_at is not None:
            elapsed = max(-_minutes(lot.started_at, now), 0.0)
        sim_lots.append(
            engine.Lot(
                steps=steps,
                order=(queue_priority, lot.lot_priority),
                arrived=min(arrived, 0.0),
                release=release,
                elapsed=elapsed,
            )
        )
    finishes = run_replications(centers, samplers, sim_lots, replications, seed, processes)
    lot_results: dict[str, Finish] = {}
    job_runs: dict[str, list[float]] = defaultdict(lambda: [0.0] * replications)
    # per lot, its finish in every replication (transposed in C)
    for lot, values in zip(live, zip(*finishes, strict=True), strict=False):
        lot_results[lot.code] = _finish(now, values)
        for job in lot.jobs:
            job_runs[job] = list(map(max, job_runs[job], values))
    job_results = {job: _finish(now, runs) for job, runs in job_runs.items()}
    return ForecastResult(
        started_at=now,
        lots=lot_results,
        jobs=job_results,
        replications=replications,
        seconds=time.perf_counter() - clock,
        step_count=sum(len(lot.steps) for lot in live),
    )


def _minutes(when: dt.datetime, now: dt.datetime) -> float:
    return (when - now).total_seconds() / 60.0


def _finish(now: dt.datetime, minutes: Sequence[float]) -> Finish:
    s = sorted(minutes)
    return Finish(
        p50=now + dt.timedelta(minutes=engine.percentile(s, 0.5)),
        p90=now + dt.timedelta(minutes=engine.percentile(s, 0.9)),
    )


# --- replications in parallel --------------------------------------------------------

_SHARED: tuple[engine.Model, int] | None = None


def _worker(chunk: range) -> list[list[float]]:
    if _SHARED is None:
        raise RuntimeError("the forked process did not inherit the model")
    model, seed = _SHARED
    return [engine.replicate(model, seed, r).finish for r in chunk]


def run_replications(
    centers: Sequence[engine.Center],
    samplers: Sequence[Sampler],
    lots: Sequence[engine.Lot],
    replications: int,
    seed: int,
    processes: int = 1,
) -> list[list[float]]:
    """Each replication's finish times. With processes > 1 the replications are split
    over forked processes (the model reaches them by fork, not by pickling); replication
    r always uses the same random stream, so the result does not depend on the split.
    Where a process cannot be started (a sandbox, a daemonic worker), it runs here."""
    processes = max(1, min(processes, replications, os.cpu_count() or 1))
    model = engine.prepare(centers, samplers, lots)
    if processes == 1 or not lots:
        return [engine.replicate(model, seed, r).finish for r in range(replications)]
    global _SHARED
    _SHARED = (model, seed)
    chunks = [range(k, replications, processes) for k in range(processes)]
    try:
        with ProcessPoolExecutor(processes, mp_context=get_context("fork")) as pool:
            parts = list(pool.map(_worker, chunks))
    except (AssertionError, OSError, RuntimeError):
        return [engine.replicate(model, seed, r).finish for r in range(replications)]
    finally:
        _SHARED = None
    out: list[list[float]] = [[] for _ in range(replications)]
    for chunk, part in zip(chunks, parts, strict=True):
        for r, finish in zip(chunk, part, strict=True):
            out[r] = finish
    return out
