"""Planning settings in the admin: the site's scrap allowance and lot size, per-part values."""

from __future__ import annotations

from django.contrib import admin

from shopfloor.orders.models import PanelLayout, PartPlanning, PlanningSettings


@admin.register(PlanningSettings)
class PlanningSettingsAdmin(admin.ModelAdmin):
    list_display = ["__str__", "scrap_allowance_pct", "max_panels_per_lot", "job_number_prefix"]

    def has_add_permission(self, request):  # type: ignore[no-untyped-def]
        return False  # one row, made on first use: edit it, never add a second

    def has_delete_permission(self, request, obj=None):  # type: ignore[no-untyped-def]
        return False

    def changelist_view(self, request, extra_context=None):  # type: ignore[no-untyped-def]
        PlanningSettings.current()  # so the one row is always there to edit
        return super().changelist_view(request, extra_context)


@admin.register(PartPlanning)
class PartPlanningAdmin(admin.ModelAdmin):
    list_display = ["part", "scrap_allowance_pct", "boards_per_panel"]
    search_fields = ["part__number"]


@admin.register(PanelLayout)
class PanelLayoutAdmin(admin.ModelAdmin):
    list_display = ["job", "boards_per_panel", "scrap_allowance_pct", "released_at"]
    readonly_fields = [
        "job",
        "boards_per_panel",
        "scrap_allowance_pct",
        "shared_with",
        "released_at",
        "released_by",
    ]

    def has_add_permission(self, request):  # type: ignore[no-untyped-def]
        return False
