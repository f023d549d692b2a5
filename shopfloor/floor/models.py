"""What happens to a lot on the floor: its steps, readings and idempotent requests.

A lot's steps are copied from its released routing revision when the lot is created
(measurement plan and windows included), so later revisions never change a lot in
process. Readings are never edited: a correction is a new reading that supersedes.
"""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import F, IntegerField, Min, OuterRef, Subquery, Sum, Window
from django.db.models.functions import Coalesce
from django.utils import timezone
from django.utils.translation import gettext_lazy as _

from shopfloor.core import judging
from shopfloor.plant.models import Lot


class LotStepQuerySet(models.QuerySet["LotStep"]):
    """The one place that says which steps are open and which is a lot's current step.

    A step is open while it is waiting, in progress or paused; a lot's current step is its
    first open step in route order. Every caller asks here rather than spelling it out."""

    def open(self) -> LotStepQuerySet:
        """Steps not yet done nor skipped."""
        return self.filter(status__in=OPEN_STEP_STATUSES)

    def current_for(self, lot: Lot | int) -> LotStep | None:
        """The lot's current step (its first open step), with its work center; None when
        every step is done or skipped."""
        return (
            self.filter(lot=lot).open().order_by("position").select_related("work_center").first()
        )

    def current_for_code(self, code: str) -> LotStep | None:
        """The current step of the lot with this traveller code (matched the one way lot
        codes are matched: see LotQuerySet.with_code), with its lot and work center."""
        code = (code or "").strip()
        if not code:
            return None
        return (
            self.filter(lot__code__iexact=code)
            .open()
            .order_by("position")
            .select_related("lot", "work_center")
            .first()
        )

    def current(self) -> LotStepQuerySet:
        """Each active lot's current step, in one query, annotated with `remaining` (the
        standard minutes of the lot's open steps). Any filter may be chained after it (it
        applies to the current steps, not to which step is current)."""
        open_here = LotStep.objects.filter(lot=OuterRef("lot_id")).open()
        first_open = open_here.order_by("position").values("position")[:1]
        remaining = (
            open_here.order_by().values("lot").annotate(total=Sum("standard_minutes"))
        ).values("total")
        return (
            self.open()
            .filter(lot__status__in=Lot.ACTIVE_STATUSES)
            .annotate(
                first_open=Subquery(first_open),
                remaining=Coalesce(Subquery(remaining, output_field=IntegerField()), 0),
            )
            .filter(position=F("first_open"))
        )

    def current_by_window(self) -> LotStepQuerySet:
        """The same steps as `current()`, found with window functions over each lot's open
        steps (one pass instead of two subqueries per open step: about 5x faster at 20,000
        lots). The result cannot take a WHERE on the step itself (it would apply before the
        current step is chosen); filter on the lot, or on a window value."""
        per_lot = [F("lot_id")]
        return (
            self.open()
            .filter(lot__status__in=Lot.ACTIVE_STATUSES)
            .annotate(
                first_open=Window(Min("position"), partition_by=per_lot),
                remaining=Window(Sum("standard_minutes"), partition_by=per_lot),
            )
            .filter(position=F("first_open"))
            .order_by()
        )


class LotStep(models.Model):
    """One step of one lot, in routing order (rework steps a disposition added included)."""

    class Status(models.TextChoices):
        WAITING = "waiting", _("Waiting")
        IN_PROGRESS = "in_progress", _("In progress")
        PAUSED = "paused", _("Paused")
        DONE = "done", _("Done")
        SKIPPED = "skipped", _("Skipped (moved to another revision)")

    lot = models.ForeignKey("plant.Lot", on_delete=models.PROTECT, related_name="steps")
    position = models.PositiveIntegerField(help_text="Order along the lot's route")
    code = models.CharField(max_length=60)
    name = models.CharField(max_length=120)
    work_center = models.ForeignKey(
        "plant.WorkCenter", on_delete=models.PROTECT, related_name="lot_steps"
    )
    routing_step = models.ForeignKey(
        "routing.RoutingStep", null=True, blank=True, on_delete=models.PROTECT
    )
    cycle = models.PositiveSmallIntegerField(null=True, blank=True)
    instructions = models.TextField(blank=True)
    parameters = models.JSONField(default=dict, blank=True)
    plan = models.JSONField(default=list, blank=True, help_text="Measurement plan snapshot")
    hazard = models.TextField(blank=True)
    queue_time_limit_minutes = models.PositiveIntegerField(null=True, blank=True)
    standard_minutes = models.PositiveIntegerField(default=30)
    is_rework = models.BooleanField(default=False)
    added_by_ncr = models.ForeignKey(
        "quality.Nonconformance",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="rework_steps",
    )
    status = models.CharField(max_length=12, choices=Status.choices, default=Status.WAITING)
    queue_priority = models.IntegerField(default=0, help_text="Supervisor order in the queue")
    arrived_at = models.DateTimeField(null=True, blank=True)
    started_at = models.DateTimeField(null=True, blank=True)
    started_by = models.ForeignKey(
        "plant.Person", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    completed_at = models.DateTimeField(null=True, blank=True)
    completed_by = models.ForeignKey(
        "plant.Person", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    equipment = models.ForeignKey(
        "plant.Equipment", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    material_lots = models.ManyToManyField("plant.MaterialLot", blank=True, related_name="steps")
    materials = models.JSONField(
        default=list, blank=True, help_text="Material kinds this step consumes (snapshot)"
    )
    signature = models.OneToOneField(
        "audit.Signature", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    queue_warning_released_reason = models.CharField(max_length=300, blank=True)

    objects = LotStepQuerySet.as_manager()

    class Meta:
        ordering = ["lot", "position"]
        constraints = [
            models.UniqueConstraint(fields=["lot", "position"], name="lot_step_position_unique")
        ]
        indexes = [models.Index(fields=["work_center", "status"])]

    def __str__(self) -> str:
        return f"{self.lot.code} #{self.position} {self.name}"

    @property
    def is_open(self) -> bool:
        """Not yet done nor skipped (the same rule as LotStep.objects.open())."""
        return self.status in OPEN_STEP_STATUSES


# The statuses of an open step (LotStepQuerySet.open is the one place that uses them).
OPEN_STEP_STATUSES = (LotStep.Status.WAITING, LotStep.Status.IN_PROGRESS, LotStep.Status.PAUSED)


class Reading(models.Model):
    """A measured value (or attribute count) on a lot step, judged against its window."""

    lot_step = models.ForeignKey(LotStep, on_delete=models.PROTECT, related_name="readings")
    quantity = models.CharField(max_length=40)
    entered_value = models.CharField(max_length=40)
    entered_unit = models.CharField(max_length=20)
    value = models.FloatField(help_text="In the quantity's canonical unit")
    unit = models.CharField(max_length=10)
    sample_index = models.PositiveSmallIntegerField(default=1)
    position = models.CharField(max_length=60, blank=True)
    equipment = models.ForeignKey(
        "plant.Equipment", null=True, blank=True, on_delete=models.PROTECT, related_name="readings"
    )
    operator = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="readings")
    captured_at = models.DateTimeField()
    recorded_at = models.DateTimeField(default=timezone.now)
    window = models.JSONField(help_text="Window snapshot it was judged against, with source")
    in_window = models.BooleanField()
    superseded_by = models.OneToOneField(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="supersedes"
    )
    correction_reason = models.CharField(max_length=300, blank=True)
    via = models.CharField(max_length=20, default="tablet")
    sample_key = models.CharField(
        max_length=100,
        blank=True,
        default="",
        help_text="The instrument's own key for this measurement (batch posts): a repeat "
        "with the same key on the same lot step returns this reading",
    )
    # What the operator (or instrument) confirmed before an out-of-window or implausible
    # value was stored: the very question the typo guard asked. Blank: nothing to confirm.
    confirmation = models.CharField(max_length=400, blank=True)
    # Set when this reading completed (or, as a correction, changed) a complete sample
    # set: the set's verdict against its mean / smallest / largest / range criteria.
    set_verdict = models.JSONField(null=True, blank=True)
    # Identity of the criteria it was judged against (shopfloor.core.judging.spec_key):
    # SPC series never mix readings judged against different windows.
    spec_key = models.CharField(max_length=64, blank=True)
    # Defectives out of n (shopfloor.core.units.DEFECTIVES_QUANTITIES): the items
    # inspected, n; `value` is the defectives found, k. Null for every other quantity.
    tested = models.PositiveIntegerField(null=True, blank=True)

    class Meta:
        ordering = ["lot_step", "quantity", "sample_index", "recorded_at"]
        indexes = [models.Index(fields=["quantity", "recorded_at"])]
        constraints = [
            models.UniqueConstraint(
                fields=["lot_step", "sample_key"],
                condition=~models.Q(sample_key=""),
                name="reading_sample_key_unique",
            )
        ]

    def __str__(self) -> str:
        return f"{self.quantity}={self.value:g} {self.unit}"

    def save(self, *args: Any, **kwargs: Any) -> None:
        # The window identity is derived data, stored so SPC series can filter on it; the
        # floor service sets it, this covers rows made any other way (admin, scripts).
        if not self.spec_key and self.window:
            self.spec_key = judging.spec_key(judging.criteria_of(self.window))
        super().save(*args, **kwargs)


class IdempotencyRecord(models.Model):
    """A state-changing request seen before: its fingerprint and the reply it got."""

    key = models.CharField(max_length=100)
    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.CASCADE)
    fingerprint = models.CharField(max_length=64)
    completed = models.BooleanField(default=False)
    status_code = models.PositiveSmallIntegerField(null=True, blank=True)
    body = models.JSONField(null=True, blank=True)
    created_at = models.DateTimeField(default=timezone.now)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["user", "key"], name="idempotency_unique")]

    def __str__(self) -> str:
        return f"{self.user_id}:{self.key}"


class InstrumentToken(models.Model):
    """A machine credential scoped to one work center; it may only post readings."""

    name = models.CharField(max_length=100)
    work_center = models.ForeignKey("plant.WorkCenter", on_delete=models.CASCADE)
    user = models.OneToOneField(settings.AUTH_USER_MODEL, on_delete=models.CASCADE)
    key_hash = models.CharField(max_length=64, unique=True)
    active = models.BooleanField(default=True)
    created_at = models.DateTimeField(default=timezone.now)

    def __str__(self) -> str:
        return f"{self.name} @ {self.work_center.code}"


class ShelfLife(models.Model):
    """A site's shelf life for a kind of material, counted from the day it was received.

    Prepreg and solder mask ink age in storage (resin advances, ink thickens); the
    supplier's datasheet and the site's storage conditions set the figure, so it is
    site data, edited in the admin. A material lot's own expiry date, when given, wins.
    """

    kind = models.CharField(max_length=20, unique=True)
    days = models.PositiveIntegerField()
    note = models.CharField(max_length=200, blank=True)

    class Meta:
        ordering = ["kind"]
        verbose_name_plural = "shelf lives"

    def __str__(self) -> str:
        return f"{self.kind}: {self.days} days"


class MaterialUse(models.Model):
    """A material lot consumed at a lot step: what a recall reads (material -> lots)."""

    lot_step = models.ForeignKey(LotStep, on_delete=models.PROTECT, related_name="material_uses")
    material_lot = models.ForeignKey(
        "plant.MaterialLot", on_delete=models.PROTECT, related_name="uses"
    )
    kind = models.CharField(max_length=20)
    recorded_by = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    recorded_at = models.DateTimeField(default=timezone.now)
    via = models.CharField(max_length=20, default="tablet")

    class Meta:
        ordering = ["lot_step", "recorded_at"]
        constraints = [
            models.UniqueConstraint(fields=["lot_step", "material_lot"], name="material_use_unique")
        ]

    def __str__(self) -> str:
        return f"{self.material_lot_id} at lot step {self.lot_step_id}"


class ScrapReason(models.Model):
    """Why boards or panels were scrapped: a list the site edits in the admin."""

    code = models.CharField(max_length=30, unique=True)
    name = models.CharField(max_length=120)
    active = models.BooleanField(default=True)

    class Meta:
        ordering = ["name"]

    def __str__(self) -> str:
        return self.name


class ScrapRecord(models.Model):
    """Boards or a whole panel scrapped at a lot step (by an operator or a disposition).

    ``boards`` is always the number of boards lost, so yields add up per step; a whole
    panel scrapped counts its remaining good boards and ``panel_scrapped`` is set.
    """

    class Source(models.TextChoices):
        OPERATOR = "operator", "Operator at the step"
        DISPOSITION = "disposition", "NCR disposition"
        INSPECTION = "inspection", "Final inspection"

    lot_step = models.ForeignKey(LotStep, on_delete=models.PROTECT, related_name="scrap_records")
    panel = models.ForeignKey(
        "plant.Panel", null=True, blank=True, on_delete=models.PROTECT, related_name="scrap"
    )
    job = models.ForeignKey(
        "plant.Job", null=True, blank=True, on_delete=models.PROTECT, related_name="scrap"
    )
    boards = models.PositiveIntegerField()
    panel_scrapped = models.BooleanField(default=False)
    reason = models.ForeignKey(ScrapReason, on_delete=models.PROTECT, related_name="records")
    note = models.CharField(max_length=300, blank=True)
    source = models.CharField(max_length=12, choices=Source.choices)
    ncr = models.ForeignKey(
        "quality.Nonconformance",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="scrap_records",
    )
    recorded_by = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    recorded_at = models.DateTimeField(default=timezone.now)

    class Meta:
        ordering = ["lot_step", "recorded_at"]

    def __str__(self) -> str:
        return f"{self.boards} board(s) at lot step {self.lot_step_id}"


class AcceptedQuantity(models.Model):
    """Boards of a job final inspection accepted from a lot (what may ship)."""

    lot_step = models.ForeignKey(LotStep, on_delete=models.PROTECT, related_name="acceptances")
    job = models.ForeignKey("plant.Job", on_delete=models.PROTECT, related_name="acceptances")
    boards = models.PositiveIntegerField()
    recorded_by = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    recorded_at = models.DateTimeField(default=timezone.now)

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["lot_step", "job"], name="accepted_quantity_unique")
        ]

    def __str__(self) -> str:
        return f"{self.boards} of job {self.job_id} at lot step {self.lot_step_id}"
