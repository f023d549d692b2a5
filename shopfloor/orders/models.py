"""Planning data around a job: the site's release settings, a part's scrap allowance,
and the panel layout each job was released with.

The job itself, its panels and lots live in the plant app; these models hold only what
a planner decides when entering and releasing work, so the floor's tables stay as they
were.
"""

from __future__ import annotations

from decimal import Decimal

from django.conf import settings
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.utils import timezone

#: Shop practice defaults (from memory; a site edits them in the admin):
#: 8 % scrap allowance is a middle value for a multilayer fab's planned over-start,
#: and 12 panels per lot is what one plating rack or press load commonly takes.
DEFAULT_SCRAP_ALLOWANCE_PCT = Decimal("8")
DEFAULT_MAX_PANELS_PER_LOT = 12


class PlanningSettings(models.Model):
    """The site's release settings (one row; the admin edits it)."""

    scrap_allowance_pct = models.DecimalField(
        max_digits=5,
        decimal_places=2,
        default=DEFAULT_SCRAP_ALLOWANCE_PCT,
        validators=[MinValueValidator(0), MaxValueValidator(100)],
        help_text="Extra boards started over the order, in per cent, unless the part sets "
        "its own (shop practice; 8 % by default)",
    )
    max_panels_per_lot = models.PositiveSmallIntegerField(
        default=DEFAULT_MAX_PANELS_PER_LOT,
        validators=[MinValueValidator(1), MaxValueValidator(200)],
        help_text="Most panels that travel together as one lot (plating rack, press load)",
    )
    job_number_prefix = models.CharField(
        max_length=8, default="WO-", help_text="Prefix of job numbers the product assigns"
    )

    class Meta:
        verbose_name = "planning settings"
        verbose_name_plural = "planning settings"

    def __str__(self) -> str:
        return (
            f"scrap allowance {self.scrap_allowance_pct} %, "
            f"at most {self.max_panels_per_lot} panels per lot"
        )

    @classmethod
    def current(cls) -> PlanningSettings:
        row, _ = cls.objects.get_or_create(pk=1)
        return row


class PartPlanning(models.Model):
    """Per-part planning values that override the site's (a hard part scraps more)."""

    part = models.OneToOneField("plant.Part", on_delete=models.CASCADE, related_name="planning")
    scrap_allowance_pct = models.DecimalField(
        max_digits=5,
        decimal_places=2,
        null=True,
        blank=True,
        validators=[MinValueValidator(0), MaxValueValidator(100)],
        help_text="Blank = the site's allowance",
    )
    boards_per_panel = models.PositiveSmallIntegerField(
        null=True, blank=True, help_text="The usual layout, offered when releasing a job"
    )

    class Meta:
        verbose_name = "part planning"
        verbose_name_plural = "part planning"

    def __str__(self) -> str:
        return f"planning for {self.part}"


class PanelLayout(models.Model):
    """How a job was laid out on its production panels when it was released."""

    job = models.OneToOneField("plant.Job", on_delete=models.CASCADE, related_name="layout")
    boards_per_panel = models.PositiveSmallIntegerField()
    scrap_allowance_pct = models.DecimalField(max_digits=5, decimal_places=2)
    shared_with = models.ManyToManyField("plant.Job", blank=True, related_name="+")
    released_at = models.DateTimeField(default=timezone.now)
    released_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )

    def __str__(self) -> str:
        return f"{self.job}: {self.boards_per_panel} per panel"
