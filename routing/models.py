"""Routing revisions built from a part revision's build spec.

A revision starts as a draft, is released by a process engineer with an e-signature,
and never changes after that; a change makes a new revision with a reason and a diff.
Lots copy the released steps (windows included) when they start, so a lot always
runs on the snapshot it was started with.
"""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.db import models
from django.utils import timezone


class ReleasedRevisionError(Exception):
    """Raised when code tries to change a released routing revision."""


class ProcessLibraryVersion(models.Model):
    """A version of the process library (step definitions, work centers, default windows).

    Editing the library in the admin saves a new version; the newest active one is used
    for new routing builds. Old versions stay so every revision names the library it used.
    """

    version = models.PositiveIntegerField(unique=True)
    data = models.JSONField()
    note = models.CharField(max_length=200, blank=True)
    created_at = models.DateTimeField(default=timezone.now)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT
    )

    class Meta:
        ordering = ["-version"]

    def __str__(self) -> str:
        return f"process library v{self.version}"


class RoutingRevision(models.Model):
    """The routing of one part revision at one point in time (draft or released)."""

    class Status(models.TextChoices):
        DRAFT = "draft", "Draft"
        RELEASED = "released", "Released"

    part_revision = models.ForeignKey(
        "plant.PartRevision", on_delete=models.PROTECT, related_name="routing_revisions"
    )
    number = models.PositiveIntegerField()
    status = models.CharField(max_length=10, choices=Status.choices, default=Status.DRAFT)
    ipc_class = models.PositiveSmallIntegerField()
    build_spec = models.JSONField()
    overrides = models.JSONField(default=list, blank=True)
    library_version = models.ForeignKey(
        ProcessLibraryVersion, null=True, blank=True, on_delete=models.PROTECT
    )
    built = models.JSONField(help_text="The preview contract output this revision was built as")
    reason = models.CharField(max_length=300, blank=True)
    diff = models.TextField(blank=True)
    previous = models.ForeignKey(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="next_revisions"
    )
    created_at = models.DateTimeField(default=timezone.now)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="+",
    )
    released_at = models.DateTimeField(null=True, blank=True)
    release_signature = models.OneToOneField(
        "audit.Signature", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )

    class Meta:
        constraints = [
            models.UniqueConstraint(
                fields=["part_revision", "number"], name="routing_revision_unique"
            )
        ]
        ordering = ["part_revision", "-number"]

    def __str__(self) -> str:
        return f"{self.part_revision} routing r{self.number} ({self.status})"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk:
            stored = RoutingRevision.objects.filter(pk=self.pk).values("status").first()
            if stored and stored["status"] == self.Status.RELEASED:
                raise ReleasedRevisionError(
                    f"routing revision {self.pk} is released and cannot change; "
                    "make a new revision instead"
                )
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> Any:
        if self.is_released:
            raise ReleasedRevisionError("a released routing revision cannot be deleted")
        return super().delete(*args, **kwargs)

    @property
    def is_released(self) -> bool:
        return self.status == self.Status.RELEASED


class RoutingStep(models.Model):
    """One step of a routing revision at a work center."""

    revision = models.ForeignKey(RoutingRevision, on_delete=models.CASCADE, related_name="steps")
    seq = models.PositiveIntegerField()
    code = models.CharField(max_length=60)
    name = models.CharField(max_length=120)
    work_center = models.ForeignKey("plant.WorkCenter", on_delete=models.PROTECT)
    instructions = models.TextField(blank=True)
    parameters = models.JSONField(default=dict, blank=True)
    hazard = models.TextField(blank=True)
    queue_time_limit_minutes = models.PositiveIntegerField(null=True, blank=True)
    standard_minutes = models.PositiveIntegerField(default=30)
    cycle = models.PositiveSmallIntegerField(null=True, blank=True)
    measurements = models.JSONField(default=list, blank=True)

    class Meta:
        ordering = ["revision", "seq"]
        constraints = [
            models.UniqueConstraint(fields=["revision", "seq"], name="routing_step_seq_unique"),
            models.UniqueConstraint(fields=["revision", "code"], name="routing_step_code_unique"),
        ]

    def __str__(self) -> str:
        return f"{self.seq} {self.name}"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if RoutingRevision.objects.filter(
            pk=self.revision_id, status=RoutingRevision.Status.RELEASED
        ).exists():
            raise ReleasedRevisionError("steps of a released routing revision cannot change")
        super().save(*args, **kwargs)
