"""Capacity and forecasts: what each work center can do, and where the lots will finish.

Capacity (parallel units, batch size, shift calendar, holidays) is edited in the admin.
A ForecastRun is one simulation of the whole floor (shopfloor/core/planning); its
LotForecast and JobForecast rows are the P50 / P90 finishes it found. Runs are kept for
a while so a page can say how fresh its forecast is; only the newest finished one is read.
"""

from __future__ import annotations

import datetime as dt
import re

from django.conf import settings
from django.core.exceptions import ValidationError
from django.db import models
from django.db.models import Q
from django.utils import timezone

SHIFT_RE = re.compile(r"^\s*(\d{1,2}):(\d{2})\s*-\s*(\d{1,2}):(\d{2})\s*$")
SHIFT_HELP = (
    "Daily shifts as HH:MM-HH:MM, comma-separated (06:00-14:00, 14:00-22:00); an end at or "
    "before the start runs past midnight (22:00-06:00). Blank: round the clock."
)


def parse_shifts(text: str) -> list[tuple[dt.time, dt.time]]:
    """'06:00-14:00, 14:00-22:00' -> [(06:00, 14:00), (14:00, 22:00)]; ValueError says
    what was wrong and what is allowed."""
    out = []
    for part in (text or "").split(","):
        if not part.strip():
            continue
        m = SHIFT_RE.match(part)
        if not m:
            raise ValueError(
                f"shift {part.strip()!r} is not HH:MM-HH:MM; write e.g. 06:00-14:00, 22:00-06:00"
            )
        h1, m1, h2, m2 = (int(g) for g in m.groups())
        if h1 > 23 or h2 > 23 or m1 > 59 or m2 > 59:
            raise ValueError(f"shift {part.strip()!r}: hours are 00-23 and minutes 00-59")
        out.append((dt.time(h1, m1), dt.time(h2, m2)))
    return out


class WorkCenterCapacity(models.Model):
    """How much a work center can do at once, and when it works."""

    work_center = models.OneToOneField(
        "plant.WorkCenter", on_delete=models.CASCADE, related_name="capacity"
    )
    units = models.PositiveSmallIntegerField(
        default=1, help_text="Parallel machines or stations that each take one lot (or batch)"
    )
    batch_size = models.PositiveSmallIntegerField(
        default=1,
        help_text="Lots run together as one load (a press load, a plating flight); 1 = one lot",
    )
    shifts = models.CharField(max_length=200, blank=True, help_text=SHIFT_HELP)
    monday = models.BooleanField(default=True)
    tuesday = models.BooleanField(default=True)
    wednesday = models.BooleanField(default=True)
    thursday = models.BooleanField(default=True)
    friday = models.BooleanField(default=True)
    saturday = models.BooleanField(default=True)
    sunday = models.BooleanField(default=True)

    class Meta:
        verbose_name_plural = "work center capacities"
        constraints = [
            models.CheckConstraint(condition=Q(units__gte=1), name="capacity_units_min_1"),
            models.CheckConstraint(condition=Q(batch_size__gte=1), name="capacity_batch_min_1"),
        ]

    def __str__(self) -> str:
        return f"{self.work_center}: {self.units} unit(s)"

    @property
    def weekdays(self) -> list[int]:
        days = (
            self.monday,
            self.tuesday,
            self.wednesday,
            self.thursday,
            self.friday,
            self.saturday,
            self.sunday,
        )
        return [k for k, on in enumerate(days) if on]

    def clean(self) -> None:
        try:
            parse_shifts(self.shifts)
        except ValueError as exc:
            raise ValidationError({"shifts": str(exc)}) from exc
        if not self.weekdays:
            raise ValidationError("A work center needs at least one working weekday.")


class Holiday(models.Model):
    """A day the shop (or one work center) does not work."""

    date = models.DateField()
    name = models.CharField(max_length=100)
    work_center = models.ForeignKey(
        "plant.WorkCenter",
        null=True,
        blank=True,
        on_delete=models.CASCADE,
        help_text="Blank: every work center",
    )

    class Meta:
        ordering = ["date"]

    def __str__(self) -> str:
        return f"{self.date} {self.name}"


class ForecastRun(models.Model):
    """One simulation of the whole floor; at most one runs at a time."""

    class Status(models.TextChoices):
        RUNNING = "running", "Running"
        DONE = "done", "Done"
        FAILED = "failed", "Failed"

    class Trigger(models.TextChoices):
        PERIODIC = "periodic", "Every few minutes (beat)"
        ON_DEMAND = "on_demand", "Asked for"
        COMMAND = "command", "Command line"
        DEMO = "demo", "Demo load"

    status = models.CharField(max_length=10, choices=Status.choices, default=Status.RUNNING)
    trigger = models.CharField(max_length=12, choices=Trigger.choices)
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL
    )
    started_at = models.DateTimeField(default=timezone.now)
    finished_at = models.DateTimeField(null=True, blank=True)
    replications = models.PositiveIntegerField()
    seed = models.BigIntegerField()
    lot_count = models.PositiveIntegerField(default=0)
    job_count = models.PositiveIntegerField(default=0)
    step_count = models.PositiveIntegerField(default=0)
    seconds = models.FloatField(null=True, blank=True, help_text="Simulation time")
    error = models.TextField(blank=True)

    class Meta:
        ordering = ["-started_at"]
        constraints = [
            models.UniqueConstraint(
                fields=["status"],
                condition=Q(status="running"),
                name="one_forecast_running",
            )
        ]
        indexes = [models.Index(fields=["status", "-finished_at"])]

    def __str__(self) -> str:
        return f"forecast {self.pk} {self.started_at:%Y-%m-%d %H:%M} ({self.status})"


class LotForecast(models.Model):
    """A lot's projected finish (its last step done) in one run."""

    run = models.ForeignKey(ForecastRun, on_delete=models.CASCADE, related_name="lot_rows")
    lot = models.ForeignKey("plant.Lot", on_delete=models.CASCADE, related_name="forecasts")
    p50 = models.DateTimeField()
    p90 = models.DateTimeField()

    class Meta:
        constraints = [models.UniqueConstraint(fields=["lot", "run"], name="lot_forecast_unique")]

    def __str__(self) -> str:
        return f"lot {self.lot_id}: P50 {self.p50:%Y-%m-%d %H:%M}, P90 {self.p90:%Y-%m-%d %H:%M}"


class JobForecast(models.Model):
    """A job's projected finish (its last lot done) in one run, judged against its due date."""

    run = models.ForeignKey(ForecastRun, on_delete=models.CASCADE, related_name="job_rows")
    job = models.ForeignKey("plant.Job", on_delete=models.CASCADE, related_name="forecasts")
    p50 = models.DateTimeField()
    p90 = models.DateTimeField()
    at_risk = models.BooleanField(help_text="P90 after the end of the due date")

    class Meta:
        constraints = [models.UniqueConstraint(fields=["job", "run"], name="job_forecast_unique")]

    def __str__(self) -> str:
        return f"job {self.job_id}: P50 {self.p50:%Y-%m-%d %H:%M}, P90 {self.p90:%Y-%m-%d %H:%M}"
