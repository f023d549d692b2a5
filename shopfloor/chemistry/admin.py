"""Admin: tanks with their analysis plans (the plan is set up here by an administrator)."""

from django.contrib import admin

from shopfloor.chemistry.models import Analysis, PlanParameter, PlatedArea, Tank, TankEvent


class PlanParameterInline(admin.TabularInline):
    model = PlanParameter
    extra = 0
    fields = (
        "position", "code", "name", "measure", "unit", "low", "target", "high", "source",
        "frequency", "every_amp_hours", "method", "stock_strength", "stock_name",
        "dose_ml_per_kah",
    )  # fmt: skip


@admin.register(Tank)
class TankAdmin(admin.ModelAdmin):
    list_display = ("code", "name", "work_center", "kind", "volume_l")
    list_filter = ("work_center", "kind")
    inlines = [PlanParameterInline]


@admin.register(Analysis)
class AnalysisAdmin(admin.ModelAdmin):
    list_display = ("tank", "parameter", "value", "in_window", "taken_at", "analyst")
    list_filter = ("tank", "in_window")

    def has_change_permission(self, request, obj=None):  # type: ignore[no-untyped-def]
        return False  # analyses are never edited; a new one follows a wrong one


@admin.register(TankEvent)
class TankEventAdmin(admin.ModelAdmin):
    list_display = ("tank", "kind", "parameter", "add_l", "entered_by", "confirmed_by")

    def has_change_permission(self, request, obj=None):  # type: ignore[no-untyped-def]
        return False


admin.site.register(PlatedArea)
