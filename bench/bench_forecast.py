"""Benchmark: the finish forecast of 2,000 WIP lots with 100 replications (goal < 10 s).

Run: DEBUG=1 DATABASE_URL=postgres://postgres@127.0.0.1:5432/sf_x \
     var/venv/bin/python bench/bench_forecast.py
Prints one JSON object; run() returns the same dict (bench/harness.py merges it).

The floor: the test factory's released routing (a 4-layer board, 39 steps), 2,000 lots of
it spread evenly along the route (lot i has done i mod N of its N steps; every fifth lot's
current step is in work), 400 jobs of 5 lots each, the done steps as measured history,
and the demo shop's shift calendars and batch sizes with units scaled so the floor would
clear its work in about ten working days at 80 % utilisation (a floor that carries 2,000
lots has that kind of capacity; the demo's own units would queue for half a year).
forecast_s_2000 is the whole `run_forecast` (read the floor, simulate, store 2,400
rows) as the periodic task runs it, with the deployed FORECAST_PROCESSES (2);
forecast_sim_s_2000 is its simulation alone; forecast_s_2000_one_process the same run on
one process; forecast_cpu_s_* the CPU seconds spent (this process and its forked ones).
The wall clock on a shared machine also counts other people's work: compare within a run.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import os
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")
os.environ.setdefault("DEBUG", "1")

LOTS = 2000
LOTS_PER_JOB = 5
REPLICATIONS = 100


def _floor() -> int:
    """Build the 2,000-lot floor with bulk inserts; returns the number of open steps."""
    from django.utils import timezone

    from routing.services import lot_step_fields
    from shopfloor.floor.models import LotStep
    from shopfloor.planning import services as planning
    from shopfloor.planning.models import WorkCenterCapacity, parse_shifts
    from shopfloor.plant.models import Job, Lot, Panel, PanelImage
    from tests import factories

    floor = factories.make_floor()
    planning.ensure_demo_capacity()
    work: dict[int, int] = {}
    rsteps = list(floor.routing.steps.order_by("seq"))
    now = timezone.now()
    jobs = Job.objects.bulk_create(
        [
            Job(
                number=f"BJ{k:04d}",
                part_revision=floor.job.part_revision,
                quantity=100,
                due_date=timezone.localdate() + dt.timedelta(days=5 + k % 20),
                ipc_class=2,
                routing_revision=floor.routing,
            )
            for k in range(LOTS // LOTS_PER_JOB)
        ]
    )
    lots = Lot.objects.bulk_create(
        [
            Lot(
                code=f"BF-{i:05d}",
                routing_revision=floor.routing,
                status=Lot.Status.IN_PROCESS,
                panel_count=1,
                priority=100 - (i % 3) * 10,
                started_at=now - dt.timedelta(hours=i % 48),
            )
            for i in range(LOTS)
        ]
    )
    panels = Panel.objects.bulk_create([Panel(serial=f"{lot.code}-P1", lot=lot) for lot in lots])
    PanelImage.objects.bulk_create(
        [PanelImage(panel=p, job=jobs[i // LOTS_PER_JOB], count=4) for i, p in enumerate(panels)]
    )
    steps: list[LotStep] = []
    n = len(rsteps)
    for i, lot in enumerate(lots):
        done = i % n
        for k, rs in enumerate(rsteps):
            fields = lot_step_fields(rs)
            status = LotStep.Status.WAITING
            extra: dict[str, Any] = {}
            if k < done:
                status = LotStep.Status.DONE
                # history: a run of about its standard minutes, a queue of an hour or so
                start = now - dt.timedelta(hours=2 + (i * 7 + k) % 40)
                extra = {
                    "arrived_at": start - dt.timedelta(minutes=30 + (i + k) % 90),
                    "started_at": start,
                    "completed_at": start
                    + dt.timedelta(minutes=rs.standard_minutes * (0.7 + ((i + 3 * k) % 7) / 10)),
                }
            elif k == done:
                extra = {"arrived_at": now - dt.timedelta(minutes=(i * 13) % 600)}
                if i % 5 == 0:
                    status = LotStep.Status.IN_PROGRESS
                    extra["started_at"] = now - dt.timedelta(minutes=5)
            steps.append(LotStep(lot=lot, position=(k + 1) * 10, status=status, **fields, **extra))
    LotStep.objects.bulk_create(steps, batch_size=5000)
    for step in steps:
        if step.status != LotStep.Status.DONE:
            work[step.work_center_id] = work.get(step.work_center_id, 0) + step.standard_minutes
    for cap in WorkCenterCapacity.objects.all():
        shifts = parse_shifts(cap.shifts)
        per_day = 1440.0
        if shifts:
            per_day = sum(
                (b.hour * 60 + b.minute - a.hour * 60 - a.minute) % 1440 or 1440 for a, b in shifts
            )
        per_day *= len(cap.weekdays) / 7
        load = work.get(cap.work_center_id, 0) / (10 * per_day * 0.8 * cap.batch_size)
        cap.units = max(1, math.ceil(load))
        cap.save(update_fields=["units"])
    return sum(n - i % n for i in range(LOTS))


def _cpu() -> float:
    """CPU seconds of this process and its finished children (the forked replications):
    on a shared machine the wall clock also counts other people's work."""
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def run() -> dict[str, Any]:
    import django

    django.setup()
    from django.conf import settings
    from django.db import connection
    from django.test.utils import setup_test_environment, teardown_test_environment

    from shopfloor.planning import services as planning

    setup_test_environment()
    old_name = connection.settings_dict["NAME"]
    connection.settings_dict.setdefault("TEST", {})["NAME"] = f"{old_name}_bench_forecast"
    connection.creation.create_test_db(verbosity=0, autoclobber=True)
    results: dict[str, Any] = {}
    try:
        open_steps = _floor()
        results["forecast_open_steps_2000"] = open_steps
        processes_default = settings.FORECAST_PROCESSES
        for label, processes in (("", processes_default), ("_one_process", 1)):
            settings.FORECAST_PROCESSES = processes
            start = time.perf_counter()
            cpu_start = _cpu()
            run_ = planning.run_forecast("command", replications=REPLICATIONS, seed=7)
            elapsed = time.perf_counter() - start
            cpu = _cpu() - cpu_start
            assert run_ is not None and run_.lot_count == LOTS + 1, run_  # + the factory's
            results[f"forecast_s_2000{label}"] = round(elapsed, 2)
            results[f"forecast_sim_s_2000{label}"] = round(run_.seconds or 0.0, 2)
            results[f"forecast_cpu_s_2000{label}"] = round(cpu, 2)
        results["forecast_processes"] = processes_default
        results["forecast_load_average"] = round(os.getloadavg()[0], 1)
    finally:
        connection.creation.destroy_test_db(old_name, verbosity=0)
        teardown_test_environment()
    return results


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
