"""Plant master data in the admin: customers, parts, work centers, people, jobs, lots."""

from __future__ import annotations

from django.contrib import admin

from shopfloor.plant.models import (
    Customer,
    Equipment,
    Job,
    Lot,
    MaterialLot,
    Part,
    PartRevision,
    Person,
    Qualification,
    SiteSettings,
    WorkCenter,
)


@admin.register(Customer)
class CustomerAdmin(admin.ModelAdmin):
    list_display = ["code", "name"]
    search_fields = ["code", "name"]


class PartRevisionInline(admin.TabularInline):
    model = PartRevision
    extra = 0
    fields = ["revision", "created_at"]
    readonly_fields = ["created_at"]


@admin.register(Part)
class PartAdmin(admin.ModelAdmin):
    list_display = ["number", "customer", "description"]
    list_filter = ["customer"]
    search_fields = ["number", "description", "customer__code"]
    inlines = [PartRevisionInline]


@admin.register(PartRevision)
class PartRevisionAdmin(admin.ModelAdmin):
    list_display = ["__str__", "part", "revision", "created_at"]
    search_fields = ["part__number", "revision"]


class EquipmentInline(admin.TabularInline):
    model = Equipment
    extra = 0


@admin.register(WorkCenter)
class WorkCenterAdmin(admin.ModelAdmin):
    list_display = ["code", "name", "notify_emails"]
    search_fields = ["code", "name"]
    inlines = [EquipmentInline]


@admin.register(Equipment)
class EquipmentAdmin(admin.ModelAdmin):
    list_display = ["code", "name", "work_center", "is_gauge", "calibration_due"]
    list_filter = ["work_center", "is_gauge"]
    search_fields = ["code", "name"]


@admin.register(MaterialLot)
class MaterialLotAdmin(admin.ModelAdmin):
    list_display = ["code", "kind", "description", "supplier_lot", "received_on", "expires_on"]
    list_filter = ["kind"]
    search_fields = ["code", "supplier_lot", "description"]


class QualificationInline(admin.TabularInline):
    model = Qualification
    extra = 0


@admin.register(Person)
class PersonAdmin(admin.ModelAdmin):
    list_display = ["badge_number", "printed_name", "user", "pin_failures", "locked_at"]
    list_filter = ["work_centers"]
    search_fields = ["badge_number", "printed_name", "user__username"]
    exclude = ["pin_hash"]  # PINs are set on the tablet or by a command, never shown
    readonly_fields = ["pin_failures", "locked_at"]
    filter_horizontal = ["work_centers"]
    inlines = [QualificationInline]


@admin.register(Job)
class JobAdmin(admin.ModelAdmin):
    list_display = [
        "number",
        "part_revision",
        "quantity",
        "due_date",
        "ipc_class",
        "routing_revision",
    ]
    list_filter = ["ipc_class"]
    search_fields = ["number", "part_revision__part__number"]
    date_hierarchy = "due_date"


@admin.register(Lot)
class LotAdmin(admin.ModelAdmin):
    """Lots change through the floor services (holds, steps); the admin only looks."""

    list_display = [
        "code",
        "routing_revision",
        "status",
        "on_hold",
        "priority",
        "panel_count",
        "created_at",
    ]
    list_filter = ["status", "on_hold"]
    search_fields = ["code"]
    readonly_fields = [
        "status",
        "on_hold",
        "routing_revision",
        "split_from",
        "started_at",
        "completed_at",
    ]

    def has_add_permission(self, request, obj=None) -> bool:  # type: ignore[no-untyped-def]
        return False  # lots start through plant.services.create_lot (steps are copied)


@admin.register(SiteSettings)
class SiteSettingsAdmin(admin.ModelAdmin):
    list_display = ["__str__", "date_format", "paper_size", "wall_page_seconds"]

    def has_add_permission(self, request):  # type: ignore[no-untyped-def]
        return False  # one row, made on first use: edit it, never add a second

    def has_delete_permission(self, request, obj=None):  # type: ignore[no-untyped-def]
        return False

    def changelist_view(self, request, extra_context=None):  # type: ignore[no-untyped-def]
        SiteSettings.current()  # so the one row is always there to edit
        return super().changelist_view(request, extra_context)
