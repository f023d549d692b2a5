"""Dispositions as a review board makes them: one signed decision, per panel if need be.

Why this module exists: a review board looks at the panels of a held lot and decides
for each one: use it as is, rework it, or scrap it. Earlier the form took one decision
for the whole lot, so "rework these, scrap that one" silently lost the scrap. Here every
live panel gets exactly one action (a panel left out or named twice is refused with the
list), and the signed content names each panel's action, so nothing ticked is dropped.

Rework routes are process-library steps. The default for a step is what a fab does there
(the library's ``rework`` list: AOI defects -> repair and verify; solder mask -> strip and
recoat; surface finish -> strip and re-finish; a measured step without one is done again),
never a plating strip after an inspection. Rework steps are inserted right after the held
step; when only some panels are reworked, each step names them. Scrapped panels split off
into a scrapped lot ``<code>-S<n>`` (the rest continue) and their boards are recorded as
scrap at the held step, so the lot's yield shows them. The NCR records the root cause
(from the site's list) and the corrective action.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from routing.builder.library import REWORK_ONLY_STEP_CODES, base_code
from routing.services import library_of
from shopfloor.audit import services as audit
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor import services as floor
from shopfloor.floor.models import LotStep, ScrapRecord
from shopfloor.plant.models import Lot, Panel, Person, WorkCenter
from shopfloor.plant.people import verify_pin
from shopfloor.quality.models import Alert, Hold, Nonconformance, RootCause

USE_AS_IS = Nonconformance.Disposition.USE_AS_IS.value
REWORK = Nonconformance.Disposition.REWORK.value
SCRAP = Nonconformance.Disposition.SCRAP.value
MIXED = Nonconformance.Disposition.MIXED.value
PANEL_ACTIONS = (USE_AS_IS, REWORK, SCRAP)
MAX_REWORK_STEPS = 10


@dataclass(frozen=True)
class ReworkStep:
    name: str
    work_center: WorkCenter | None
    instructions: str
    standard_minutes: int | None
    same_plan: bool
    library_code: str | None = None


def _require_quality(person: Person, what: str) -> None:
    if "quality_engineer" not in person.roles():
        raise NotAllowed(f"Only a quality engineer can {what}.")


# --- rework routes ----------------------------------------------------------------------


def default_rework(step: LotStep | None) -> list[str]:
    """The library's default rework route after a nonconformance at `step`."""
    if step is None:
        return []

    library = library_of(step.lot.routing_revision)
    return list(library.rework_for(base_code(step.code)))


def rework_choices(step: LotStep | None) -> list[tuple[str, str]]:
    """Library steps a rework may use, as (code, name), sorted by name."""
    if step is None:
        return []

    library = library_of(step.lot.routing_revision)
    codes = set(library.steps) | REWORK_ONLY_STEP_CODES
    pairs = [(c, library.definition(c).name) for c in codes]
    return sorted(pairs, key=lambda pair: pair[1].lower())


def _library_route(step: LotStep | None, codes: Any) -> list[ReworkStep]:
    if step is None:
        raise Conflict("This NCR names no lot step, so a rework route has nowhere to go.")

    library = library_of(step.lot.routing_revision)
    if not isinstance(codes, list) or not 1 <= len(codes) <= MAX_REWORK_STEPS:
        raise InvalidInput(
            f"rework_route must be a list of 1 to {MAX_REWORK_STEPS} process-library step codes."
        )
    known = set(library.steps) | REWORK_ONLY_STEP_CODES
    unknown = [c for c in codes if not isinstance(c, str) or c not in known]
    if unknown:
        raise InvalidInput(
            f"Rework step(s) {unknown} are not in the process library.",
            problems=[{"field": "rework_route", "value": unknown, "allowed": sorted(known)}],
        )
    centers = {wc.code: wc for wc in WorkCenter.objects.all()}
    held_base = base_code(step.code)
    out = []
    for code in codes:
        d = library.definition(code)
        wc = centers.get(d.work_center)
        if wc is None:
            wc = WorkCenter.objects.create(
                code=d.work_center, name=library.work_centers.get(d.work_center, d.work_center)
            )
            centers[wc.code] = wc
        out.append(
            ReworkStep(
                name=d.name,
                work_center=wc,
                instructions=d.instructions,
                standard_minutes=d.standard_minutes,
                same_plan=code == held_base,
                library_code=code,
            )
        )
    return out


def _default_route(held: LotStep | None) -> list[ReworkStep]:
    """The library's default rework for the held step; a step the library does not know
    (a hand-made routing) is simply done again with its own plan."""

    if held is None:
        raise Conflict("This NCR names no lot step, so rework has nowhere to go.")
    codes = default_rework(held)
    known = set(library_of(held.lot.routing_revision).steps) | REWORK_ONLY_STEP_CODES
    if codes and all(c in known for c in codes):
        return _library_route(held, codes)
    return [
        ReworkStep(
            name=f"{held.name} (again)",
            work_center=held.work_center,
            instructions=f"Do '{held.name}' again on the panels named and measure as before.",
            standard_minutes=held.standard_minutes,
            same_plan=True,
        )
    ]


def _parse_named_rework(raw: Any) -> list[ReworkStep]:
    """Free-named rework steps (the older form: {"name", "work_center", ...})."""
    items = raw
    if not isinstance(items, list) or not 1 <= len(items) <= MAX_REWORK_STEPS:
        raise InvalidInput(
            f"rework_steps must be a list of 1 to {MAX_REWORK_STEPS} steps, "
            'each like {"name": "Repair at AOI"}.'
        )
    parsed: list[ReworkStep] = []
    problems: list[dict[str, Any]] = []
    allowed = {"name", "work_center", "instructions", "standard_minutes", "same_plan"}
    for i, item in enumerate(items):
        if not isinstance(item, dict):
            problems.append({"field": f"rework_steps[{i}]", "problem": "must be an object"})
            continue
        unknown = sorted(set(item) - allowed)
        if unknown:
            problems.append(
                {
                    "field": f"rework_steps[{i}]",
                    "problem": f"unknown {unknown}",
                    "allowed": sorted(allowed),
                }
            )
        name = item.get("name")
        if not isinstance(name, str) or not 3 <= len(name.strip()) <= 120:
            problems.append(
                {
                    "field": f"rework_steps[{i}].name",
                    "problem": "a name of 3 to 120 characters is required",
                }
            )
            continue
        wc = None
        if item.get("work_center") is not None:
            wc = WorkCenter.objects.filter(code=item["work_center"]).first()
            if wc is None:
                problems.append(
                    {
                        "field": f"rework_steps[{i}].work_center",
                        "value": item["work_center"],
                        "problem": "no work center with that code",
                    }
                )
        minutes = item.get("standard_minutes")
        if minutes is not None and (
            isinstance(minutes, bool) or not isinstance(minutes, int) or not 1 <= minutes <= 10_000
        ):
            problems.append(
                {
                    "field": f"rework_steps[{i}].standard_minutes",
                    "problem": "a whole number of minutes from 1 to 10000",
                }
            )
        same_plan = item.get("same_plan", True)
        if not isinstance(same_plan, bool):
            problems.append({"field": f"rework_steps[{i}].same_plan", "problem": "true or false"})
        parsed.append(
            ReworkStep(
                name.strip(), wc, str(item.get("instructions") or ""), minutes, bool(same_plan)
            )
        )
    if problems:
        raise InvalidInput(f"The rework steps have {len(problems)} problem(s).", problems=problems)
    return parsed


def _snapshot_for(lot: Lot, held: LotStep, item: ReworkStep) -> tuple[dict[str, Any], list[Any]]:
    """Parameters and measurement plan of a rework step.

    The held step again: its own snapshot. Another step the lot's route has (a mask
    recoat): that step's snapshot. A rework-only step that measures what the held step
    measured (verify after repair): the held step's windows for those quantities.
    """

    if item.library_code is None:
        return (dict(held.parameters), list(held.plan)) if item.same_plan else ({}, [])
    if item.same_plan:
        return dict(held.parameters), list(held.plan)
    for s in LotStep.objects.filter(lot=lot, is_rework=False).order_by("position"):
        if base_code(s.code) == item.library_code:
            return dict(s.parameters), list(s.plan)

    d = library_of(lot.routing_revision).definition(item.library_code)
    plan = [m for m in held.plan if m.get("quantity") in d.measurements]
    return dict(d.parameters), plan


def _insert_rework(
    ncr: Nonconformance,
    lot: Lot,
    held: LotStep | None,
    items: list[ReworkStep],
    panels: list[str] | None,
) -> list[dict[str, Any]]:
    """Insert rework steps right after the held step, between the existing positions."""
    if held is None:
        raise Conflict(f"{ncr.number} names no lot step, so rework has nowhere to go.")
    after = held.position
    nxt = LotStep.objects.filter(lot=lot, position__gt=after).order_by("position").first()
    need = len(items)
    if nxt is None:
        end = after + 10 * (need + 1)
    else:
        end = nxt.position
        if end - after <= need:  # no room between: move the later steps along
            shift = 10 * math.ceil((need + 1) / 10)
            for later in (
                LotStep.objects.select_for_update(no_key=True)
                .filter(lot=lot, position__gt=after)
                .order_by("-position")
            ):
                later.position += shift
                later.save(update_fields=["position"])
            end += shift
    spacing = (end - after) // (need + 1)
    which = f" Rework panels {', '.join(panels)} only; the others wait." if panels else ""
    created: list[dict[str, Any]] = []
    for i, item in enumerate(items, start=1):
        params, plan = _snapshot_for(lot, held, item)
        if panels:
            params["rework_panels"] = list(panels)
        base = (
            item.instructions
            if item.library_code
            else item.instructions or f"Rework for {ncr.number}: {ncr.description}"
        )
        step = LotStep.objects.create(
            lot=lot,
            position=after + spacing * i,
            code=f"RW-{ncr.number}-{i}" + (f"-{item.library_code}" if item.library_code else ""),
            name=item.name,
            work_center=item.work_center or held.work_center,
            instructions=(f"Rework for {ncr.number}. {base}{which}")[:2000]
            if item.library_code
            else (base + which)[:2000],
            parameters=params,
            plan=plan,
            hazard=held.hazard
            if item.library_code is None
            else _hazard(lot, item.library_code, held),
            standard_minutes=item.standard_minutes or held.standard_minutes,
            is_rework=True,
            added_by_ncr=ncr,
        )
        created.append(
            {
                "lot_step": step.pk,
                "position": step.position,
                "name": step.name,
                "work_center": step.work_center.code,
            }
        )
    audit.record(
        actor=None,
        action="lot.rework_added",
        object_type="lot",
        object_id=lot.pk,
        after={"ncr": ncr.number, "after_position": after, "steps": created, "panels": panels},
    )
    return created


def _hazard(lot: Lot, code: str, held: LotStep) -> str:

    return library_of(lot.routing_revision).definition(code).hazard or ""


# --- scrap ------------------------------------------------------------------------------


def _scrap(
    ncr: Nonconformance,
    lot: Lot,
    held: LotStep | None,
    live: dict[int, Panel],
    panel_ids: set[int],
    person: Person,
    reason_code: str,
) -> dict[str, Any]:
    """Scrap the named live panels: all of them scraps the lot, some split off into a
    scrapped lot. Their good boards are recorded as scrap at the held step."""

    if held is not None:
        reason = floor.scrap_reason(reason_code or "other")
        good = floor.panel_good_boards([live[pk] for pk in panel_ids])
        records = [
            ScrapRecord(
                lot_step=held,
                panel_id=panel_id,
                job_id=job_id,
                boards=n,
                panel_scrapped=True,
                reason=reason,
                note=f"{ncr.number}: {ncr.disposition_note}"[:300],
                source=ScrapRecord.Source.DISPOSITION,
                ncr=ncr,
                recorded_by=person,
            )
            for (panel_id, job_id), n in sorted(good.items())
        ]
        ScrapRecord.objects.bulk_create(records)
    serials = sorted(live[pk].serial for pk in panel_ids)
    if panel_ids == set(live):
        Panel.objects.filter(pk__in=list(live)).update(scrapped=True)
        lot.status = Lot.Status.SCRAPPED
        lot.save(update_fields=["status"])
        audit.record(
            actor=None,
            action="lot.scrapped",
            object_type="lot",
            object_id=lot.pk,
            after={"ncr": ncr.number, "panels": serials},
        )
        return {"scrapped": "all", "scrapped_panels": serials}
    n = Lot.objects.filter(split_from=lot).count() + 1
    suffix = f"-S{n}"
    split = Lot.objects.create(
        code=lot.code[: 30 - len(suffix)] + suffix,
        routing_revision=lot.routing_revision,
        status=Lot.Status.SCRAPPED,
        priority=lot.priority,
        split_from=lot,
        panel_count=len(panel_ids),
        started_at=lot.started_at,
    )
    Panel.objects.filter(pk__in=list(panel_ids)).update(lot=split, scrapped=True)
    lot.panel_count = max(lot.panel_count - len(panel_ids), 0)
    lot.save(update_fields=["panel_count"])
    ncr.scrap_lot = split
    audit.record(
        actor=None,
        action="lot.split",
        object_type="lot",
        object_id=lot.pk,
        after={"ncr": ncr.number, "split_lot": split.code, "panels": serials, "status": "scrapped"},
    )
    return {"scrapped": "some", "split_lot": split.code, "scrapped_panels": serials}


# --- the use case -----------------------------------------------------------------------


def _panel_plan(
    live: dict[int, Panel],
    disposition: str,
    scrap_panel_ids: Any,
    panel_actions: Any,
) -> dict[int, str]:
    """Panel id -> action, from per-panel actions or the whole-lot decision."""
    by_serial = {p.serial.upper(): p.pk for p in live.values()}
    if panel_actions:
        if not isinstance(panel_actions, dict):
            raise InvalidInput(
                "panel_actions must map each live panel (serial or id) to use_as_is, rework "
                "or scrap."
            )
        plan: dict[int, str] = {}
        problems: list[dict[str, Any]] = []
        for key, action in panel_actions.items():
            pk = by_serial.get(str(key).strip().upper())
            if pk is None and str(key).isdigit() and int(key) in live:
                pk = int(key)
            if pk is None:
                problems.append(
                    {
                        "field": "panel_actions",
                        "value": key,
                        "problem": "not a live panel of this lot",
                        "allowed": sorted(p.serial for p in live.values()),
                    }
                )
                continue
            if action not in PANEL_ACTIONS:
                problems.append(
                    {
                        "field": f"panel_actions.{live[pk].serial}",
                        "value": action,
                        "problem": "unknown action",
                        "allowed": list(PANEL_ACTIONS),
                    }
                )
                continue
            if pk in plan and plan[pk] != action:
                problems.append(
                    {
                        "field": f"panel_actions.{live[pk].serial}",
                        "problem": f"given two actions ({plan[pk]} and {action}); choose one",
                    }
                )
            plan[pk] = action
        missing = sorted(live[pk].serial for pk in set(live) - set(plan))
        if missing:
            problems.append(
                {
                    "field": "panel_actions",
                    "value": missing,
                    "problem": "these live panels have no action; every panel needs one",
                    "allowed": list(PANEL_ACTIONS),
                }
            )
        if problems:
            raise InvalidInput(
                f"The per-panel decision has {len(problems)} problem(s); nothing was saved.",
                problems=problems,
            )
        return plan
    if disposition not in PANEL_ACTIONS:
        raise InvalidInput(
            f"Disposition {disposition!r} is not known; use one of {', '.join(PANEL_ACTIONS)}, "
            "or give an action per panel."
        )
    if scrap_panel_ids is not None:
        if disposition != SCRAP:
            raise InvalidInput("scrap_panel_ids apply only to a scrap disposition.")
        if (
            not isinstance(scrap_panel_ids, list | tuple | set)
            or not scrap_panel_ids
            or not all(isinstance(p, int) and not isinstance(p, bool) for p in scrap_panel_ids)
        ):
            raise InvalidInput(
                "scrap_panel_ids must be a non-empty list of panel ids "
                "(leave it out to scrap the whole lot)."
            )
        unknown = sorted(set(scrap_panel_ids) - set(live))
        if unknown:
            raise InvalidInput(
                f"Panel id(s) {unknown} are not live panels of this lot. Allowed: {sorted(live)}.",
                problems=[{"field": "scrap_panel_ids", "value": unknown, "allowed": sorted(live)}],
            )
        return {pk: (SCRAP if pk in set(scrap_panel_ids) else USE_AS_IS) for pk in live}
    return {pk: disposition for pk in live}


def disposition_ncr(
    person: Person,
    ncr_id: int,
    disposition: str,
    note: str,
    pin: str,
    scrap_panel_ids: list[int] | None = None,
    rework_steps: list[dict[str, Any]] | None = None,
    *,
    panel_actions: dict[str, str] | None = None,
    rework_route: list[str] | None = None,
    root_cause: str = "",
    corrective_action: str = "",
    scrap_reason: str = "",
) -> Nonconformance:
    """Decide what happens to a nonconforming lot (per panel if need be), e-sign it, and
    release its hold. Only this releases a hold. See the module docstring for the rules.

    `disposition` applies to every live panel unless `panel_actions` (panel serial ->
    use_as_is | rework | scrap) decides per panel. Rework runs `rework_route` (library
    step codes), or `rework_steps` (named steps), or the held step's library default.
    """

    _require_quality(person, "disposition a nonconformance")
    # A recording error (only when a correction brought the set back inside, see
    # Nonconformance.correction_note) keeps every panel as it is, like use as is.
    recording = disposition == Nonconformance.Disposition.RECORDING_ERROR
    if recording:
        disposition = USE_AS_IS
    note = (note or "").strip()
    if len(note) < 3:
        raise InvalidInput("A disposition needs a note (at least 3 characters) saying why.")
    cause = RootCause.objects.filter(code=(root_cause or "").strip(), active=True).first()
    corrective_action = (corrective_action or "").strip()
    problems: list[dict[str, Any]] = []
    if cause is None:
        allowed = list(RootCause.objects.filter(active=True).values_list("code", flat=True))
        problems.append(
            {
                "field": "root_cause",
                "value": root_cause,
                "problem": "choose the root cause from the site's list",
                "allowed": allowed,
            }
        )
    if len(corrective_action) < 3:
        problems.append(
            {
                "field": "corrective_action",
                "problem": "say what is done so it does not happen again (at least 3 characters)",
            }
        )
    if problems:
        raise InvalidInput(
            "The NCR needs its root cause and corrective action; nothing was saved.",
            problems=problems,
        )
    if rework_steps and rework_route:
        raise InvalidInput("Give either rework_route (library steps) or rework_steps, not both.")
    if not (pin or "").strip():
        raise InvalidInput("Enter your PIN to sign the disposition.")
    verify_pin(person, pin)
    with transaction.atomic():
        ncr = (
            Nonconformance.objects.select_for_update(no_key=True)
            .select_related("lot__routing_revision")
            .filter(pk=ncr_id)
            .first()
        )
        if ncr is None:
            raise NotFound(f"No nonconformance {ncr_id}.")
        if ncr.status != Nonconformance.Status.OPEN:
            raise Conflict(
                f"{ncr.number} was already dispositioned ({ncr.get_disposition_display().lower()})."
            )
        if recording and not ncr.correction_note:
            raise Conflict(
                f"{ncr.number} cannot be closed as a recording error: no correction has "
                "brought its set back inside. Use as is, rework or scrap it, or record the "
                "correction first."
            )
        held = (
            LotStep.objects.select_for_update(no_key=True)
            .select_related("lot__routing_revision")
            .get(pk=ncr.lot_step_id)
            if ncr.lot_step_id
            else None
        )
        lot = Lot.objects.select_for_update(no_key=True).get(pk=ncr.lot_id)
        live = {
            p.pk: p
            for p in Panel.objects.select_for_update(no_key=True).filter(lot=lot, scrapped=False)
        }
        plan = _panel_plan(live, disposition, scrap_panel_ids, panel_actions)
        actions = set(plan.values()) or {disposition}
        if (rework_steps or rework_route) and REWORK not in actions:
            raise InvalidInput("Rework steps apply only when some panels are reworked.")
        rework_ids = sorted(pk for pk, a in plan.items() if a == REWORK)
        scrap_ids = {pk for pk, a in plan.items() if a == SCRAP}
        items: list[ReworkStep] = []
        if rework_ids or (not live and disposition == REWORK):
            if rework_route:
                items = _library_route(held, rework_route)
            elif rework_steps:
                items = _parse_named_rework(rework_steps)
            else:
                items = _default_route(held)
        if scrap_ids:
            floor.scrap_reason(scrap_reason or "other")  # refuse an unknown reason early
        ncr.disposition_note = note
        detail: dict[str, Any] = {
            "panels": {live[pk].serial: a for pk, a in sorted(plan.items())},
        }
        if items:
            partial = len(rework_ids) < len(live)
            detail["rework_steps"] = _insert_rework(
                ncr,
                lot,
                held,
                items,
                sorted(live[pk].serial for pk in rework_ids) if partial else None,
            )
        if scrap_ids:
            detail.update(_scrap(ncr, lot, held, live, scrap_ids, person, scrap_reason))
        now = timezone.now()
        ncr.disposition = actions.pop() if len(actions) == 1 else MIXED
        if recording:
            ncr.disposition = Nonconformance.Disposition.RECORDING_ERROR
        ncr.dispositioned_at = now
        ncr.status = Nonconformance.Status.CLOSED
        ncr.root_cause = cause
        ncr.corrective_action = corrective_action[:2000]
        ncr.panel_actions = detail["panels"]
        content = {
            "number": ncr.number,
            "lot": lot.code,
            "disposition": ncr.disposition,
            "note": note,
            "root_cause": cause.code if cause else "",
            "corrective_action": ncr.corrective_action,
            **detail,
        }
        sig = audit.sign(
            person=person,
            meaning="dispositioned_by",
            record_type="ncr",
            record_id=ncr.pk,
            content=content,
        )
        ncr.disposition_signature = sig
        ncr.save()
        holds = list(
            Hold.objects.select_for_update(no_key=True).filter(ncr=ncr, released_at__isnull=True)
        )
        Hold.objects.filter(pk__in=[h.pk for h in holds]).update(released_at=now)
        Alert.objects.filter(Q(hold__in=holds) | Q(ncr=ncr), closed_at__isnull=True).update(
            closed_at=now
        )
        still_held = Hold.objects.filter(lot=lot, released_at__isnull=True).exists()
        if lot.on_hold and not still_held:
            lot.on_hold = False
            lot.save(update_fields=["on_hold"])
        audit.record(
            actor=person.user,
            action="ncr.dispositioned",
            object_type="ncr",
            object_id=ncr.pk,
            before={"status": "open"},
            after={
                **content,
                "signature": sig.pk,
                "holds_released": [h.pk for h in holds],
                "lot_on_hold": lot.on_hold,
            },
        )
        return ncr
