"""Alerts, holds, nonconformances and SPC state.

Every committed reading writes an OutboxEvent in the same transaction; a Celery task
turns an out-of-window event into exactly one Alert, one Hold and one NCR (unique
constraints decide who wins when a task runs twice).
"""

from __future__ import annotations

from django.db import models
from django.utils import timezone


class OutboxEvent(models.Model):
    """An event written with the change that caused it; a relay publishes it to Celery."""

    kind = models.CharField(max_length=40)
    payload = models.JSONField()
    created_at = models.DateTimeField(default=timezone.now)
    published_at = models.DateTimeField(null=True, blank=True)
    processed_at = models.DateTimeField(null=True, blank=True)
    attempts = models.PositiveIntegerField(default=0)
    last_error = models.TextField(blank=True)

    class Meta:
        ordering = ["id"]
        indexes = [models.Index(fields=["processed_at", "created_at"])]

    def __str__(self) -> str:
        return f"event {self.pk} {self.kind}"


class Alert(models.Model):
    """Something a supervisor or quality engineer must see."""

    class Kind(models.TextChoices):
        OUT_OF_WINDOW = "out_of_window", "Reading out of window"
        DRIFT = "drift", "Process drift (SPC rule)"
        QUEUE_WARNING = "queue_time_warning", "Queue-time limit approaching"
        QUEUE_EXCEEDED = "queue_time_exceeded", "Queue-time limit exceeded"
        DUE_RISK = "due_date_risk", "Due date at risk"
        LATE = "late", "Job late"
        ANALYSIS_OVERDUE = "analysis_overdue", "Bath analysis overdue"
        BATH_OUT_OF_WINDOW = "bath_out_of_window", "Bath out of window"

    class Severity(models.TextChoices):
        INFO = "info", "Info"
        WARNING = "warning", "Warning"
        CRITICAL = "critical", "Critical"

    kind = models.CharField(max_length=30, choices=Kind.choices)
    severity = models.CharField(max_length=10, choices=Severity.choices)
    event = models.OneToOneField(
        OutboxEvent, null=True, blank=True, on_delete=models.PROTECT, related_name="alert"
    )
    dedupe_key = models.CharField(max_length=120, unique=True)
    lot = models.ForeignKey(
        "plant.Lot", null=True, blank=True, on_delete=models.PROTECT, related_name="alerts"
    )
    lot_step = models.ForeignKey("floor.LotStep", null=True, blank=True, on_delete=models.PROTECT)
    job = models.ForeignKey("plant.Job", null=True, blank=True, on_delete=models.PROTECT)
    reading = models.ForeignKey("floor.Reading", null=True, blank=True, on_delete=models.PROTECT)
    work_center = models.ForeignKey(
        "plant.WorkCenter", null=True, blank=True, on_delete=models.PROTECT
    )
    message = models.TextField()
    rule = models.CharField(max_length=40, blank=True)
    created_at = models.DateTimeField(default=timezone.now)
    closed_at = models.DateTimeField(null=True, blank=True)
    notified_at = models.DateTimeField(null=True, blank=True)

    class Meta:
        ordering = ["-created_at"]

    def __str__(self) -> str:
        return f"{self.get_kind_display()}: {self.message[:60]}"


class RootCause(models.Model):
    """A root-cause category an NCR is closed against: a list the site edits in the admin."""

    code = models.CharField(max_length=30, unique=True)
    name = models.CharField(max_length=120)
    active = models.BooleanField(default=True)

    class Meta:
        ordering = ["name"]

    def __str__(self) -> str:
        return self.name


class Nonconformance(models.Model):
    """An NCR: what was wrong, the readings that showed it, and how it was dispositioned."""

    class Status(models.TextChoices):
        OPEN = "open", "Open"
        CLOSED = "closed", "Dispositioned"

    class Disposition(models.TextChoices):
        USE_AS_IS = "use_as_is", "Use as is"
        REWORK = "rework", "Rework"
        SCRAP = "scrap", "Scrap"
        MIXED = "mixed", "Per panel (mixed)"
        # Only when a correction brought the set back inside (correction_note is set):
        # the product was never out of window, the first entry was a recording slip.
        RECORDING_ERROR = "recording_error", "Recording error (corrected)"

    number = models.CharField(max_length=20, unique=True)
    lot = models.ForeignKey("plant.Lot", on_delete=models.PROTECT, related_name="ncrs")
    lot_step = models.ForeignKey("floor.LotStep", null=True, on_delete=models.PROTECT)
    alert = models.OneToOneField(
        Alert, null=True, blank=True, on_delete=models.PROTECT, related_name="ncr"
    )
    readings = models.ManyToManyField("floor.Reading", blank=True, related_name="ncrs")
    description = models.TextField()
    # Written by the event handler when a correction brought the set back inside.
    correction_note = models.TextField(blank=True)
    status = models.CharField(max_length=10, choices=Status.choices, default=Status.OPEN)
    opened_at = models.DateTimeField(default=timezone.now)
    disposition = models.CharField(max_length=16, choices=Disposition.choices, blank=True)
    disposition_note = models.TextField(blank=True)
    dispositioned_at = models.DateTimeField(null=True, blank=True)
    disposition_signature = models.OneToOneField(
        "audit.Signature", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    root_cause = models.ForeignKey(
        RootCause, null=True, blank=True, on_delete=models.PROTECT, related_name="ncrs"
    )
    corrective_action = models.TextField(blank=True)
    panel_actions = models.JSONField(
        default=dict, blank=True, help_text="Panel serial -> use_as_is | rework | scrap"
    )
    scrap_lot = models.ForeignKey(
        "plant.Lot",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="+",
        help_text="The split-off scrapped part",
    )

    class Meta:
        ordering = ["-opened_at"]
        verbose_name = "nonconformance (NCR)"

    def __str__(self) -> str:
        return self.number


class Hold(models.Model):
    """A lot may not be worked while it has an open hold; only a disposition releases it."""

    lot = models.ForeignKey("plant.Lot", on_delete=models.PROTECT, related_name="holds")
    lot_step = models.ForeignKey("floor.LotStep", null=True, on_delete=models.PROTECT)
    alert = models.OneToOneField(
        Alert, null=True, blank=True, on_delete=models.PROTECT, related_name="hold"
    )
    ncr = models.ForeignKey(
        Nonconformance, null=True, blank=True, on_delete=models.PROTECT, related_name="holds"
    )
    reason = models.TextField()
    opened_at = models.DateTimeField(default=timezone.now)
    released_at = models.DateTimeField(null=True, blank=True)

    class Meta:
        ordering = ["-opened_at"]

    def __str__(self) -> str:
        return f"hold on lot {self.lot_id} ({'open' if self.released_at is None else 'released'})"


class SeriesState(models.Model):
    """SPC state of one series: a quantity at one operation (routing step code), work
    center and equipment, judged against one window (its criteria, `spec_key`).

    A series never mixes specifications: a class 2 lot never enters a class 3 series,
    and capability is computed against the series' own window.

    Holds the control limits (from a baseline the quality engineer may fix or recompute)
    and the incremental rule state, so a new reading costs the same however long the
    history is.
    """

    key = models.CharField(max_length=160, unique=True)
    quantity = models.CharField(max_length=40)
    work_center = models.ForeignKey("plant.WorkCenter", on_delete=models.PROTECT)
    equipment = models.ForeignKey(
        "plant.Equipment", null=True, blank=True, on_delete=models.PROTECT
    )
    # The operation (the lot step's routing code) and the window the points were judged
    # against (shopfloor.core.judging.spec_key), with the criteria and words for people.
    step_code = models.CharField(max_length=60, blank=True)
    spec_key = models.CharField(max_length=64, blank=True)
    window = models.JSONField(default=list, blank=True)
    window_label = models.CharField(max_length=400, blank=True)
    chart = models.CharField(max_length=12, default="individuals")
    # Readings per subgroup for X-bar charts (the samples one lot takes at the step);
    # 1 for individuals and c charts.
    subgroup_size = models.PositiveSmallIntegerField(default=1)
    baseline_size = models.PositiveIntegerField(default=25)
    baseline = models.JSONField(default=list, blank=True)
    limits = models.JSONField(null=True, blank=True)
    limits_fixed = models.BooleanField(default=False)
    rule_state = models.JSONField(null=True, blank=True)
    rules = models.CharField(max_length=20, default="western_electric")
    points = models.PositiveIntegerField(default=0)
    updated_at = models.DateTimeField(default=timezone.now)

    def __str__(self) -> str:
        return self.key
