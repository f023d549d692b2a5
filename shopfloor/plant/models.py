"""Plant master data: who the shop builds for, what it builds, where and with what.

Jobs (work orders) are imaged onto production panels; panels run together as lots; a
lot follows exactly one released routing revision. People are Django users with a
badge number and a separately hashed PIN used as the second signing component.
"""

from __future__ import annotations

import datetime
from typing import Any

from django.conf import settings
from django.contrib.auth.hashers import check_password, make_password
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.db.models.functions import Upper
from django.utils import timezone
from django.utils.translation import gettext_lazy as _

from routing.builder.spec import SpecInvalid, normalise_spec


class Role(models.TextChoices):
    """Roles are Django groups with these names."""

    OPERATOR = "operator", "Operator"
    SUPERVISOR = "supervisor", "Supervisor"
    PROCESS_ENGINEER = "process_engineer", "Process engineer"
    QUALITY_ENGINEER = "quality_engineer", "Quality engineer"
    PLANNER = "planner", "Planner"
    LAB_TECHNICIAN = "lab_technician", "Lab technician"
    ADMIN = "admin", "Administrator"


class IpcClass(models.IntegerChoices):
    CLASS_1 = 1, "IPC class 1 (general electronic products)"
    CLASS_2 = 2, "IPC class 2 (dedicated service electronic products)"
    CLASS_3 = 3, "IPC class 3 (high reliability electronic products)"


class Customer(models.Model):
    """A customer the shop builds boards for."""

    code = models.CharField(max_length=20, unique=True)
    name = models.CharField(max_length=200)

    class Meta:
        ordering = ["code"]

    def __str__(self) -> str:
        return f"{self.code} {self.name}"


class Part(models.Model):
    """A customer's part number."""

    customer = models.ForeignKey(Customer, on_delete=models.PROTECT, related_name="parts")
    number = models.CharField(max_length=60)
    description = models.CharField(max_length=200, blank=True)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["customer", "number"], name="part_unique")]
        ordering = ["number"]

    def __str__(self) -> str:
        return self.number


class PartRevision(models.Model):
    """One revision of a part with its validated build spec (stack-up, finish, profile)."""

    part = models.ForeignKey(Part, on_delete=models.PROTECT, related_name="revisions")
    revision = models.CharField(max_length=10)
    build_spec = models.JSONField(help_text="Validated build spec; see README 'Build spec'")
    created_at = models.DateTimeField(default=timezone.now)

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["part", "revision"], name="part_revision_unique")
        ]

    def __str__(self) -> str:
        return f"{self.part.number} rev {self.revision}"

    def save(self, *args: Any, **kwargs: Any) -> None:
        """Every save stores the spec in its validated, stored form; an invalid spec is
        refused here too (SpecInvalid), so no path can store one."""

        if self.build_spec:
            self.build_spec = normalise_spec(self.build_spec)
        super().save(*args, **kwargs)

    @property
    def has_spec(self) -> bool:
        """A part revision entered with a job starts with {}: no spec authored yet."""
        return bool(self.build_spec)

    def clean(self) -> None:
        """The admin's check: the same validator as the form, the API and the command."""

        super().clean()
        if not self.build_spec:
            return
        try:
            self.build_spec = normalise_spec(self.build_spec)
        except SpecInvalid as exc:
            raise ValidationError(
                {
                    "build_spec": [
                        f"{e.field}: {e.problem} (given {e.value!r}"
                        + (f"; allowed: {e.allowed}" if e.allowed else "")
                        + ")"
                        for e in exc.errors
                    ]
                }
            ) from exc


class WorkCenter(models.Model):
    """A place on the floor where steps are done (an etch line, a drill room, e-test)."""

    code = models.CharField(max_length=40, unique=True)
    name = models.CharField(max_length=120)
    notify_emails = models.TextField(
        blank=True, help_text="Comma-separated addresses told about alerts at this work center"
    )

    class Meta:
        ordering = ["code"]

    def __str__(self) -> str:
        return self.name

    def notification_list(self) -> list[str]:
        return [a.strip() for a in self.notify_emails.split(",") if a.strip()]


class Equipment(models.Model):
    """A machine or gauge at a work center; a gauge past calibration may not take readings."""

    work_center = models.ForeignKey(WorkCenter, on_delete=models.PROTECT, related_name="equipment")
    code = models.CharField(max_length=40, unique=True)
    name = models.CharField(max_length=120)
    is_gauge = models.BooleanField(default=False)
    calibration_due = models.DateField(null=True, blank=True)

    class Meta:
        ordering = ["code"]
        verbose_name_plural = "equipment"

    def __str__(self) -> str:
        return f"{self.code} {self.name}"

    def calibration_current(self, on: datetime.datetime | None = None) -> bool:
        if self.calibration_due is None:
            return not self.is_gauge
        today = timezone.localdate(on) if on else timezone.localdate()
        return self.calibration_due >= today


class MaterialLot(models.Model):
    """A received lot of laminate, prepreg, foil, mask ink, chemistry... (for recall)."""

    class Kind(models.TextChoices):
        LAMINATE = "laminate", _("Laminate (core)")
        PREPREG = "prepreg", _("Prepreg")
        FOIL = "foil", _("Copper foil")
        MASK_INK = "mask_ink", _("Solder mask ink")
        LEGEND_INK = "legend_ink", _("Legend ink")
        DRY_FILM = "dry_film", _("Dry film resist")
        CHEMISTRY = "chemistry", _("Process chemistry")
        OTHER = "other", _("Other")

    code = models.CharField(max_length=60, unique=True)
    kind = models.CharField(max_length=20, choices=Kind.choices)
    description = models.CharField(max_length=200)
    supplier_lot = models.CharField(max_length=60, blank=True)
    received_on = models.DateField(null=True, blank=True)
    expires_on = models.DateField(null=True, blank=True)

    class Meta:
        ordering = ["code"]

    def __str__(self) -> str:
        return f"{self.code} ({self.get_kind_display()})"


class Person(models.Model):
    """A user's shop-floor identity: badge number and a PIN hashed apart from the password."""

    user = models.OneToOneField(
        settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="person"
    )
    badge_number = models.CharField(max_length=20, unique=True)
    printed_name = models.CharField(max_length=120)
    pin_hash = models.CharField(max_length=256)
    pin_failures = models.PositiveSmallIntegerField(default=0)
    locked_at = models.DateTimeField(null=True, blank=True)
    work_centers = models.ManyToManyField(WorkCenter, blank=True, related_name="people")
    language = models.CharField(
        max_length=10,
        blank=True,
        default="",
        choices=settings.LANGUAGES,
        help_text="Language of the tablet pages and the traveller for this person "
        "(empty: the site's language). The person can change it on the tablet.",
    )
    # {quantity: {"unit": "mil", "equipment": 12}}: the unit and gauge this person last
    # recorded each quantity with, offered first on the next sample (floor.views).
    entry_defaults = models.JSONField(default=dict, blank=True, editable=False)
    theme = models.CharField(
        max_length=12,
        blank=True,
        default="",
        choices=[
            ("", "as the device is set"),
            ("standard", "standard"),
            ("contrast", "high contrast"),
        ],
        help_text="Screen colours for this person; blank follows the device's own setting",
    )

    class Meta:
        ordering = ["badge_number"]
        verbose_name_plural = "people"

    def __str__(self) -> str:
        return f"{self.printed_name} ({self.badge_number})"

    def set_pin(self, pin: str) -> None:
        self.pin_hash = make_password(pin, hasher="pin_pbkdf2_sha256")

    def pin_matches(self, pin: str) -> bool:
        return bool(self.pin_hash) and check_password(pin, self.pin_hash)

    @property
    def is_locked(self) -> bool:
        return self.locked_at is not None

    def roles(self) -> set[str]:
        """Role names; a superuser counts as admin (the one rule, shopfloor.access)."""
        # import here: shopfloor.access imports this module (its scopes query Person)
        from shopfloor.access import roles_of

        return set(roles_of(self.user))


class Qualification(models.Model):
    """A person may sign steps at a work center until the qualification expires."""

    person = models.ForeignKey(Person, on_delete=models.CASCADE, related_name="qualifications")
    work_center = models.ForeignKey(WorkCenter, on_delete=models.CASCADE)
    valid_until = models.DateField()

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["person", "work_center"], name="qualification_unique")
        ]

    def __str__(self) -> str:
        return f"{self.person} @ {self.work_center} until {self.valid_until}"


class Job(models.Model):
    """A work order: a quantity of one part revision due on a date, at an IPC class."""

    number = models.CharField(max_length=30, unique=True)
    part_revision = models.ForeignKey(PartRevision, on_delete=models.PROTECT, related_name="jobs")
    quantity = models.PositiveIntegerField()
    due_date = models.DateField()
    ipc_class = models.PositiveSmallIntegerField(choices=IpcClass.choices)
    customer_spec_notes = models.TextField(blank=True)
    customer_overrides = models.JSONField(
        default=list, blank=True, help_text="Customer window overrides (see README)"
    )
    routing_revision = models.ForeignKey(
        "routing.RoutingRevision",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="jobs",
    )
    created_at = models.DateTimeField(default=timezone.now)

    class Meta:
        ordering = ["due_date", "number"]

    def __str__(self) -> str:
        return self.number

    @property
    def customer(self) -> Customer:
        return self.part_revision.part.customer


class LotQuerySet(models.QuerySet["Lot"]):
    def with_code(self, code: str) -> LotQuerySet:
        """The lot with this traveller code. Codes match case-insensitively (a scanner or
        a keyboard may send either case), here and nowhere else; surrounding spaces are
        ignored. The index plant_lot_code_upper serves this look-up."""
        return self.filter(code__iexact=(code or "").strip())

    def with_codes(self, codes: list[str]) -> LotQuerySet:
        """The lots with any of these traveller codes, matched as `with_code` matches."""
        wanted = sorted({(c or "").strip().upper() for c in codes})
        return self.alias(code_upper=Upper("code")).filter(code_upper__in=wanted)

    def active(self) -> LotQuerySet:
        """Lots still on the floor: not started or in process."""
        return self.filter(status__in=Lot.ACTIVE_STATUSES)


class Lot(models.Model):
    """Panels run together through one routing revision; carries the traveller code."""

    class Status(models.TextChoices):
        NOT_STARTED = "not_started", _("Not started")
        IN_PROCESS = "in_process", _("In process")
        COMPLETE = "complete", _("Complete")
        SCRAPPED = "scrapped", _("Scrapped")

    code = models.CharField(max_length=30, unique=True, help_text="Traveller code (scanned)")
    routing_revision = models.ForeignKey(
        "routing.RoutingRevision", on_delete=models.PROTECT, related_name="lots"
    )
    status = models.CharField(max_length=20, choices=Status.choices, default=Status.NOT_STARTED)
    on_hold = models.BooleanField(default=False)
    priority = models.IntegerField(default=100, help_text="Lower runs first in a queue")
    split_from = models.ForeignKey(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="splits"
    )
    panel_count = models.PositiveIntegerField(default=0)
    created_at = models.DateTimeField(default=timezone.now)
    started_at = models.DateTimeField(null=True, blank=True)
    completed_at = models.DateTimeField(null=True, blank=True)

    objects = LotQuerySet.as_manager()

    # A lot still on the floor (the board, forecasts and due-date checks read these).
    ACTIVE_STATUSES = (Status.NOT_STARTED, Status.IN_PROCESS)

    class Meta:
        ordering = ["priority", "created_at"]
        # Scans are matched case-insensitively (code__iexact); without this index every
        # scan would read the whole lot table, which only grows.
        indexes = [models.Index(Upper("code"), name="plant_lot_code_upper")]

    def __str__(self) -> str:
        return self.code


class Panel(models.Model):
    """A production panel; it may carry images of several jobs that share a build spec."""

    serial = models.CharField(max_length=40, unique=True)
    lot = models.ForeignKey(Lot, on_delete=models.PROTECT, related_name="panels")
    jobs = models.ManyToManyField(Job, through="PanelImage", related_name="panels")
    scrapped = models.BooleanField(default=False)

    class Meta:
        ordering = ["serial"]

    def __str__(self) -> str:
        return self.serial


class PanelImage(models.Model):
    """How many images (boards) of a job one panel carries."""

    panel = models.ForeignKey(Panel, on_delete=models.CASCADE, related_name="images")
    job = models.ForeignKey(Job, on_delete=models.PROTECT, related_name="images")
    count = models.PositiveSmallIntegerField(default=1)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["panel", "job"], name="panel_image_unique")]

    def __str__(self) -> str:
        return f"{self.panel_id}: {self.count} x job {self.job_id}"


class LoginThrottle(models.Model):
    """Failed sign-ins counted per key ("ip:<address>", "badge:<number>",
    "admin:<username>") over a window, in the database so every gunicorn process sees the
    same count (shopfloor.throttle). A key over its limit is refused until blocked_until."""

    key = models.CharField(max_length=200, unique=True)
    failures = models.PositiveIntegerField(default=0)
    window_started_at = models.DateTimeField()
    blocked_until = models.DateTimeField(null=True, blank=True)

    def __str__(self) -> str:
        return f"{self.key}: {self.failures}"


class SiteSettings(models.Model):
    """How the site shows and prints things (one row; the admin edits it).

    The date format is used by every page and the traveller (shopfloor/core/dates.py);
    the paper size is the traveller's default; the wall board's page length and lots per
    work center size the wall screen (a URL parameter may override them per screen)."""

    class Paper(models.TextChoices):
        A4 = "a4", "A4 (210 × 297 mm)"
        LETTER = "letter", "US Letter (8.5 × 11 in)"

    class DateStyle(models.TextChoices):
        ISO = "iso", "YYYY-MM-DD (ISO 8601)"
        DMY_SLASH = "dmy_slash", "DD/MM/YYYY"
        MDY_SLASH = "mdy_slash", "MM/DD/YYYY"
        DMY_DOT = "dmy_dot", "DD.MM.YYYY"

    paper_size = models.CharField(
        max_length=10,
        choices=Paper.choices,
        default=Paper.A4,
        help_text="The traveller prints on this paper unless the print link asks for another",
    )
    date_format = models.CharField(
        max_length=12,
        choices=DateStyle.choices,
        default=DateStyle.ISO,
        help_text="How every page, filter and traveller writes a date",
    )
    wall_page_seconds = models.PositiveSmallIntegerField(
        default=20,
        validators=[MinValueValidator(5), MaxValueValidator(600)],
        help_text="The wall board shows each page this long when the floor does not fit "
        "one screen (5-600 s)",
    )
    wall_lots_per_center = models.PositiveSmallIntegerField(
        default=6,
        validators=[MinValueValidator(1), MaxValueValidator(40)],
        help_text="Lots the wall board lists per work center; the rest show as '+N more'",
    )

    class Meta:
        verbose_name = "site settings"
        verbose_name_plural = "site settings"

    def __str__(self) -> str:
        return f"dates {self.get_date_format_display()}, traveller on {self.paper_size.upper()}"

    @classmethod
    def current(cls) -> SiteSettings:
        row = cls.objects.filter(pk=1).first()
        if row is None:
            row, _ = cls.objects.get_or_create(pk=1)
        return row
