"""Tamper-evident records: the hash-chained audit trail and e-signatures.

Nothing here is ever updated or deleted by the application. Each audit entry's hash
covers its content and the previous entry's hash, so an edit or deletion in SQL breaks
the chain at that point (`manage.py audit verify` names the first broken entry).
A signature is bound to the signed record by a hash of that record's content.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.utils import timezone


class AuditHead(models.Model):
    """One row locked while appending, so concurrent writers chain in a single order."""

    id = models.PositiveSmallIntegerField(primary_key=True, default=1)
    last_seq = models.BigIntegerField(default=0)
    last_hash = models.CharField(max_length=64, default="0" * 64)

    def __str__(self) -> str:
        return f"audit head #{self.last_seq}"


class AuditEntry(models.Model):
    """An append-only record of one change: who, when, what, before and after."""

    seq = models.BigIntegerField(unique=True)
    at = models.DateTimeField(default=timezone.now)
    actor = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT
    )
    actor_name = models.CharField(max_length=150)
    action = models.CharField(max_length=60)
    object_type = models.CharField(max_length=60)
    object_id = models.CharField(max_length=60)
    before = models.JSONField(null=True, blank=True)
    after = models.JSONField(null=True, blank=True)
    prev_hash = models.CharField(max_length=64)
    hash = models.CharField(max_length=64, unique=True)

    class Meta:
        ordering = ["seq"]
        verbose_name_plural = "audit entries"
        indexes = [models.Index(fields=["object_type", "object_id"])]

    def __str__(self) -> str:
        return f"#{self.seq} {self.action} {self.object_type}:{self.object_id}"


class Signature(models.Model):
    """An e-signature: printed name, UTC time and meaning, bound to one record by hash."""

    class Meaning(models.TextChoices):
        PERFORMED = "performed_by", "Performed by"
        VERIFIED = "verified_by", "Verified by"
        RELEASED = "released_by", "Released by (routing)"
        APPROVED_DEVIATION = "deviation_approved_by", "Deviation approved by"
        DISPOSITIONED = "dispositioned_by", "Dispositioned by"
        QUEUE_RELEASE = "queue_time_released_by", "Queue-time warning released by"

    signer = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")
    printed_name = models.CharField(max_length=120)
    meaning = models.CharField(max_length=40, choices=Meaning.choices)
    signed_at = models.DateTimeField(default=timezone.now)
    record_type = models.CharField(max_length=60)
    record_id = models.CharField(max_length=60)
    record_hash = models.CharField(max_length=64)
    signature_hash = models.CharField(max_length=64, unique=True)

    class Meta:
        ordering = ["signed_at"]
        indexes = [models.Index(fields=["record_type", "record_id"])]

    def __str__(self) -> str:
        return (
            f"{self.get_meaning_display()} {self.printed_name} at {self.signed_at:%Y-%m-%d %H:%M}Z"
        )
