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


# --- site lists (edited here) and the records the floor services write ----------------

from shopfloor.floor.models import (  # noqa: E402
    AcceptedQuantity,
    MaterialUse,
    ScrapReason,
    ScrapRecord,
    ShelfLife,
)


@admin.register(ShelfLife)
class ShelfLifeAdmin(admin.ModelAdmin):
    """Site shelf lives per material kind (days from receipt); the datasheet governs."""

    list_display = ["kind", "days", "note"]


@admin.register(ScrapReason)
class ScrapReasonAdmin(admin.ModelAdmin):
    """The site's scrap reasons; retire one by unticking active (records keep it)."""

    list_display = ["code", "name", "active"]
    list_filter = ["active"]


@admin.register(MaterialUse)
class MaterialUseAdmin(ReadOnlyAdmin):
    list_display = ["lot_step", "material_lot", "kind", "recorded_by", "recorded_at"]
    search_fields = ["material_lot__code", "lot_step__lot__code"]


@admin.register(ScrapRecord)
class ScrapRecordAdmin(ReadOnlyAdmin):
    list_display = ["lot_step", "panel", "boards", "panel_scrapped", "reason", "source"]
    list_filter = ["source", "reason"]


@admin.register(AcceptedQuantity)
class AcceptedQuantityAdmin(ReadOnlyAdmin):
    list_display = ["lot_step", "job", "boards", "recorded_by", "recorded_at"]
