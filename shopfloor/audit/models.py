"""Tamper-evident records: the hash-chained audit trail and e-signatures.

A writer appends an entry with one INSERT and takes no shared lock: the entry carries
its content as canonical JSON text (`body`, the exact bytes that are hashed). A single
sealing task (`shopfloor.audit.services.seal`) later gives the entries their place in
one chain (`seq`, `prev_hash`, `hash`, written once) and closes each sealing pass with a
checkpoint: an RFC 6962 Merkle root of the pass's entry hashes, itself chained to the
checkpoint before it. An edit, deletion or reordering in SQL breaks the chain at that
point and `manage.py audit verify` names every broken entry. A signature is bound to the
signed record by a hash of that record's content.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q
from django.utils import timezone
from django.utils.translation import gettext_lazy as _


class AuditHead(models.Model):
    """The sealed end of the chain. Only the sealing task locks it, never a writer."""

    id = models.PositiveSmallIntegerField(primary_key=True, default=1)
    last_seq = models.BigIntegerField(default=0)
    last_hash = models.CharField(max_length=64, default="0" * 64)

    def __str__(self) -> str:
        return f"audit head #{self.last_seq}"


class AuditEntry(models.Model):
    """An append-only record of one change: who, when, what, before and after.

    `body` is the canonical JSON text of the content (everything but the chain fields);
    the columns beside it are copies for searching and must agree with it. `seq`,
    `prev_hash` and `hash` stay empty until the sealing task chains the entry.
    """

    seq = models.BigIntegerField(unique=True, null=True, blank=True)
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
    body = models.TextField(default="")
    # NULL until sealed: an empty string would collide in the unique index.
    prev_hash = models.CharField(max_length=64, null=True, blank=True)  # noqa: DJ001
    hash = models.CharField(max_length=64, unique=True, null=True, blank=True)

    class Meta:
        ordering = ["seq"]
        verbose_name_plural = "audit entries"
        indexes = [
            models.Index(fields=["object_type", "object_id"]),
            # The sealing task's work list: small, since entries leave it within seconds.
            models.Index(fields=["id"], name="audit_entry_unsealed", condition=Q(seq=None)),
        ]

    def __str__(self) -> str:
        number = f"#{self.seq}" if self.seq is not None else f"(unsealed id {self.pk})"
        return f"{number} {self.action} {self.object_type}:{self.object_id}"


class AuditCheckpoint(models.Model):
    """One sealing pass: the Merkle root (RFC 6962) of entries first_seq..last_seq.

    `hash` chains the checkpoints (sha256 of the previous checkpoint's hash and this
    checkpoint's fields), so rewriting one breaks the link of the next. Publishing the
    latest checkpoint hash outside the database (the sealing task logs it) lets anyone
    detect a wholesale rewrite of the trail later.
    """

    number = models.BigIntegerField(unique=True)
    made_at = models.DateTimeField(default=timezone.now)
    first_seq = models.BigIntegerField()
    last_seq = models.BigIntegerField()
    last_entry_hash = models.CharField(max_length=64)
    merkle_root = models.CharField(max_length=64)
    prev_hash = models.CharField(max_length=64)
    hash = models.CharField(max_length=64, unique=True)

    class Meta:
        ordering = ["number"]

    def __str__(self) -> str:
        return f"checkpoint {self.number}: entries #{self.first_seq}-#{self.last_seq}"


class Signature(models.Model):
    """An e-signature: printed name, UTC time and meaning, bound to one record by hash."""

    class Meaning(models.TextChoices):
        PERFORMED = "performed_by", _("Performed by")
        VERIFIED = "verified_by", _("Verified by")
        RELEASED = "released_by", _("Released by (routing)")
        APPROVED_DEVIATION = "deviation_approved_by", _("Deviation approved by")
        DISPOSITIONED = "dispositioned_by", _("Dispositioned by")
        QUEUE_RELEASE = "queue_time_released_by", _("Queue-time warning released by")

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
