"""Test helpers for the board and history tests: many lots fast (bulk_create), readings."""

from __future__ import annotations

import datetime as dt
import itertools

from django.utils import timezone

from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Job, Lot, Panel, PanelImage, WorkCenter

_n = itertools.count(1)


def bulk_lots(
    routing,
    job: Job,
    count: int,
    centers: list[WorkCenter],
    prefix: str = "B",
    arrived_minutes_ago: int = 30,
) -> list[Lot]:
    """`count` lots of one panel each; step 1 done, step 2 current (at centers[i % k]),
    step 3 waiting. Built with bulk_create: 4 INSERTs whatever the count."""
    now = timezone.now()
    batch = next(_n)
    lots = Lot.objects.bulk_create(
        [
            Lot(
                code=f"{prefix}{batch:02d}-{i:05d}",
                routing_revision=routing,
                status=Lot.Status.IN_PROCESS,
                panel_count=1,
                started_at=now - dt.timedelta(hours=5),
            )
            for i in range(count)
        ]
    )
    panels = Panel.objects.bulk_create([Panel(serial=f"{lot.code}-P01", lot=lot) for lot in lots])
    PanelImage.objects.bulk_create([PanelImage(panel=p, job=job, count=4) for p in panels])
    steps = []
    for i, lot in enumerate(lots):
        wc = centers[i % len(centers)]
        steps += [
            LotStep(
                lot=lot,
                position=10,
                code="first",
                name="First step",
                work_center=wc,
                status=LotStep.Status.DONE,
                arrived_at=now - dt.timedelta(hours=5),
                completed_at=now - dt.timedelta(hours=1),
            ),
            LotStep(
                lot=lot,
                position=20,
                code="second",
                name="Second step",
                work_center=wc,
                status=LotStep.Status.WAITING,
                standard_minutes=40,
                queue_time_limit_minutes=60,
                arrived_at=now - dt.timedelta(minutes=arrived_minutes_ago),
            ),
            LotStep(
                lot=lot,
                position=30,
                code="third",
                name="Third step",
                work_center=centers[(i + 1) % len(centers)],
                standard_minutes=20,
            ),
        ]
    LotStep.objects.bulk_create(steps)
    return lots


def bulk_readings(
    step: LotStep,
    operator,
    count: int,
    quantity: str = "copper_thickness",
    low: float = 20.0,
    high: float = 30.0,
) -> None:
    now = timezone.now()
    window = {
        "quantity": quantity,
        "unit": "um",
        "min": low,
        "max": high,
        "target": 25.0,
        "source": "IPC-6012 (test window)",
        "samples": count,
    }
    Reading.objects.bulk_create(
        [
            Reading(
                lot_step=step,
                quantity=quantity,
                entered_value=str(25 + (i % 7) * 0.5),
                entered_unit="um",
                value=25 + (i % 7) * 0.5,
                unit="um",
                sample_index=1,
                operator=operator,
                captured_at=now - dt.timedelta(seconds=count - i),
                window=window,
                in_window=True,
            )
            for i in range(count)
        ]
    )
