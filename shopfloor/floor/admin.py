"""Floor records in the admin: steps and readings are viewable, never edited there."""

from __future__ import annotations

from django.contrib import admin

from shopfloor.audit.admin import ReadOnlyAdmin
from shopfloor.floor.models import IdempotencyRecord, InstrumentToken, LotStep, Reading


@admin.register(LotStep)
class LotStepAdmin(ReadOnlyAdmin):
    list_display = [
        "lot",
        "position",
        "code",
        "work_center",
        "status",
        "started_at",
        "completed_at",
    ]
    list_filter = ["status", "work_center", "is_rework"]
    search_fields = ["lot__code", "code", "name"]


@admin.register(Reading)
class ReadingAdmin(ReadOnlyAdmin):
    list_display = [
        "lot_step",
        "quantity",
        "value",
        "unit",
        "sample_index",
        "in_window",
        "operator",
        "captured_at",
        "superseded_by",
        "via",
    ]
    list_filter = ["in_window", "quantity", "via"]
    search_fields = ["lot_step__lot__code", "quantity", "operator__printed_name"]
    date_hierarchy = "recorded_at"


@admin.register(IdempotencyRecord)
class IdempotencyRecordAdmin(ReadOnlyAdmin):
    list_display = ["key", "user", "status_code", "created_at"]
    search_fields = ["key", "user__username"]


@admin.register(InstrumentToken)
class InstrumentTokenAdmin(admin.ModelAdmin):
    """Issue tokens with `manage.py issue_instrument_token`; here they can be withdrawn."""

    list_display = ["name", "work_center", "active", "created_at"]
    list_filter = ["active", "work_center"]
    search_fields = ["name"]
    fields = ["name", "work_center", "active", "created_at"]
    readonly_fields = ["name", "work_center", "created_at"]

    def has_add_permission(self, request, obj=None) -> bool:  # type: ignore[no-untyped-def]
        return False
