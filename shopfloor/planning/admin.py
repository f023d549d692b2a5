"""Admin: capacities and calendars are edited here; forecast runs are read-only."""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.http import HttpRequest

from shopfloor.planning.models import ForecastRun, Holiday, WorkCenterCapacity


@admin.register(WorkCenterCapacity)
class WorkCenterCapacityAdmin(admin.ModelAdmin):
    list_display = ("work_center", "units", "batch_size", "shifts", "working_days")
    list_editable = ("units", "batch_size", "shifts")
    fields = (
        "work_center",
        "units",
        "batch_size",
        "shifts",
        ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday"),
    )

    @admin.display(description="working days")
    def working_days(self, obj: WorkCenterCapacity) -> str:
        names = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
        return " ".join(names[d] for d in obj.weekdays)


@admin.register(Holiday)
class HolidayAdmin(admin.ModelAdmin):
    list_display = ("date", "name", "work_center")
    list_filter = ("work_center",)


@admin.register(ForecastRun)
class ForecastRunAdmin(admin.ModelAdmin):
    list_display = (
        "pk",
        "started_at",
        "status",
        "trigger",
        "lot_count",
        "job_count",
        "replications",
        "seconds",
    )
    list_filter = ("status", "trigger")
    readonly_fields = [f.name for f in ForecastRun._meta.fields]

    def has_add_permission(self, request: HttpRequest) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False
