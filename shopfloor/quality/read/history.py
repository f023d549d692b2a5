"""A lot's full history (timeline) and genealogy both ways, read for quality engineers.

Traceability claim (from memory of IPC-1782, not checked against the standard's text):
IPC-1782 grades traceability in levels M1-M4 for materials and P1-P4 for process, the
higher levels (3 and 4) needing records per unit or per panel. This service records
material lots and process data (work center, equipment, operators, start and finish
times, every reading with its window and the window's source, signatures) per *lot*,
and maps each panel to its lot and its jobs; a panel inherits its lot's records. That
matches material level M2 and process level P2, and no higher: nothing here is recorded
per individual board. `TRACEABILITY_FIELDS` names what each claim relies on, and a test
checks that the JSON history carries those fields.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from django.db.models import Avg, Count, Max, Min, Prefetch, Q

from routing.builder.labels import quantity_label
from shopfloor.access import Scope, require_lot_visible
from shopfloor.audit.models import AuditEntry, Signature
from shopfloor.core import judging
from shopfloor.core.judging import describe_window
from shopfloor.errors import NotFound
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Job, Lot, MaterialLot, Panel, PanelImage
from shopfloor.quality.models import Alert, Hold, Nonconformance

TRACEABILITY_CLAIM = {
    "material": "M2",
    "process": "P2",
    "basis": "from memory of IPC-1782: levels 3-4 need per-unit or per-panel records; "
    "this service keeps material and process records per lot and maps panels to lots and jobs",
}
TRACEABILITY_FOOTER = (
    "Traceability: material level M2, process level P2 (IPC-1782, from memory): material "
    "lots and process records are kept per lot; panels map to lots and jobs; nothing is "
    "recorded per individual board."
)
# The fields of the JSON history each claimed level relies on (test: tests/history).
TRACEABILITY_FIELDS = {
    "M2": {
        "lot": ["code", "routing_revision", "panels", "jobs", "split_from"],
        "step": ["material_lots"],
        "material_lot": ["code", "kind", "supplier_lot", "received_on"],
    },
    "P2": {
        "step": [
            "code",
            "name",
            "work_center",
            "equipment",
            "started_at",
            "started_by",
            "completed_at",
            "completed_by",
            "status",
            "signature",
        ],
        "reading": [
            "quantity",
            "value",
            "unit",
            "window",
            "source",
            "in_window",
            "operator",
            "equipment",
            "captured_at",
        ],
    },
}
MAX_RANGE_DAYS = 400
SEARCH_LIMIT = 200


def _iso(value: dt.datetime | dt.date | None) -> str | None:
    return value.isoformat() if value else None


@dataclass
class TimelineEvent:
    at: dt.datetime
    kind: str
    title: str
    detail: str = ""
    who: str = ""
    superseded: bool = False


@dataclass
class LotHistory:
    lot: Lot
    jobs: list[Job]
    panels: list[Panel]
    steps: list[LotStep]
    readings: list[Reading]
    signatures: list[Signature]
    holds: list[Hold]
    alerts: list[Alert]
    ncrs: list[Nonconformance]
    moves: list[AuditEntry]
    splits: list[Lot]
    timeline: list[TimelineEvent] = field(default_factory=list)
    # step id -> per-quantity aggregates, for steps summarised on the page (see below)
    summaries: dict[int, list[dict[str, Any]]] = field(default_factory=dict)

    @property
    def standards(self) -> list[str]:
        """Every window source the lot's readings were judged against."""
        sources = {str(r.window.get("source")) for r in self.readings if r.window.get("source")}
        for step_id in self.summaries:
            step = next((s for s in self.steps if s.pk == step_id), None)
            for m in step.plan if step else []:
                if m.get("source"):
                    sources.add(str(m["source"]))
        return sorted(sources)


def find_lot_for(scope: Scope, code: str) -> Lot:
    """The lot with this code if the reader may see it (404 / 403 with a message)."""
    code = (code or "").strip()
    lot = (
        Lot.objects.select_related("routing_revision__part_revision__part__customer", "split_from")
        .with_code(code)
        .first()
    )
    if lot is None:
        raise NotFound(f"No lot with code {code!r}. Check the traveller code or search.")
    require_lot_visible(scope, lot)
    return lot


def _person(p: Any) -> str:
    return f"{p.printed_name} ({p.badge_number})" if p else ""


def lot_history(scope: Scope, code: str, *, full_readings: bool = True) -> LotHistory:
    """Every record of one lot, read in a fixed number of queries, plus its timeline.

    With full_readings=False (the HTML page) a step with more than READING_EVENTS_PER_STEP
    readings loads only its notable readings (out of window, superseded, corrections) and
    per-quantity aggregates computed by the database; JSON and PDF exports load them all.
    """
    lot = find_lot_for(scope, code)
    readings_qs = Reading.objects.select_related("operator", "equipment").order_by(
        "recorded_at", "pk"
    )
    summaries: dict[int, list[Any]] = {}
    if not full_readings:
        counts = (
            Reading.objects.filter(lot_step__lot=lot)
            .order_by()
            .values("lot_step_id")
            .annotate(n=Count("id"))
        )
        big = [c["lot_step_id"] for c in counts if c["n"] > READING_EVENTS_PER_STEP]
        if big:
            readings_qs = readings_qs.filter(
                ~Q(lot_step_id__in=big)
                | Q(in_window=False)
                | Q(superseded_by__isnull=False)
                | Q(via="correction")
            )
            for row in (
                Reading.objects.filter(lot_step_id__in=big, superseded_by__isnull=True)
                .order_by()
                .values("lot_step_id", "quantity", "unit")
                .annotate(
                    n=Count("id"),
                    lo=Min("value"),
                    hi=Max("value"),
                    mean=Avg("value"),
                    out=Count("id", filter=Q(in_window=False)),
                    last=Max("captured_at"),
                )
            ):
                summaries.setdefault(row["lot_step_id"], []).append(row)
    steps = list(
        LotStep.objects.filter(lot=lot)
        .select_related("work_center", "equipment", "started_by", "completed_by", "signature")
        .prefetch_related("material_lots", Prefetch("readings", queryset=readings_qs))
        .order_by("position")
    )
    readings = [r for s in steps for r in s.readings.all()]
    panels = list(
        Panel.objects.filter(lot=lot).prefetch_related(
            Prefetch("images", queryset=PanelImage.objects.select_related("job"))
        )
    )
    jobs = list(
        Job.objects.filter(images__panel__lot=lot)
        .distinct()
        .select_related("part_revision__part__customer")
        .order_by("number")
    )
    holds = list(Hold.objects.filter(lot=lot).select_related("ncr").order_by("opened_at"))
    alerts = list(Alert.objects.filter(lot=lot).order_by("created_at"))
    ncrs = list(
        Nonconformance.objects.filter(lot=lot)
        .select_related("disposition_signature")
        .prefetch_related("readings")
        .order_by("opened_at")
    )
    step_ids = [str(s.pk) for s in steps]
    sig_ids = [n.disposition_signature_id for n in ncrs if n.disposition_signature_id]
    signatures = list(
        Signature.objects.filter(
            Q(record_type="lot_step", record_id__in=step_ids)
            | Q(pk__in=sig_ids)
            | Q(record_type="lot", record_id=str(lot.pk))
        ).order_by("signed_at")
    )
    moves = list(
        AuditEntry.objects.filter(
            object_type="lot", object_id=str(lot.pk), action="lot.moved_revision"
        ).order_by("seq")
    )
    splits = list(Lot.objects.filter(split_from=lot).order_by("code"))
    history = LotHistory(
        lot, jobs, panels, steps, readings, signatures, holds, alerts, ncrs, moves, splits
    )
    history.summaries = summaries
    history.timeline = _timeline(history)
    return history


def _timeline(h: LotHistory) -> list[TimelineEvent]:
    ev: list[TimelineEvent] = [
        TimelineEvent(
            h.lot.created_at, "lot", f"Lot {h.lot.code} created", f"{h.lot.panel_count} panel(s)"
        )
    ]
    if h.lot.split_from is not None:
        ev.append(
            TimelineEvent(h.lot.created_at, "split", f"Split from lot {h.lot.split_from.code}")
        )
    for child in h.splits:
        ev.append(TimelineEvent(child.created_at, "split", f"Lot {child.code} split off"))
    for s in h.steps:
        where = s.work_center.name
        materials = ", ".join(m.code for m in s.material_lots.all())
        extra = []
        if s.equipment:
            extra.append(f"equipment {s.equipment.code}")
        if materials:
            extra.append(f"material lots {materials}")
        if s.arrived_at:
            ev.append(TimelineEvent(s.arrived_at, "arrived", f"Arrived at {s.name}", where))
        if s.started_at:
            ev.append(
                TimelineEvent(
                    s.started_at,
                    "step",
                    f"Started {s.name}",
                    "; ".join([where, *extra]),
                    _person(s.started_by),
                )
            )
        if s.completed_at:
            ev.append(
                TimelineEvent(
                    s.completed_at,
                    "step",
                    f"Completed {s.name}",
                    "; ".join([where, *extra]),
                    _person(s.completed_by),
                )
            )
        if s.queue_warning_released_reason:
            ev.append(
                TimelineEvent(
                    s.arrived_at or h.lot.created_at,
                    "queue",
                    f"Queue-time warning released at {s.name}",
                    s.queue_warning_released_reason,
                )
            )
        ev.extend(_reading_events(s, h.summaries.get(s.pk)))
    for sig in h.signatures:
        ev.append(
            TimelineEvent(
                sig.signed_at,
                "signature",
                f"Signed: {sig.get_meaning_display()}",
                f"{sig.record_type} {sig.record_id}",
                sig.printed_name,
            )
        )
    for hold in h.holds:
        ev.append(TimelineEvent(hold.opened_at, "hold", "Hold opened", hold.reason))
        if hold.released_at:
            ev.append(TimelineEvent(hold.released_at, "hold", "Hold released"))
    for a in h.alerts:
        ev.append(TimelineEvent(a.created_at, "alert", f"Alert: {a.get_kind_display()}", a.message))
    for n in h.ncrs:
        ev.append(TimelineEvent(n.opened_at, "ncr", f"NCR {n.number} opened", n.description))
        if n.dispositioned_at:
            ev.append(
                TimelineEvent(
                    n.dispositioned_at,
                    "disposition",
                    f"NCR {n.number} dispositioned: {n.get_disposition_display()}",
                    n.disposition_note,
                    n.disposition_signature.printed_name if n.disposition_signature else "",
                )
            )
    for m in h.moves:
        after = m.after or {}
        ev.append(
            TimelineEvent(
                m.at,
                "moved",
                "Moved to another routing revision",
                f"from revision {(m.before or {}).get('routing_revision')} to "
                f"{after.get('routing_revision')}: {after.get('reason', '')}",
                m.actor_name,
            )
        )
    ev.sort(key=lambda e: e.at)
    return ev


# A step with more readings than this shows, on the page, one summary line per quantity
# plus every out-of-window, superseded or corrected reading; the CSV export and the JSON
# history always carry every reading. Keeps a 20,000-reading lot readable and fast.
READING_EVENTS_PER_STEP = 40


def _reading_event(r: Reading, step: LotStep) -> TimelineEvent:
    verdict = "in window" if r.in_window else "OUT OF WINDOW"
    detail = f"{describe_window(r.window)}; source: {r.window.get('source', 'none')}; {verdict}"
    if r.set_verdict:
        state = "inside" if r.set_verdict.get("in_window") else "OUTSIDE"
        detail += f"; sample set {state}: {r.set_verdict.get('message', '')}"
    if r.confirmation:
        detail += f"; confirmed as entered: {r.confirmation}"
    if r.superseded_by_id:
        detail += f"; SUPERSEDED (reason: {r.correction_reason})"
    shown = judging.for_people(r.quantity, r.value, r.unit)
    return TimelineEvent(
        r.captured_at,
        "reading",
        f"{quantity_label(r.quantity)} sample {r.sample_index} = {shown} at {step.name}",
        detail,
        _person(r.operator),
        superseded=bool(r.superseded_by_id),
    )


def _reading_events(
    step: LotStep, summary: list[dict[str, Any]] | None = None
) -> list[TimelineEvent]:
    """One event per reading, or for a summarised step the notable readings (already the
    only ones loaded) plus one line per quantity from the database aggregates."""
    events = [_reading_event(r, step) for r in step.readings.all()]
    plan = {g.quantity: g.window() for g in judging.group_plan(step.plan)}
    for row in summary or []:
        window = plan.get(row["quantity"], {"unit": row["unit"]})
        out = row["out"]
        events.append(
            TimelineEvent(
                row["last"],
                "reading",
                f"{row['n']} {quantity_label(row['quantity'])} readings at {step.name}: "
                f"{judging.for_people(row['quantity'], row['lo'], symbol=False)} to "
                f"{judging.for_people(row['quantity'], row['hi'], row['unit'])}, mean "
                f"{judging.for_people(row['quantity'], row['mean'], row['unit'])}",
                f"{describe_window(window)}; source: {window.get('source', 'none')}; "
                + ("all in window" if not out else f"{out} OUT OF WINDOW (listed)")
                + "; every reading is in the CSV export",
            )
        )
    return events


def _material(m: MaterialLot) -> dict[str, Any]:
    return {
        "code": m.code,
        "kind": m.kind,
        "description": m.description,
        "supplier_lot": m.supplier_lot,
        "received_on": _iso(m.received_on),
        "expires_on": _iso(m.expires_on),
    }


def _reading(r: Reading) -> dict[str, Any]:
    return {
        "id": r.pk,
        "quantity": r.quantity,
        "value": r.value,
        "unit": r.unit,
        "entered_value": r.entered_value,
        "entered_unit": r.entered_unit,
        "sample_index": r.sample_index,
        "position": r.position,
        "window": r.window,
        "source": r.window.get("source"),
        "in_window": r.in_window,
        "operator": _person(r.operator),
        "equipment": r.equipment.code if r.equipment else None,
        "captured_at": _iso(r.captured_at),
        "recorded_at": _iso(r.recorded_at),
        "superseded_by": r.superseded_by_id,
        "correction_reason": r.correction_reason,
        "via": r.via,
    }


def history_dict(h: LotHistory) -> dict[str, Any]:
    """The JSON form of a lot history (the API and the CSV/PDF read the same data)."""
    lot = h.lot
    rev = lot.routing_revision
    return {
        "lot": {
            "code": lot.code,
            "status": lot.status,
            "on_hold": lot.on_hold,
            "panel_count": lot.panel_count,
            "created_at": _iso(lot.created_at),
            "started_at": _iso(lot.started_at),
            "completed_at": _iso(lot.completed_at),
            "routing_revision": {
                "id": rev.pk,
                "number": rev.number,
                "ipc_class": rev.ipc_class,
                "finish": (rev.build_spec or {}).get("finish"),
            },
            "split_from": lot.split_from.code if lot.split_from is not None else None,
            "splits": [c.code for c in h.splits],
            "panels": [
                {
                    "serial": p.serial,
                    "scrapped": p.scrapped,
                    "jobs": [{"job": i.job.number, "images": i.count} for i in p.images.all()],
                }
                for p in h.panels
            ],
            "jobs": [
                {
                    "number": j.number,
                    "part_number": j.part_revision.part.number,
                    "part_revision": j.part_revision.revision,
                    "customer": j.part_revision.part.customer.code,
                    "quantity": j.quantity,
                    "due_date": _iso(j.due_date),
                    "ipc_class": j.ipc_class,
                }
                for j in h.jobs
            ],
        },
        "steps": [
            {
                "position": s.position,
                "code": s.code,
                "name": s.name,
                "status": s.status,
                "work_center": s.work_center.code,
                "is_rework": s.is_rework,
                "equipment": s.equipment.code if s.equipment else None,
                "arrived_at": _iso(s.arrived_at),
                "started_at": _iso(s.started_at),
                "started_by": _person(s.started_by),
                "completed_at": _iso(s.completed_at),
                "completed_by": _person(s.completed_by),
                "material_lots": [_material(m) for m in s.material_lots.all()],
                "signature": (
                    {
                        "meaning": s.signature.meaning,
                        "printed_name": s.signature.printed_name,
                        "signed_at": _iso(s.signature.signed_at),
                    }
                    if s.signature
                    else None
                ),
                "queue_warning_released_reason": s.queue_warning_released_reason,
                "readings": [_reading(r) for r in s.readings.all()],
            }
            for s in h.steps
        ],
        "signatures": [
            {
                "meaning": s.meaning,
                "meaning_text": s.get_meaning_display(),
                "printed_name": s.printed_name,
                "signed_at": _iso(s.signed_at),
                "record_type": s.record_type,
                "record_id": s.record_id,
                "record_hash": s.record_hash,
            }
            for s in h.signatures
        ],
        "holds": [
            {"reason": x.reason, "opened_at": _iso(x.opened_at), "released_at": _iso(x.released_at)}
            for x in h.holds
        ],
        "alerts": [
            {
                "kind": a.kind,
                "severity": a.severity,
                "message": a.message,
                "created_at": _iso(a.created_at),
                "closed_at": _iso(a.closed_at),
            }
            for a in h.alerts
        ],
        "ncrs": [
            {
                "number": n.number,
                "status": n.status,
                "description": n.description,
                "disposition": n.disposition,
                "disposition_note": n.disposition_note,
                "dispositioned_at": _iso(n.dispositioned_at),
                "readings": [r.pk for r in n.readings.all()],
            }
            for n in h.ncrs
        ],
        "moves": [
            {"at": _iso(m.at), "by": m.actor_name, "before": m.before, "after": m.after}
            for m in h.moves
        ],
        "timeline": [
            {
                "at": _iso(e.at),
                "kind": e.kind,
                "title": e.title,
                "detail": e.detail,
                "who": e.who,
                "superseded": e.superseded,
            }
            for e in h.timeline
        ],
        "standards": h.standards,
        "traceability": TRACEABILITY_CLAIM,
    }
