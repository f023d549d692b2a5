"""Shipments and certificates in the admin: read-only (only the ship service makes them)."""

from __future__ import annotations

from django.contrib import admin

from shopfloor.audit.admin import ReadOnlyAdmin
from shopfloor.shipping.models import Certificate, Shipment


@admin.register(Shipment)
class ShipmentAdmin(ReadOnlyAdmin):
    list_display = ["number", "job", "quantity", "shipped_at", "shipped_by"]
    search_fields = ["number", "job__number"]


@admin.register(Certificate)
class CertificateAdmin(ReadOnlyAdmin):
    list_display = ["number", "shipment", "issued_at"]
    search_fields = ["number", "shipment__number"]
    exclude = ["pdf"]
