"""Tanks, their analysis plans, analyses, tank events and which tank a lot step used.

Why: every wet step runs in a bath whose chemistry drifts. To answer "which lots ran
through this bath while it was out of window" the service must know the tanks, what is
analysed in each and when, and which tank each wet lot step used. Values are stored in
the canonical unit of their measure (shopfloor.core.units.BATH_MEASURES); what the person typed
is kept beside it. Nothing here is edited after the fact: a wrong analysis is followed by
a new one, and additions are events with who confirmed them and when.
"""

from __future__ import annotations

from django.db import models
from django.utils import timezone


class ChemistryKind(models.TextChoices):
    ACID_COPPER = "acid_copper", "Acid copper plating"
    TIN = "tin", "Tin plating (etch resist)"
    ELECTROLESS_COPPER = "electroless_copper", "Electroless copper"
    CUPRIC_ETCH = "cupric_etch", "Cupric chloride etchant"
    AMMONIACAL_ETCH = "ammoniacal_etch", "Ammoniacal etchant"
    DEVELOPER = "developer", "Resist developer"
    STRIPPER = "stripper", "Resist stripper"
    MICROETCH = "microetch", "Microetch"
    ELECTROLESS_NICKEL = "electroless_nickel", "Electroless nickel (ENIG)"
    IMMERSION_GOLD = "immersion_gold", "Immersion gold (ENIG)"
    NICKEL_PLATING = "nickel_plating", "Nickel plating"
    GOLD_PLATING = "gold_plating", "Gold plating"
    OTHER = "other", "Other"


class Frequency(models.TextChoices):
    PER_SHIFT = "per_shift", "Every shift"
    DAILY = "daily", "Daily"
    AMP_HOURS = "amp_hours", "Every N amp-hours"


class Tank(models.Model):
    """A bath on a process line (work center): its working volume and chemistry."""

    work_center = models.ForeignKey(
        "plant.WorkCenter", on_delete=models.PROTECT, related_name="tanks"
    )
    code = models.CharField(max_length=40, unique=True)
    name = models.CharField(max_length=120)
    kind = models.CharField(max_length=30, choices=ChemistryKind.choices)
    volume_l = models.FloatField(help_text="Working volume (the bath's normal level), litres")
    max_volume_l = models.FloatField(
        null=True,
        blank=True,
        help_text="Highest safe level, litres: an addition that would pass it dumps first "
        "(blank = no limit)",
    )
    step_codes = models.JSONField(
        default=list,
        blank=True,
        help_text="Routing step codes that run in this tank (e.g. pattern_plate_copper)",
    )
    amp_hours = models.FloatField(
        null=True, blank=True, help_text="Rectifier amp-hour counter, last reading"
    )
    amp_hours_at = models.DateTimeField(null=True, blank=True)
    makeup_nickel_g_per_l = models.FloatField(
        null=True, blank=True, help_text="Electroless nickel only: nickel at make-up, g/L"
    )
    dump_at_turnovers = models.FloatField(
        null=True, blank=True, help_text="Electroless nickel only: dump at this many MTO"
    )
    made_up_at = models.DateTimeField(null=True, blank=True)
    created_at = models.DateTimeField(default=timezone.now)

    class Meta:
        ordering = ["work_center__code", "code"]

    def __str__(self) -> str:
        return f"{self.code} {self.name}"


class PlanParameter(models.Model):
    """One row of a tank's analysis plan: what is measured, its window, how often, how.

    `target`, `low` and `high` are in the measure's canonical unit; `unit` is the unit the
    lab reads and enters (shown by default). `source` says where the window comes from:
    a site value, or a default marked common practice (a supplier sheet's typical range).
    The last analysis is kept here as well so due dates and flags cost one query.
    """

    tank = models.ForeignKey(Tank, on_delete=models.CASCADE, related_name="parameters")
    code = models.SlugField(max_length=40)
    name = models.CharField(max_length=120)
    measure = models.CharField(max_length=30)
    unit = models.CharField(max_length=20)
    target = models.FloatField()
    low = models.FloatField()
    high = models.FloatField()
    source = models.CharField(max_length=300)
    frequency = models.CharField(max_length=12, choices=Frequency.choices)
    every_amp_hours = models.FloatField(null=True, blank=True)
    method = models.CharField(max_length=200)
    stock_strength = models.FloatField(
        null=True, blank=True, help_text="Replenisher strength, canonical unit"
    )
    stock_name = models.CharField(max_length=120, blank=True)
    dose_ml_per_kah = models.FloatField(null=True, blank=True)
    position = models.PositiveSmallIntegerField(default=0)
    last_analysis = models.ForeignKey(
        "Analysis", null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    last_taken_at = models.DateTimeField(null=True, blank=True)
    last_amp_hours = models.FloatField(null=True, blank=True)
    last_in_window = models.BooleanField(null=True, blank=True)

    class Meta:
        ordering = ["tank", "position", "code"]
        constraints = [
            models.UniqueConstraint(fields=["tank", "code"], name="plan_parameter_unique"),
            models.CheckConstraint(
                condition=models.Q(low__lte=models.F("target"))
                & models.Q(target__lte=models.F("high")),
                name="plan_parameter_window_order",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.tank.code} {self.name}"


class Analysis(models.Model):
    """One analysed value of one plan parameter, judged against the window of the time."""

    tank = models.ForeignKey(Tank, on_delete=models.PROTECT, related_name="analyses")
    parameter = models.ForeignKey(PlanParameter, on_delete=models.PROTECT, related_name="analyses")
    entered_value = models.CharField(max_length=40)
    entered_unit = models.CharField(max_length=20)
    value = models.FloatField(help_text="In the measure's canonical unit")
    window = models.JSONField(help_text="Window snapshot it was judged against, with source")
    in_window = models.BooleanField()
    taken_at = models.DateTimeField()
    recorded_at = models.DateTimeField(default=timezone.now)
    analyst = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    amp_hours = models.FloatField(null=True, blank=True)
    note = models.CharField(max_length=300, blank=True)
    via = models.CharField(max_length=10, default="page")

    class Meta:
        ordering = ["-taken_at", "-pk"]
        indexes = [models.Index(fields=["parameter", "taken_at"])]
        verbose_name_plural = "analyses"

    def __str__(self) -> str:
        return f"{self.parameter} = {self.value:g}"


class TankEvent(models.Model):
    """An addition, dose, dump or make-up. Additions carry the calculator's advice and
    the engineer who confirmed them (who and when)."""

    class Kind(models.TextChoices):
        ADDITION = "addition", "Addition"
        DOSE = "dose", "Amp-hour dose"
        DUMP = "dump", "Partial dump"
        MAKE_UP = "make_up", "Dump and make-up"
        COUNTER = "counter", "Amp-hour counter reading"

    tank = models.ForeignKey(Tank, on_delete=models.PROTECT, related_name="events")
    kind = models.CharField(max_length=12, choices=Kind.choices)
    parameter = models.ForeignKey(
        PlanParameter, null=True, blank=True, on_delete=models.PROTECT, related_name="events"
    )
    analysis = models.ForeignKey(
        Analysis, null=True, blank=True, on_delete=models.PROTECT, related_name="events"
    )
    add_l = models.FloatField(default=0)
    water_l = models.FloatField(default=0)
    dump_l = models.FloatField(default=0)
    add_g = models.FloatField(default=0)
    amp_hours = models.FloatField(null=True, blank=True)
    advice = models.JSONField(default=dict, blank=True)
    note = models.CharField(max_length=300, blank=True)
    entered_by = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    entered_at = models.DateTimeField(default=timezone.now)
    confirmed_by = models.ForeignKey(
        "plant.Person", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    confirmed_at = models.DateTimeField(null=True, blank=True)

    class Meta:
        ordering = ["-entered_at", "-pk"]

    def __str__(self) -> str:
        return f"{self.tank.code} {self.get_kind_display()}"

    @property
    def confirmed(self) -> bool:
        return self.confirmed_at is not None


class TankUse(models.Model):
    """A wet lot step ran in this tank (recorded when the step starts)."""

    lot_step = models.ForeignKey(
        "floor.LotStep", on_delete=models.PROTECT, related_name="tank_uses"
    )
    tank = models.ForeignKey(Tank, on_delete=models.PROTECT, related_name="uses")
    used_at = models.DateTimeField()

    class Meta:
        ordering = ["used_at", "pk"]
        constraints = [models.UniqueConstraint(fields=["lot_step", "tank"], name="tank_use_unique")]
        indexes = [models.Index(fields=["tank", "used_at"])]

    def __str__(self) -> str:
        return f"{self.lot_step_id} in {self.tank.code}"


class PlatingSetup(models.Model):
    """The amps and minutes computed for one plating lot step (Faraday's law)."""

    class AreaSource(models.TextChoices):
        DESIGN = "design", "From the job's design data"
        ENTERED = "entered", "Entered"

    lot_step = models.OneToOneField(
        "floor.LotStep", on_delete=models.PROTECT, related_name="plating_setup"
    )
    metal = models.CharField(max_length=12)
    area_dm2 = models.FloatField(help_text="Plated area per panel, both sides, dm²")
    area_source = models.CharField(max_length=10, choices=AreaSource.choices)
    current_density_asd = models.FloatField()
    efficiency = models.FloatField()
    target_um = models.FloatField()
    current_a = models.FloatField()
    minutes = models.FloatField()
    computed_by = models.ForeignKey(
        "plant.Person", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    computed_at = models.DateTimeField(default=timezone.now)

    def __str__(self) -> str:
        return f"{self.lot_step_id}: {self.current_a:.1f} A for {self.minutes:.0f} min"


class PlatedArea(models.Model):
    """A part revision's plated area per panel, from its design data (or entered once)."""

    part_revision = models.OneToOneField(
        "plant.PartRevision", on_delete=models.CASCADE, related_name="plated_area"
    )
    area_dm2 = models.FloatField(help_text="Copper area exposed to plating per panel, dm²")
    source = models.CharField(max_length=200)
    recorded_at = models.DateTimeField(default=timezone.now)

    def __str__(self) -> str:
        return f"{self.part_revision}: {self.area_dm2:g} dm²"
