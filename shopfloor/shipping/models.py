"""Shipments of a job's boards and the certificate of conformance issued with each.

A shipment is refused (nothing saved) unless the certificate's conditions hold, so every
shipment row has exactly one certificate; the certificate's PDF is stored as issued and
never regenerated, so what the customer received can always be shown again.
"""

from __future__ import annotations

from django.db import models
from django.utils import timezone


class Shipment(models.Model):
    """N boards of one job sent to the customer from one or more completed lots."""

    number = models.CharField(max_length=20, unique=True)
    job = models.ForeignKey("plant.Job", on_delete=models.PROTECT, related_name="shipments")
    quantity = models.PositiveIntegerField()
    shipped_at = models.DateTimeField(default=timezone.now)
    shipped_by = models.ForeignKey("plant.Person", on_delete=models.PROTECT, related_name="+")

    class Meta:
        ordering = ["-shipped_at"]

    def __str__(self) -> str:
        return self.number


class ShipmentLot(models.Model):
    """How many of a shipment's boards came from one lot."""

    shipment = models.ForeignKey(Shipment, on_delete=models.CASCADE, related_name="lots")
    lot = models.ForeignKey("plant.Lot", on_delete=models.PROTECT, related_name="shipped")
    boards = models.PositiveIntegerField()

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["shipment", "lot"], name="shipment_lot_unique")
        ]

    def __str__(self) -> str:
        return f"{self.boards} from lot {self.lot_id}"


class Certificate(models.Model):
    """The certificate of conformance of one shipment, as issued (PDF and its content)."""

    number = models.CharField(max_length=20, unique=True)
    shipment = models.OneToOneField(Shipment, on_delete=models.PROTECT, related_name="certificate")
    content = models.JSONField(help_text="What the certificate states, in customer wording")
    pdf = models.BinaryField()
    issued_at = models.DateTimeField(default=timezone.now)
    quality_signature = models.ForeignKey(
        "audit.Signature",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="+",
        help_text="The final inspection sign-off the certificate quotes",
    )

    class Meta:
        ordering = ["-issued_at"]

    def __str__(self) -> str:
        return self.number
