"""Engineering pages: part revisions and their routings, preview, draft, release, diff.

Thin views: parse the form, call one routing service, render. Anyone with a role may
look; drafting and releasing are for process engineers (and admins), and the services
refuse everyone else with a reason that the 403 page shows.
"""

from __future__ import annotations

import json
from typing import Any

from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.http import HttpRequest, HttpResponse
from django.shortcuts import get_object_or_404, redirect, render
from django.utils.safestring import mark_safe
from django.views.decorators.http import require_http_methods, require_POST

from routing import services, spec_form
from routing.api import split_preview_body
from routing.builder import render as routing_render
from routing.builder import spec as spec_core
from routing.builder.design_import import ImportResult, cross_section_svg
from routing.builder.examples import EXAMPLE_SPEC
from routing.models import RoutingRevision
from shopfloor import strict_json
from shopfloor.access import ENGINEER_ROLES
from shopfloor.core import units
from shopfloor.errors import DomainError
from shopfloor.floor.permissions import READ_ROLES, roles_of
from shopfloor.htmx import is_htmx
from shopfloor.plant.models import Lot, PartRevision

CHANGE_ROLES = ENGINEER_ROLES


def _require_reader(request: HttpRequest) -> frozenset[str]:
    roles = roles_of(request.user)
    if not roles & READ_ROLES:
        raise PermissionDenied(
            "The engineering pages are for people with a shop role; ask an "
            "administrator to add yours."
        )
    return roles


def _person(request: HttpRequest) -> Any:
    person = getattr(request.user, "person", None)
    if person is None:
        raise PermissionDenied("This account has no badge on file, so it cannot sign.")
    return person


@login_required
def index(request: HttpRequest) -> HttpResponse:
    roles = _require_reader(request)
    part_revisions = (
        PartRevision.objects.select_related("part__customer")
        .prefetch_related("routing_revisions")
        .order_by("part__number", "revision")
    )
    return render(
        request,
        "engineering/index.html",
        {
            "part_revisions": part_revisions,
            "can_change": bool(roles & CHANGE_ROLES),
        },
    )


@login_required
@require_http_methods(["GET", "POST"])
def preview(request: HttpRequest) -> HttpResponse:
    _require_reader(request)
    text = (
        request.POST.get("spec", "")
        if request.method == "POST"
        else json.dumps(EXAMPLE_SPEC, indent=2)
    )
    context: dict[str, Any] = {"spec_text": text, "result": None, "error": "", "problems": []}
    status = 200
    if request.method == "POST":
        try:
            spec, overrides = split_preview_body(strict_json.loads(text))
            context["result"] = services.preview(spec, overrides)
        except ValueError as exc:
            context["error"] = f"The text is not valid JSON: {exc}"
        except DomainError as exc:
            context["error"], context["problems"] = exc.detail, _shown(exc.problems)
        if context["error"] and not is_htmx(request):
            status = 400
    template = "engineering/preview.html#panel" if is_htmx(request) else "engineering/preview.html"
    return render(request, template, context, status=status)


@login_required
@require_http_methods(["GET", "POST"])
def import_design(request: HttpRequest) -> HttpResponse:
    """Upload an IPC-2581 file; show its draft spec to fill in.

    With a part revision chosen, the draft pre-fills that part revision's authoring form
    (imported fields marked, the rest to fill in before it can be saved); without one,
    it goes into the preview page to try out.
    """
    roles = _require_reader(request)
    if not roles & CHANGE_ROLES:
        raise PermissionDenied("Only process engineers import design files.")
    chosen = request.POST.get("part_revision") or request.GET.get("part_revision") or ""
    page: dict[str, Any] = {"part_revisions": _part_revision_choices(), "chosen": chosen}
    if request.method == "GET":
        return render(request, "engineering/import_design.html", page)
    upload = request.FILES.get("file")
    part_revision = None
    if chosen:
        part_revision = (
            PartRevision.objects.select_related("part__customer")
            .filter(pk=int(chosen) if chosen.isdigit() else 0)
            .first()
        )
        if part_revision is None:
            page["error"] = f"No part revision {chosen!r}; choose one from the list or none."
            return render(request, "engineering/import_design.html", page, status=400)
    if upload is None:
        page["error"] = "Choose an IPC-2581 file (.xml, revision B, B1 or C) to import."
        return render(request, "engineering/import_design.html", page, status=400)
    name = upload.name or "the file"
    try:
        result = services.import_design(upload, name=name, size=upload.size)
    except DomainError as exc:
        page.update(error=exc.detail, file_name=name)
        return render(request, "engineering/import_design.html", page, status=exc.status)
    shown = _import_shown(result, name)
    if part_revision is not None:
        state = spec_form.form_values(
            result.spec,
            part_revision_overrides(part_revision),
            imported=_form_keys(result.from_file),
        )
        state.to_fill = list(result.to_fill)
        return render_spec_form(request, part_revision, state, extra={"design_import": shown})
    context: dict[str, Any] = {
        "spec_text": json.dumps(result.draft(), indent=2),
        "result": None,
        "error": "",
        "problems": [],
        "design_import": shown,
    }
    return render(request, "engineering/preview.html", context)


def _part_revision_choices() -> list[PartRevision]:
    return list(
        PartRevision.objects.select_related("part__customer").order_by("part__number", "revision")
    )


def _form_keys(from_file: list[str]) -> list[str]:
    """Spec fields from the file as the authoring form names its inputs."""
    out: list[str] = []
    for key in from_file:
        out.extend(["outline.width_mm", "outline.height_mm"] if key == "outline" else [key])
    return out


def _import_shown(result: ImportResult, name: str) -> dict[str, Any]:
    """What the import panel shows: each field marked as from the file or to fill in."""
    draft = result.draft()
    fields = []
    for key, value in draft.items():
        if key == "stackup":
            value = f"{len(value)} rows (see the cross-section)"
        if isinstance(value, dict):
            for sub, sub_value in value.items():
                path = f"{key}.{sub}"
                fields.append(_field(path, sub_value, result))
            continue
        fields.append(_field(key, value, result))
    return {
        "name": name,
        "source": result.source,
        "to_fill": result.to_fill,
        "warnings": result.warnings,
        "fields": fields,
        "vias": result.vias,
        "svg": mark_safe(cross_section_svg(result, f"Stack-up of {name}")),  # noqa: S308 - every text in it is escaped by the builder
    }


def _field(path: str, value: Any, result: ImportResult) -> dict[str, Any]:
    if path in result.to_fill:
        origin = "to_fill"
    elif path in result.from_file or path.split(".")[0] in result.from_file:
        origin = "file"
    else:
        origin = "default"
    shown = value if isinstance(value, str) else json.dumps(value)
    if path == "vias":
        shown = ", ".join(f"L{v['from']}-L{v['to']} {v['kind']} {v['drill']}" for v in value)
    return {"path": path, "value": shown, "origin": origin}


def _shown(problems: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Problems with the allowed values as one line of text for the table."""
    out = []
    for p in problems:
        allowed = p.get("allowed")
        text = ", ".join(map(str, allowed)) if isinstance(allowed, list) else (allowed or "")
        out.append({**p, "allowed_text": text})
    return out


@login_required
@require_POST
def create_draft(request: HttpRequest, part_revision_id: int) -> HttpResponse:
    _require_reader(request)
    try:
        revision = services.create_draft(
            person=_person(request),
            part_revision_id=part_revision_id,
            reason=request.POST.get("reason", ""),
        )
    except DomainError as exc:
        if exc.status == 403:
            raise PermissionDenied(exc.detail) from exc
        part_revision = get_object_or_404(PartRevision, pk=part_revision_id)
        return render(
            request,
            "engineering/refused.html",
            {"detail": exc.detail, "problems": exc.problems, "back": part_revision},
            status=exc.status,
        )
    return redirect("routing:revision", pk=revision.pk)


@login_required
def revision(request: HttpRequest, pk: int) -> HttpResponse:
    roles = _require_reader(request)
    rev = get_object_or_404(
        RoutingRevision.objects.select_related(
            "part_revision__part", "release_signature", "previous", "library_version"
        ),
        pk=pk,
    )
    return _revision_page(request, rev, roles)


def _movable_lots(rev: RoutingRevision) -> list[Lot]:
    """Lots of the same part revision still in process on another revision."""
    if not rev.is_released:
        return []
    return list(
        Lot.objects.filter(
            routing_revision__part_revision_id=rev.part_revision_id,
            status__in=[Lot.Status.NOT_STARTED, Lot.Status.IN_PROCESS],
        )
        .exclude(routing_revision=rev)
        .select_related("routing_revision")
        .order_by("code")
    )


def _revision_page(
    request: HttpRequest,
    rev: RoutingRevision,
    roles: frozenset[str],
    error: str = "",
    status: int = 200,
) -> HttpResponse:
    return render(
        request,
        "engineering/revision.html",
        {
            "revision": rev,
            "steps": rev.steps.select_related("work_center").order_by("seq"),
            "diff_rows": routing_render.diff_table(rev.previous.built, rev.built)
            if rev.previous
            else [],
            "can_change": bool(roles & CHANGE_ROLES),
            "movable_lots": _movable_lots(rev),
            "error": error,
        },
        status=status,
    )


@login_required
@require_POST
def move_lot(request: HttpRequest, pk: int) -> HttpResponse:
    """Move one lot in process onto this released revision (open steps only)."""
    roles = _require_reader(request)
    rev = get_object_or_404(RoutingRevision, pk=pk)
    try:
        lot_id = int(request.POST.get("lot", ""))
    except ValueError:
        return _revision_page(request, rev, roles, "Choose a lot to move.", 400)
    try:
        services.move_lot(
            person=_person(request),
            lot_id=lot_id,
            revision_id=pk,
            reason=request.POST.get("reason", ""),
        )
    except DomainError as exc:
        if exc.status == 403 and not roles & CHANGE_ROLES:
            raise PermissionDenied(exc.detail) from exc
        return _revision_page(request, rev, roles, exc.detail, exc.status)
    return redirect("routing:revision", pk=pk)


@login_required
@require_POST
def release(request: HttpRequest, pk: int) -> HttpResponse:
    roles = _require_reader(request)
    try:
        services.release(person=_person(request), revision_id=pk, pin=request.POST.get("pin", ""))
    except DomainError as exc:
        if exc.status == 403 and not roles & CHANGE_ROLES:
            raise PermissionDenied(exc.detail) from exc
        rev = get_object_or_404(RoutingRevision, pk=pk)
        return _revision_page(request, rev, roles, exc.detail, exc.status)
    return redirect("routing:revision", pk=pk)


# --- build spec authoring ----------------------------------------------------------------


def render_spec_form(
    request: HttpRequest,
    part_revision: PartRevision,
    state: spec_form.FormState,
    *,
    error: str = "",
    problems: list[dict[str, Any]] | None = None,
    status: int = 200,
    extra: dict[str, Any] | None = None,
) -> HttpResponse:
    """The authoring page for a part revision, filled from `state`.

    Public so another page (a design import) can show the form pre-filled from its own
    spec dict: `render_spec_form(request, pr, spec_form.form_values(spec, imported=...))`.
    """
    roles = _require_reader(request)
    spec = spec_form.spec_from_form(_state_as_post(state))
    context = _spec_preview_context(spec, _overrides_of(state), state.to_fill)
    if problems is not None:
        state.errors = spec_form.errors_by_input(problems)
    return render(
        request,
        "engineering/spec_form.html",
        {
            "part_revision": part_revision,
            "state": state,
            "fields": spec_form.SIMPLE_FIELDS,
            "stackup_kinds": spec_core.STACKUP_KINDS,
            "via_kinds": spec_core.VIA_KINDS,
            "drills": spec_core.DRILLS,
            "quantities": units.quantities(),
            "can_change": bool(roles & CHANGE_ROLES),
            "page_error": error,
            "page_problems": _shown(problems or []),
            "imported_list": ",".join(sorted(state.imported)),
            "to_fill_list": ",".join(state.to_fill),
            **context,
            **(extra or {}),
        },
        status=status,
    )


def _state_as_post(state: spec_form.FormState) -> dict[str, Any]:
    post: dict[str, Any] = dict(state.values)
    post["hard_gold_fingers"] = "on" if state.values.get("hard_gold_fingers") else ""
    for prefix, rows in (("stackup", state.stackup), ("vias", state.vias)):
        for i, row in enumerate(rows):
            for key, value in row.items():
                post[f"{prefix}-{i}-{key}"] = value
    return post


def _overrides_of(state: spec_form.FormState) -> list[dict[str, Any]]:
    post = {f"ov-{i}-{k}": v for i, row in enumerate(state.overrides) for k, v in row.items()}
    return spec_form.overrides_from_form(post)


def _spec_preview_context(
    spec: dict[str, Any], overrides: list[dict[str, Any]], to_fill: list[str] | None = None
) -> dict[str, Any]:
    """The live preview: the routing the spec gets, or every problem with it.

    Looser overrides are shown as deviations pending approval: the PIN is asked for when
    the preview becomes a draft (the existing deviation rule)."""
    pending = [{**o, "approved_by": "pending: your PIN when drafting"} for o in overrides]
    context: dict[str, Any] = {"result": None, "error": "", "problems": []}
    try:
        services.check_filled(spec, to_fill or [])
        services.validate_spec(spec)
        context["result"] = services.preview(spec, pending)
    except DomainError as exc:
        context["error"], context["problems"] = exc.detail, _shown(exc.problems)
    return context


@login_required
@require_http_methods(["GET", "POST"])
def spec_form_page(request: HttpRequest, part_revision_id: int) -> HttpResponse:
    """Author a part revision's build spec; save it, or make the preview a draft revision."""
    roles = _require_reader(request)
    part_revision = get_object_or_404(
        PartRevision.objects.select_related("part__customer"), pk=part_revision_id
    )
    if request.method == "GET":
        spec = part_revision.build_spec or EXAMPLE_SPEC
        state = spec_form.form_values(spec, part_revision_overrides(part_revision))
        return render_spec_form(request, part_revision, state)
    if not roles & CHANGE_ROLES:
        raise PermissionDenied("Only process engineers (and administrators) author build specs.")
    state = spec_form.state_from_post(request.POST)
    spec = spec_form.spec_from_form(request.POST)
    overrides = spec_form.overrides_from_form(request.POST)
    person = _person(request)
    try:
        services.check_filled(spec, state.to_fill)
        services.set_spec(person=person, part_revision_id=part_revision.pk, spec=spec)
        if request.POST.get("action") == "draft":
            revision = services.create_draft(
                person=person,
                part_revision_id=part_revision.pk,
                reason=request.POST.get("reason", "") or "authored in the spec form",
                overrides=overrides,
                deviation_pin=request.POST.get("pin") or None,
            )
            return redirect("routing:revision", pk=revision.pk)
    except DomainError as exc:
        if exc.status == 403 and "PIN" not in exc.detail:
            raise PermissionDenied(exc.detail) from exc
        return render_spec_form(
            request,
            part_revision,
            state,
            error=exc.detail,
            problems=exc.problems,
            status=exc.status,
        )
    return redirect("routing:spec_form", part_revision_id=part_revision.pk)


def part_revision_overrides(part_revision: PartRevision) -> list[dict[str, Any]]:
    """Overrides to start the editor with: the newest revision's, else the newest job's."""
    latest = part_revision.routing_revisions.order_by("-number").first()
    if latest is not None and latest.overrides:
        return [{k: v for k, v in o.items() if k != "approved_by"} for o in latest.overrides]
    job = part_revision.jobs.exclude(customer_overrides=[]).order_by("-created_at").first()
    return list(job.customer_overrides) if job is not None else []


@login_required
@require_POST
def spec_form_preview(request: HttpRequest) -> HttpResponse:
    """The live preview beside the form (htmx): nothing is saved."""
    _require_reader(request)
    spec = spec_form.spec_from_form(request.POST)
    context = _spec_preview_context(
        spec, spec_form.overrides_from_form(request.POST), spec_form.to_fill_from(request.POST)
    )
    return render(request, "engineering/spec_form.html#preview", context)
