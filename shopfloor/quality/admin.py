"""Quality records in the admin (read-only: dispositions go through the quality pages)."""

from __future__ import annotations

from django.contrib import admin

from shopfloor.audit.admin import ReadOnlyAdmin
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent, SeriesState


@admin.register(OutboxEvent)
class OutboxEventAdmin(ReadOnlyAdmin):
    list_display = ["id", "kind", "created_at", "published_at", "processed_at", "attempts"]
    list_filter = ["kind"]


@admin.register(Alert)
class AlertAdmin(ReadOnlyAdmin):
    list_display = ["created_at", "kind", "severity", "lot", "work_center", "closed_at"]
    list_filter = ["kind", "severity", "work_center"]
    search_fields = ["message", "lot__code"]


@admin.register(Nonconformance)
class NonconformanceAdmin(ReadOnlyAdmin):
    list_display = ["number", "lot", "status", "disposition", "opened_at", "dispositioned_at"]
    list_filter = ["status", "disposition"]
    search_fields = ["number", "lot__code", "description"]


@admin.register(Hold)
class HoldAdmin(ReadOnlyAdmin):
    list_display = ["lot", "opened_at", "released_at", "ncr"]
    list_filter = ["released_at"]
    search_fields = ["lot__code", "reason"]


@admin.register(SeriesState)
class SeriesStateAdmin(admin.ModelAdmin):
    list_display = [
        "key",
        "chart",
        "subgroup_size",
        "work_center",
        "equipment",
        "points",
        "limits_fixed",
    ]
    list_filter = ["work_center", "limits_fixed"]
    search_fields = ["key", "quantity"]


from shopfloor.quality.models import RootCause  # noqa: E402


@admin.register(RootCause)
class RootCauseAdmin(admin.ModelAdmin):
    """The site's root-cause list for NCRs; retire one by unticking active."""

    list_display = ["code", "name", "active"]
    list_filter = ["active"]
