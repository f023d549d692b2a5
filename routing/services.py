"""Use cases of process engineering: preview, draft, release, revise, move a lot.

The selection logic lives in the pure core (routing.builder); this module stores its
output, enforces who may release, and keeps released revisions immutable.
"""

from __future__ import annotations

from typing import IO, Any

from django.db import transaction
from django.utils import timezone

from routing.builder import build as builder
from routing.builder import design_import, render
from routing.builder import overrides as overrides_core
from routing.builder import spec as spec_core
from routing.builder.library import DEFAULT_LIBRARY, ProcessLibrary
from routing.models import ProcessLibraryVersion, RoutingRevision, RoutingStep
from shopfloor.audit import services as audit
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.parsing import refuse_nul
from shopfloor.plant.models import Lot, PartRevision, Person, WorkCenter
from shopfloor.plant.people import verify_pin


def spec_problems(exc: spec_core.SpecInvalid) -> list[dict[str, Any]]:
    return [e.as_dict() for e in exc.errors]


def validate_spec(spec: Any) -> dict[str, Any]:
    """THE spec validator of the form, the API, the command and the admin: the spec in
    its stored form (enum values in their stored spelling, thicknesses in um), or
    InvalidInput listing every problem. Nothing invalid is saved anywhere."""
    try:
        return spec_core.normalise_spec(spec)
    except spec_core.SpecInvalid as exc:
        raise InvalidInput(
            f"The build spec has {len(exc.errors)} problem(s); nothing was saved.",
            problems=spec_problems(exc),
        ) from exc


def set_spec(*, person: Person, part_revision_id: int, spec: Any) -> PartRevision:
    """Store an authored build spec on a part revision (process engineers).

    Routing revisions keep the spec they were built from, so changing the part
    revision's spec changes nothing on the floor until a new revision is released.
    """
    _require_role(person, "process_engineer", "author build specs")

    refuse_nul(spec, "build spec")
    stored = validate_spec(spec)
    with transaction.atomic():
        part_revision = (
            PartRevision.objects.select_for_update(no_key=True).filter(pk=part_revision_id).first()
        )
        if part_revision is None:
            raise NotFound(f"No part revision {part_revision_id}.")
        before = part_revision.build_spec
        if before == stored:
            return part_revision
        part_revision.build_spec = stored
        part_revision.save(update_fields=["build_spec"])
        audit.record(
            actor=person.user,
            action="part_revision.spec_set",
            object_type="part_revision",
            object_id=part_revision.pk,
            before={"build_spec": before},
            after={"build_spec": stored},
        )
        return part_revision


def current_library() -> tuple[ProcessLibraryVersion | None, ProcessLibrary]:
    version = ProcessLibraryVersion.objects.order_by("-version").first()
    if version is None:
        return None, ProcessLibrary.default()
    try:
        return version, ProcessLibrary.from_dict(version.data)
    except Exception as exc:  # a broken admin edit must not stop the floor
        raise InvalidInput(f"Process library v{version.version} is invalid: {exc}") from exc


def ensure_library(*, note: str = "default library") -> ProcessLibraryVersion:
    """Store the built-in library as version 1 when the database has none."""
    version = ProcessLibraryVersion.objects.order_by("-version").first()
    if version is None:
        version = ProcessLibraryVersion.objects.create(version=1, data=DEFAULT_LIBRARY, note=note)
    _, library = current_library()
    for code, name in library.work_centers.items():
        WorkCenter.objects.get_or_create(code=code, defaults={"name": name})
    return version


def preview(spec: Any, overrides: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """Build a routing from a spec without saving anything (the preview contract)."""
    _, library = current_library()
    return _build(spec, overrides or [], library)


def _build(spec: Any, overrides: list[dict[str, Any]], library: ProcessLibrary) -> dict[str, Any]:
    try:
        parsed = spec_core.parse_spec(spec)
    except spec_core.SpecInvalid as exc:
        raise InvalidInput(
            f"The build spec has {len(exc.errors)} problem(s).", problems=spec_problems(exc)
        ) from exc
    routing = builder.build_routing(parsed, library)
    if overrides:
        try:
            parsed_overrides = [parse_override(o) for o in overrides]
            routing = overrides_core.apply_overrides(routing, parsed_overrides)
        except (overrides_core.OverrideRefused, ValueError, TypeError, KeyError) as exc:
            raise InvalidInput(f"Customer override refused: {exc}") from exc
    return render.routing_to_dict(routing)


def parse_override(raw: Any) -> overrides_core.Override:
    if not isinstance(raw, dict) or "quantity" not in raw:
        raise ValueError("each override is an object with at least 'quantity' and 'reason'")
    allowed = {
        "quantity",
        "step_code",
        "min",
        "max",
        "target",
        "reason",
        "approved_by",
        "applies_to",
    }
    unknown = set(raw) - allowed
    if unknown:
        raise ValueError(f"unknown override keys {sorted(unknown)}; allowed: {sorted(allowed)}")
    return overrides_core.Override(
        quantity=str(raw["quantity"]),
        step_code=raw.get("step_code"),
        min=raw.get("min"),
        max=raw.get("max"),
        target=raw.get("target"),
        reason=str(raw.get("reason") or ""),
        approved_by=raw.get("approved_by"),
        applies_to=raw.get("applies_to"),
    )


#: Largest design file accepted (the import streams, so this bounds upload time, not memory).
MAX_DESIGN_FILE_BYTES = 150 * 1024 * 1024


def import_design(
    source: str | IO[bytes], *, name: str = "", size: int | None = None
) -> design_import.ImportResult:
    """Read an IPC-2581 file into a draft build spec, with what to fill in; nothing is saved.

    A file that is not IPC-2581 (or an unsupported revision, a DTD, broken XML) is an
    InvalidInput naming what was found and what is allowed.
    """
    label = name or "the file"
    allowed = "an IPC-2581 XML file, revision " + ", ".join(design_import.SUPPORTED_REVISIONS)
    if size is not None and size > MAX_DESIGN_FILE_BYTES:
        raise InvalidInput(
            f"{label} is {size / 1e6:.0f} MB; design files up to "
            f"{MAX_DESIGN_FILE_BYTES / 1e6:.0f} MB are imported.",
            problems=[{"field": "file", "value": name, "problem": "too large", "allowed": allowed}],
        )
    try:
        design = design_import.read_design(source)
    except design_import.DesignFileError as exc:
        raise InvalidInput(
            f"{label} cannot be imported: {exc}.",
            problems=[{"field": "file", "value": name, "problem": str(exc), "allowed": allowed}],
        ) from exc
    return design_import.import_design(design)


def check_filled(spec: Any, to_fill: list[str]) -> None:
    """Refuse a spec that still lacks what an imported design file did not state.

    The validator alone would let an optional field with a default (mask colour) pass
    unfilled; an imported draft names its to-fill fields, and this keeps them required.
    """
    missing = design_import.missing_fields(spec, to_fill)
    if missing:
        raise InvalidInput(
            "Still to fill in (the design file does not state them): " + ", ".join(missing) + ".",
            problems=[
                {
                    "field": path,
                    "value": None,
                    "problem": "not in the design file: fill it in",
                    "allowed": None,
                }
                for path in missing
            ],
        )


def _require_role(person: Person, role: str, what: str) -> None:
    if role not in person.roles() and "admin" not in person.roles():
        raise NotAllowed(f"Only a {role.replace('_', ' ')} can {what}.")


def create_draft(
    *,
    person: Person,
    part_revision_id: int,
    reason: str,
    overrides: list[dict[str, Any]] | None = None,
    deviation_pin: str | None = None,
) -> RoutingRevision:
    """Build and store a draft routing revision for a part revision's build spec.

    Customer overrides tighter than the default are free. A looser one is a deviation:
    it needs this process engineer's PIN (`deviation_pin`), which records an e-signature
    "deviation approved by" bound to the revision, and the window is marked as a deviation.
    """
    _require_role(person, "process_engineer", "create routing revisions")

    refuse_nul([reason, overrides or []], "draft")
    overrides = [dict(o) if isinstance(o, dict) else o for o in (overrides or [])]
    approving = bool(overrides and deviation_pin)
    if approving:
        verify_pin(person, deviation_pin or "")
        approver = f"{person.printed_name} ({person.badge_number})"
        overrides = [
            {**o, "approved_by": approver} if isinstance(o, dict) else o for o in overrides
        ]
    reason = (reason or "").strip()
    part_revision = PartRevision.objects.filter(pk=part_revision_id).first()
    if part_revision is None:
        raise NotFound(f"No part revision {part_revision_id}.")
    with transaction.atomic():
        version = ensure_library()
        _, library = current_library()
        built = _build(part_revision.build_spec, overrides or [], library)
        previous = (
            RoutingRevision.objects.select_for_update(no_key=True)
            .filter(part_revision=part_revision)
            .order_by("-number")
            .first()
        )
        if previous is not None and not reason:
            raise InvalidInput("A new routing revision needs a reason for the change.")
        diff = "\n".join(render.diff_routings(previous.built, built)) if previous else ""
        revision = RoutingRevision.objects.create(
            part_revision=part_revision,
            number=(previous.number + 1) if previous else 1,
            ipc_class=int(part_revision.build_spec.get("ipc_class", 2)),
            build_spec=part_revision.build_spec,
            overrides=overrides or [],
            library_version=version,
            built=built,
            reason=reason or "first routing",
            diff=diff,
            previous=previous,
            created_by=person.user,
        )
        centers = {wc.code: wc for wc in WorkCenter.objects.all()}
        for step in built["steps"]:
            wc = centers.get(step["work_center"])
            if wc is None:
                wc = WorkCenter.objects.create(
                    code=step["work_center"], name=step["work_center"].replace("_", " ")
                )
                centers[wc.code] = wc
            RoutingStep.objects.create(
                revision=revision,
                seq=step["seq"],
                code=step["code"],
                name=step["name"],
                work_center=wc,
                instructions=step.get("instructions") or "",
                parameters=step.get("parameters") or {},
                hazard=step.get("hazard") or "",
                queue_time_limit_minutes=step.get("queue_time_limit_minutes"),
                standard_minutes=step.get("standard_minutes") or 30,
                cycle=step.get("cycle"),
                measurements=step.get("measurements") or [],
            )
        deviations = [
            f"{step['code']}:{m['quantity']}"
            for step in built["steps"]
            for m in step.get("measurements", [])
            if m.get("deviation")
        ]
        if deviations and approving:
            audit.sign(
                person=person,
                meaning="deviation_approved_by",
                record_type="routing_revision",
                record_id=revision.pk,
                content={"overrides": overrides, "deviations": deviations},
            )
        audit.record(
            actor=person.user,
            action="routing.drafted",
            object_type="routing_revision",
            object_id=revision.pk,
            after={
                "part_revision": str(part_revision),
                "number": revision.number,
                "reason": revision.reason,
                "steps": len(built["steps"]),
            },
        )
        return revision


def revision_content(revision: RoutingRevision) -> dict[str, Any]:
    return {
        "built": revision.built,
        "build_spec": revision.build_spec,
        "overrides": revision.overrides,
        "number": revision.number,
    }


def release(*, person: Person, revision_id: int, pin: str) -> RoutingRevision:
    """Release a draft with the process engineer's e-signature; it never changes again."""

    _require_role(person, "process_engineer", "release routings")
    verify_pin(person, pin)
    with transaction.atomic():
        revision = (
            RoutingRevision.objects.select_for_update(no_key=True).filter(pk=revision_id).first()
        )
        if revision is None:
            raise NotFound(f"No routing revision {revision_id}.")
        if revision.is_released:
            raise Conflict(f"Routing revision r{revision.number} is already released.")
        latest = (
            RoutingRevision.objects.filter(
                part_revision_id=revision.part_revision_id,
                status=RoutingRevision.Status.RELEASED,
            )
            .order_by("-number")
            .first()
        )
        if latest is not None and (latest.built, latest.overrides) == (
            revision.built,
            revision.overrides,
        ):
            raise Conflict(
                f"Routing revision r{revision.number} has no differences from released "
                f"r{latest.number}, so there is nothing to release. Change the build spec or "
                "the overrides and draft again."
            )
        sig = audit.sign(
            person=person,
            meaning="released_by",
            record_type="routing_revision",
            record_id=revision.pk,
            content=revision_content(revision),
        )
        RoutingRevision.objects.filter(pk=revision.pk).update(
            status=RoutingRevision.Status.RELEASED,
            released_at=timezone.now(),
            release_signature=sig,
        )
        audit.record(
            actor=person.user,
            action="routing.released",
            object_type="routing_revision",
            object_id=revision.pk,
            before={"status": "draft"},
            after={"status": "released", "signature": sig.pk},
        )
        revision.refresh_from_db()
        return revision


def move_lot(*, person: Person, lot_id: int, revision_id: int, reason: str) -> Lot:
    """Move a lot in process to another released revision, for steps not yet done only."""

    _require_role(person, "process_engineer", "move lots between routing revisions")
    if not (reason or "").strip():
        raise InvalidInput("Moving a lot to another routing revision needs a reason.")
    with transaction.atomic():
        lot = Lot.objects.select_for_update(no_key=True).filter(pk=lot_id).first()
        target = RoutingRevision.objects.filter(pk=revision_id).first()
        if lot is None or target is None:
            raise NotFound("No such lot or routing revision.")
        if not target.is_released:
            raise Conflict("A lot can only move to a released routing revision.")
        if target.pk == lot.routing_revision_id:
            raise Conflict(f"Lot {lot.code} already runs on routing r{target.number}.")
        if target.part_revision_id != lot.routing_revision.part_revision_id:
            raise Conflict("That revision belongs to another part revision.")
        if LotStep.objects.filter(lot=lot, status=LotStep.Status.IN_PROGRESS).exists():
            raise Conflict("Finish or pause the step in progress before moving the lot.")
        done_codes = set(
            LotStep.objects.filter(lot=lot, status=LotStep.Status.DONE).values_list(
                "code", flat=True
            )
        )
        open_steps = LotStep.objects.filter(
            lot=lot, status__in=[LotStep.Status.WAITING, LotStep.Status.PAUSED]
        )
        skipped = open_steps.update(status=LotStep.Status.SKIPPED)
        last = LotStep.objects.filter(lot=lot).order_by("-position").first()
        position = (last.position if last else 0) + 10
        added = 0
        library = library_of(target)
        for rstep in target.steps.select_related("revision").order_by("seq"):
            if rstep.code in done_codes:
                continue
            LotStep.objects.create(**lot_step_fields(rstep, library), lot=lot, position=position)
            position += 10
            added += 1
        old = lot.routing_revision_id
        lot.routing_revision = target
        lot.save(update_fields=["routing_revision"])
        audit.record(
            actor=person.user,
            action="lot.moved_revision",
            object_type="lot",
            object_id=lot.pk,
            before={"routing_revision": old},
            after={
                "routing_revision": target.pk,
                "reason": reason,
                "skipped_steps": skipped,
                "added_steps": added,
            },
        )
        return lot


def library_of(revision: RoutingRevision) -> ProcessLibrary:
    """The process library a routing revision was built with (the built-in one when the
    revision names none or its stored version no longer parses)."""
    version = revision.library_version
    data = version.data if version is not None else None
    if data is None:
        return ProcessLibrary.default()
    try:
        return ProcessLibrary.from_dict(data)
    except Exception:  # an old stored version the current parser refuses
        return ProcessLibrary.default()


def lot_step_fields(rstep: RoutingStep, library: ProcessLibrary | None = None) -> dict[str, Any]:
    """The snapshot of a routing step that a lot carries with it (including the material
    kinds the step consumes, so the tablet asks for them and a recall is complete)."""
    library = library or library_of(rstep.revision)
    layers = (rstep.revision.build_spec or {}).get("layers")
    return {
        "materials": list(
            library.materials_for(rstep.code, layers=layers if isinstance(layers, int) else None)
        ),
        "code": rstep.code,
        "name": rstep.name,
        "work_center_id": rstep.work_center_id,
        "routing_step": rstep,
        "cycle": rstep.cycle,
        "instructions": rstep.instructions,
        "parameters": rstep.parameters,
        "plan": rstep.measurements,
        "hazard": rstep.hazard,
        "queue_time_limit_minutes": rstep.queue_time_limit_minutes,
        "standard_minutes": rstep.standard_minutes,
    }
