"""Routing records in the admin.

Released revisions and their steps are read-only (a change is a new revision through the
engineering pages). A process library edit never overwrites: it is validated with
ProcessLibrary.from_dict and saved as the next version, so every routing revision keeps
naming the library it was built with.
"""

from __future__ import annotations

from typing import Any

from django import forms
from django.contrib import admin
from django.db import transaction
from django.db.models import Max
from django.http import HttpRequest

from routing.builder.library import LibraryInvalid, ProcessLibrary
from routing.models import ProcessLibraryVersion, RoutingRevision, RoutingStep


class ProcessLibraryForm(forms.ModelForm):
    class Meta:
        model = ProcessLibraryVersion
        fields = ["data", "note"]

    def clean_data(self) -> Any:
        data = self.cleaned_data["data"]
        try:
            ProcessLibrary.from_dict(data)
        except LibraryInvalid as exc:
            problems = getattr(exc, "errors", None) or [str(exc)]
            raise forms.ValidationError(
                ["The library was not saved; fix these problems:", *map(str, problems)]
            ) from exc
        except (TypeError, ValueError, KeyError, AttributeError) as exc:
            raise forms.ValidationError(f"The library was not saved: {exc}") from exc
        return data


@admin.register(ProcessLibraryVersion)
class ProcessLibraryVersionAdmin(admin.ModelAdmin):
    form = ProcessLibraryForm
    list_display = ["version", "note", "created_at", "created_by"]
    readonly_fields = ["version", "created_at", "created_by"]
    search_fields = ["note"]

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False  # revisions name the version they were built with

    def save_model(self, request: HttpRequest, obj: Any, form: Any, change: bool) -> None:
        """Save every edit (and every add) as a new version; the edited row stays as it was."""
        with transaction.atomic():
            latest = ProcessLibraryVersion.objects.select_for_update(no_key=True).aggregate(
                Max("version")
            )
            data = dict(form.cleaned_data["data"])
            next_version = (latest["version__max"] or 0) + 1
            if isinstance(data.get("version"), int):
                data["version"] = next_version
            new = ProcessLibraryVersion.objects.create(
                version=next_version,
                data=data,
                note=form.cleaned_data.get("note") or "",
                created_by=request.user if request.user.is_authenticated else None,
            )
        # The admin's messages and redirect then refer to the new version.
        obj.pk, obj.version, obj.data = new.pk, new.version, new.data


class RoutingStepInline(admin.TabularInline):
    model = RoutingStep
    extra = 0
    fields = ("seq", "code", "name", "work_center", "queue_time_limit_minutes", "standard_minutes")
    readonly_fields = fields
    can_delete = False

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


@admin.register(RoutingRevision)
class RoutingRevisionAdmin(admin.ModelAdmin):
    """Drafts and releases happen on the engineering pages (with the PIN signature)."""

    list_display = ["part_revision", "number", "status", "ipc_class", "created_at", "released_at"]
    list_filter = ["status", "ipc_class"]
    search_fields = ["part_revision__part__number", "reason"]
    inlines = [RoutingStepInline]
    readonly_fields = [f.name for f in RoutingRevision._meta.fields]

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        if obj is not None and obj.is_released:
            return False
        return super().has_delete_permission(request, obj)


@admin.register(RoutingStep)
class RoutingStepAdmin(admin.ModelAdmin):
    list_display = ["revision", "seq", "code", "name", "work_center"]
    list_filter = ["work_center", "revision__status"]
    search_fields = ["code", "name", "revision__part_revision__part__number"]

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False
