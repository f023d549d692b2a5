"""Audit entries and signatures are evidence: viewable in the admin, never changed there."""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.http import HttpRequest

from shopfloor.audit.models import AuditEntry, Signature


class ReadOnlyAdmin(admin.ModelAdmin):
    """No add, change or delete: the records are written by services only."""

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


@admin.register(AuditEntry)
class AuditEntryAdmin(ReadOnlyAdmin):
    list_display = ["seq", "at", "actor_name", "action", "object_type", "object_id"]
    list_filter = ["action", "object_type"]
    search_fields = ["actor_name", "action", "object_id", "hash"]
    date_hierarchy = "at"


@admin.register(Signature)
class SignatureAdmin(ReadOnlyAdmin):
    list_display = ["signed_at", "printed_name", "meaning", "record_type", "record_id"]
    list_filter = ["meaning", "record_type"]
    search_fields = ["printed_name", "record_id", "signature_hash"]
