"""Tablet views: thin; parse the form, call one service, render the result.

Every state-changing POST runs through `idempotency.run` with the key the page made
when the reading was taken, so a tablet that retries on flaky Wi-Fi never records twice;
a repeat renders the stored outcome. Refusals from the services (DomainError) are shown
inline with their status; a person who may not use a page gets the 403 page saying why.
"""

from __future__ import annotations

import json
import uuid
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from django.conf import settings
from django.contrib import messages
from django.contrib.auth import login, logout
from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.core.serializers.json import DjangoJSONEncoder
from django.db.models import Exists, OuterRef
from django.db.models.functions import Upper
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.translation import gettext
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from shopfloor import access as read_scope
from shopfloor import throttle
from shopfloor.api_base import problems_from
from shopfloor.core import entry as entry_words
from shopfloor.core import judging, units
from shopfloor.errors import DomainError, InvalidInput, NotFound
from shopfloor.floor import (
    batch,
    csv_upload,
    forms,
    idempotency,
    preferences,
    services,
    traveller,
    words,
)
from shopfloor.floor.models import (
    AcceptedQuantity,
    LotStep,
    MaterialUse,
    Reading,
    ScrapReason,
    ScrapRecord,
)
from shopfloor.floor.permissions import FLOOR_ROLES, check_work_center, roles_of
from shopfloor.floor.quantities import lot_good_boards
from shopfloor.floor.serializers import batch_items
from shopfloor.htmx import is_htmx
from shopfloor.plant import people
from shopfloor.plant.models import Equipment, Job, Lot, PanelImage, Person, WorkCenter
from shopfloor.quality.read import records

# --- login --------------------------------------------------------------------------


@require_http_methods(["GET", "POST"])
def login_view(request: HttpRequest) -> HttpResponse:
    error = ""
    status = 200
    retry_after = 0
    if request.method == "POST":
        try:
            person = people.badge_login(
                request.POST.get("badge", ""),
                request.POST.get("pin", ""),
                client_ip=throttle.client_ip(request),
            )
        except throttle.Throttled as exc:
            error, status, retry_after = exc.detail, exc.status, exc.retry_after
        except DomainError as exc:
            error, status = exc.detail, 400
        else:
            login(request, person.user, backend="django.contrib.auth.backends.ModelBackend")
            target = request.GET.get("next") or ""
            # Only follow local paths, never another host.
            if not target.startswith("/") or target.startswith("//"):
                target = reverse("floor:work_centers")
            return redirect(target)
    idle = request.GET.get("idle") == "1"
    response = render(request, "floor/login.html", {"error": error, "idle": idle}, status=status)
    if retry_after:
        response["Retry-After"] = str(retry_after)
    return response


@require_POST
def logout_view(request: HttpRequest) -> HttpResponse:
    """POST with the CSRF token only: a GET from another site (an image tag) must not end
    a tablet's session."""
    logout(request)
    return redirect("floor:login")


@login_required
@require_http_methods(["GET", "POST"])
def language(request: HttpRequest) -> HttpResponse:
    """The person picks the language of the tablet pages and the traveller."""
    person = _person(request)
    if request.method == "POST":
        try:
            preferences.set_language(person, request.POST.get("language", ""))
        except DomainError as exc:
            return render(
                request,
                "floor/language.html",
                {"person": person, "error": exc.detail, "languages": settings.LANGUAGES},
                status=exc.status,
            )
        return redirect("floor:work_centers")
    return render(
        request, "floor/language.html", {"person": person, "languages": settings.LANGUAGES}
    )


# --- reads (scoped by the person) ---------------------------------------------------


def _person(request: HttpRequest) -> Person:
    try:
        return people.person_for(request.user)
    except DomainError as exc:
        raise PermissionDenied(exc.detail) from exc


def _work_center_for(person: Person, code: str) -> WorkCenter:
    wc = WorkCenter.objects.filter(code=code).first()
    if wc is None:
        raise PermissionDenied(f"There is no work center {code!r}.")
    if not person.work_centers.filter(pk=wc.pk).exists():
        raise PermissionDenied(
            f"{person.printed_name} is not linked to {wc.name}, so its queue is not shown "
            "here. Ask a supervisor to add you to this work center."
        )
    return wc


@dataclass
class QueueRow:
    step: LotStep
    jobs: list[str] = field(default_factory=list)
    due: Any = None
    ipc_class: int | None = None

    @property
    def step_name(self) -> str:
        return words.step_name(self.step.name)


def _queue(wc: WorkCenter) -> list[QueueRow]:
    """Lot steps waiting here: each lot's first open step, if that step is at this center."""
    earlier_open = LotStep.objects.filter(
        lot=OuterRef("lot"), position__lt=OuterRef("position")
    ).open()
    steps = list(
        LotStep.objects.filter(work_center=wc)
        .open()
        .filter(lot__status__in=Lot.ACTIVE_STATUSES)
        .exclude(Exists(earlier_open))
        .select_related("lot")
        .order_by("queue_priority", "lot__priority", "arrived_at", "lot__code")
    )
    rows = {s.lot_id: QueueRow(step=s) for s in steps}

    for lot_id, number, due, ipc in (
        PanelImage.objects.filter(panel__lot_id__in=rows)
        .values_list("panel__lot_id", "job__number", "job__due_date", "job__ipc_class")
        .distinct()
    ):
        row = rows[lot_id]
        if number not in row.jobs:
            row.jobs.append(number)
        row.due = due if row.due is None or due < row.due else row.due
        row.ipc_class = ipc if row.ipc_class is None else max(row.ipc_class, ipc)
    return [rows[s.lot_id] for s in steps]


@login_required
@require_GET
def work_centers(request: HttpRequest) -> HttpResponse:
    person = _person(request)
    centers = list(person.work_centers.order_by("code"))
    for wc in centers:
        wc.display_name = words.library_text(wc.name)  # type: ignore[attr-defined]
    return render(request, "floor/work_centers.html", {"centers": centers, "person": person})


@login_required
@require_GET
def queue(request: HttpRequest, code: str) -> HttpResponse:
    person = _person(request)
    wc = _work_center_for(person, code)
    request.session["work_center"] = wc.code
    return render(
        request,
        "floor/queue.html",
        {"wc": wc, "wc_name": words.library_text(wc.name), "rows": _queue(wc)},
    )


# --- the lot page ---------------------------------------------------------------------


@dataclass
class SampleRow:
    step: LotStep
    measurement: dict[str, Any]
    sample_index: int
    current: Reading | None
    history: list[Reading]
    equipment: list[Equipment]
    error: str = ""
    entered: dict[str, Any] = field(default_factory=dict)
    # The typo guard's question when the value needs confirming (the row offers Confirm).
    confirm: str = ""
    # Lines for the running set figure ("mean so far 26.2 µm, needs ≥ 25 µm"), sent with
    # a row so the measurement's summary refreshes when one sample is recorded (htmx oob).
    running: list[str] | None = None
    # The unit and gauge this person last recorded the quantity with (preferences).
    last: dict[str, Any] = field(default_factory=dict)

    @property
    def quantity(self) -> str:
        return str(self.measurement["quantity"])

    @property
    def running_id(self) -> str:
        return f"run-{self.step.pk}-{self.quantity}"

    @property
    def stored_text(self) -> str:
        """The stored value rounded to the quantity's resolution (stored exactly)."""
        if self.current is None:
            return ""
        return judging.for_people(self.quantity, self.current.value, self.current.unit)

    @property
    def row_id(self) -> str:
        return f"r-{self.step.pk}-{self.quantity}-{self.sample_index}"

    @property
    def units(self) -> list[str]:
        """The units the form offers: only the quantity's own dimension (none for counts)."""
        try:
            offered = units.entry_units(self.quantity)
        except units.UnitError:
            offered = [str(self.measurement.get("unit", ""))]
        if self.current is not None and self.current.entered_unit not in offered and offered:
            offered.append(self.current.entered_unit)  # a correction keeps the stored unit
        return offered

    @property
    def unit(self) -> str:
        """The unit selected: what was typed, else the reading's, else the person's last."""
        offered = self.units
        for choice in (
            self.entered.get("unit"),
            self.current.entered_unit if self.current is not None else None,
            self.last.get("unit"),
        ):
            if choice and choice in offered:
                return str(choice)
        return offered[0] if offered else ""

    @property
    def gauge(self) -> str:
        """The gauge selected (its id as text): what was typed, else the person's last."""
        if self.entered.get("equipment"):
            return str(self.entered["equipment"])
        last = self.last.get("equipment")
        ids = {e.pk for e in self.equipment if e.is_gauge and e.calibration_current()}
        return str(last) if last in ids else ""

    @property
    def defectives(self) -> bool:
        """Recorded as "failed k of n tested" (the value is k; n is asked beside it)."""
        return self.quantity in units.DEFECTIVES_QUANTITIES

    @property
    def default_tested(self) -> int:
        """The n offered for a "k of n" row: the lot's good boards now."""

        return sum(lot_good_boards(self.step.lot).values())

    @property
    def failed_text(self) -> str:
        """'2 of 48 boards failed (4.2 %)' for a recorded "k of n" reading."""
        r = self.current
        if r is None or not r.tested:
            return ""
        return f"{r.value:g} of {r.tested} boards failed ({100 * r.value / r.tested:.1f} %)"


@dataclass
class PlanItem:
    measurement: dict[str, Any]
    window_text: str
    source: str
    rows: list[SampleRow]
    running: list[str] = field(default_factory=list)
    # The window in each other unit the form offers: [(unit, words)], shown for the
    # unit selected (floor/entry.js), so "≥ 25 µm" also reads "≥ 0.98 mil".
    window_in: list[tuple[str, str]] = field(default_factory=list)

    @property
    def running_id(self) -> str:
        return self.rows[0].running_id if self.rows else ""

    @property
    def quantity(self) -> str:
        return str(self.measurement["quantity"])

    @property
    def label(self) -> str:
        return words.quantity_label(self.quantity)

    @property
    def unit(self) -> str:
        """The unit the first empty sample offers (the window line follows it)."""
        empty = [r for r in self.rows if r.current is None]
        return (empty or self.rows)[0].unit if self.rows else ""


def _equipment(step: LotStep) -> list[Equipment]:
    return list(Equipment.objects.filter(work_center_id=step.work_center_id).order_by("code"))


def _readings_by_sample(step: LotStep) -> dict[tuple[str, int], list[Reading]]:
    grouped: dict[tuple[str, int], list[Reading]] = {}
    for r in (
        Reading.objects.filter(lot_step=step)
        .select_related("equipment", "operator")
        .order_by("recorded_at", "pk")
    ):
        grouped.setdefault((r.quantity, r.sample_index), []).append(r)
    return grouped


def _sample_row(
    step: LotStep,
    m: dict[str, Any],
    sample: int,
    readings: list[Reading],
    equipment: list[Equipment],
    **extra: Any,
) -> SampleRow:
    current = next((r for r in reversed(readings) if r.superseded_by_id is None), None)
    history = [r for r in readings if r.superseded_by_id is not None]
    return SampleRow(
        step=step,
        measurement=m,
        sample_index=sample,
        current=current,
        history=history,
        equipment=equipment,
        **extra,
    )


def _running(step: LotStep, group: judging.QuantityPlan, readings: list[Reading]) -> list[str]:
    values = {r.sample_index: r.value for r in readings if r.superseded_by_id is None}
    return entry_words.running_text(values, group.set_entries, group.samples, words.speech())


def _window_in_units(group: judging.QuantityPlan) -> list[tuple[str, str]]:
    say = words.speech()
    try:
        offered = units.entry_units(group.quantity)
    except units.UnitError:
        return []
    return [
        (u, entry_words.describe_criteria(group.entries, u, say))
        for u in offered
        if u != entry_words.unit_symbol(group.quantity)
    ]


def _of_quantity(grouped: dict[tuple[str, int], list[Reading]], quantity: str) -> list[Reading]:
    return [r for (q, _), rs in grouped.items() if q == quantity for r in rs]


def _plan(step: LotStep, person: Person | None = None) -> list[PlanItem]:
    equipment = _equipment(step)
    grouped = _readings_by_sample(step)
    items = []
    for group in judging.group_plan(step.plan):
        m = group.window()
        last = preferences.defaults_for(person, group.quantity)
        rows = [
            _sample_row(step, m, s, grouped.get((group.quantity, s), []), equipment, last=last)
            for s in range(1, group.samples + 1)
        ]
        items.append(
            PlanItem(
                measurement=m,
                window_text=entry_words.describe_criteria(group.entries, say=words.speech()),
                window_in=_window_in_units(group),
                source="; ".join(dict.fromkeys(traveller.window_source(e) for e in group.entries)),
                rows=rows,
                running=_running(
                    step,
                    group,
                    [r for rs in grouped.values() for r in rs if r.quantity == group.quantity],
                ),
            )
        )
    return items


def _single_row(
    step: LotStep, quantity: str, sample: int, person: Person | None = None, **extra: Any
) -> SampleRow | None:
    group = next((g for g in judging.group_plan(step.plan) if g.quantity == quantity), None)
    if group is None:
        return None
    extra.setdefault("last", preferences.defaults_for(person, quantity))
    readings = list(
        Reading.objects.filter(lot_step=step, quantity=quantity)
        .select_related("equipment", "operator")
        .order_by("recorded_at", "pk")
    )
    extra.setdefault("running", _running(step, group, readings))
    return _sample_row(
        step,
        group.window(),
        sample,
        [r for r in readings if r.sample_index == sample],
        _equipment(step),
        **extra,
    )


def _step_records(lot: Lot, step: LotStep | None) -> dict[str, Any]:
    """Materials, scrap and accepted quantities of the current step, for the tablet."""

    if step is None:
        return {}
    uses = list(MaterialUse.objects.filter(lot_step=step).select_related("material_lot"))
    kinds = [
        {
            "kind": kind,
            "label": services.material_label(kind),
            "used": [u.material_lot for u in uses if u.kind == kind],
        }
        for kind in step.materials or []
    ]
    choices = services.usable_material_lots(step) if step.materials else {}
    good = services.lot_good_boards(lot)
    jobs = {j.pk: j for j in Job.objects.filter(pk__in=list(good))}
    accepted = {a.job_id: a.boards for a in AcceptedQuantity.objects.filter(lot_step=step)}
    return {
        "material_kinds": kinds,
        "material_choices": [
            (services.material_label(kind), options) for kind, options in choices.items()
        ],
        "live_panels": list(lot.panels.filter(scrapped=False).order_by("serial")),
        "scrap_reasons": list(ScrapReason.objects.filter(active=True)),
        "step_scrap": list(
            ScrapRecord.objects.filter(lot_step=step).select_related("panel", "reason")
        ),
        "final_inspection": services.is_final_inspection(step),
        "acceptance": [
            {"job": jobs[job_id], "good": n, "accepted": accepted.get(job_id)}
            for job_id, n in sorted(good.items(), key=lambda kv: jobs[kv[0]].number)
        ],
    }


def _lot_context(lot: Lot, person: Person) -> dict[str, Any]:
    lot.refresh_from_db()
    data = traveller.traveller_data(lot)
    step = LotStep.objects.current_for(lot)
    for s in data.steps:  # names from the library, in the person's language when known
        s.display_name = words.step_name(s.name)  # type: ignore[attr-defined]
        s.display_center = words.library_text(s.work_center.name)  # type: ignore[attr-defined]
    return {
        **_step_records(lot, step),
        "lot": lot,
        "person": person,
        "jobs": data.jobs,
        "route": data.steps,
        "step": step,
        "step_name": words.step_name(step.name) if step else "",
        "step_center": words.library_text(step.work_center.name) if step else "",
        "step_hazard": words.library_text(step.hazard) if step else "",
        "step_params": words.parameter_rows(step.parameters) if step else [],
        "plan": _plan(step, person) if step else [],
        "equipment": _equipment(step) if step else [],
        "holds": list(lot.holds.filter(released_at__isnull=True).order_by("opened_at")),
        "qr_svg": traveller.qr_svg(lot.code),
        "part_revision": lot.routing_revision.part_revision,
    }


def _lot_or_none(code: str) -> Lot | None:
    return (
        Lot.objects.select_related("routing_revision__part_revision__part").with_code(code).first()
    )


def _missing_lot(request: HttpRequest, code: str) -> HttpResponse:
    return render(
        request,
        "floor/scan.html",
        {
            "error": gettext(
                "No lot with code {code}. Check the traveller label and scan again."
            ).format(code=repr(code)),
            "code": code,
        },
        status=404,
    )


def _require_readable(request: HttpRequest, lot: Lot) -> None:
    """The one read-scope rule (shopfloor.access): operators read only the lots that have
    been at their work centers; the 403 page says why."""
    try:
        read_scope.require_lot_readable(request.user, lot)
    except DomainError as exc:
        raise PermissionDenied(exc.detail) from exc


@login_required
@require_GET
def lot_page(request: HttpRequest, code: str) -> HttpResponse:
    person = _person(request)
    lot = _lot_or_none(code)
    if lot is None:
        return _missing_lot(request, code)
    _require_readable(request, lot)
    return render(request, "floor/lot.html", _lot_context(lot, person))


@login_required
@require_GET
def traveller_pdf(request: HttpRequest, code: str) -> HttpResponse:
    _person(request)
    lot = _lot_or_none(code)
    if lot is None:
        return _missing_lot(request, code)
    _require_readable(request, lot)
    # No paper asked for: the site's (Site settings); an unknown one is refused, not guessed.
    paper = request.GET.get("paper", "").strip().lower() or None
    if paper is not None and paper not in traveller.PAPER_SIZES:
        return HttpResponse(
            f"Paper {paper[:20]!r} is not offered; use paper=a4 or paper=letter, or leave it "
            "out for the site's paper.",
            status=400,
            content_type="text/plain; charset=utf-8",
        )
    response = HttpResponse(traveller.traveller_pdf(lot, paper), content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="traveller-{lot.code}.pdf"'
    return response


# --- state changes --------------------------------------------------------------------


def _key(request: HttpRequest, form: forms.TabletForm) -> str | None:
    return (
        request.headers.get("Idempotency-Key") or form.cleaned_data.get("idempotency_key") or None
    )


def _run(
    request: HttpRequest, form: forms.TabletForm, action: Callable[[], tuple[int, dict[str, Any]]]
) -> idempotency.Outcome:
    return idempotency.run(
        user=request.user,
        key=_key(request, form),
        request_fingerprint=idempotency.fingerprint("POST", request.path, form.payload()),
        action=action,
    )


def _step_or_404(step_id: int) -> LotStep:
    step = LotStep.objects.select_related("lot", "work_center").filter(pk=step_id).first()
    if step is None:
        raise NotFound(f"No lot step {step_id}; reload the lot page.")
    return step


def _require_assigned(person: Person, step: LotStep) -> None:
    """Refuse work on a step at a work center the person is not assigned to, before the
    use case runs, so the refusal does not depend on the step's state (the API does the
    same in shopfloor.floor.permissions.check_work_center)."""
    people.check_assigned(person, step.work_center_id)


def _refuse_page(
    request: HttpRequest, person: Person, lot: Lot | None, error: str, status: int
) -> HttpResponse:
    if lot is None or not read_scope.lot_visible(read_scope.scope_for(person.user), lot):
        # Never show a lot's traveller to someone outside its read scope, even in a refusal.
        return render(request, "floor/scan.html", {"error": error}, status=status)
    context = _lot_context(lot, person)
    context["error"] = error
    return render(request, "floor/lot.html", context, status=status)


def _step_action(
    request: HttpRequest,
    step_id: int,
    form_class: type[forms.TabletForm],
    call: Callable[[Person, LotStep, dict[str, Any]], str],
) -> HttpResponse:
    """Start / pause / complete: a full-page POST that redirects back to the lot page."""
    person = _person(request)
    lot = None
    try:
        step = _step_or_404(step_id)
        lot = step.lot
        _require_assigned(person, step)
        form = form_class(request.POST)
        if not form.is_valid():
            raise InvalidInput(form.error_text())

        def action() -> tuple[int, dict[str, Any]]:
            return 200, {"lot_step": step.pk, "message": call(person, step, form.cleaned_data)}

        outcome = _run(request, form, action)
    except DomainError as exc:
        return _refuse_page(request, person, lot, exc.detail, exc.status)
    messages.success(request, outcome.body.get("message", gettext("Done.")))
    return redirect("floor:lot", code=step.lot.code)


@login_required
@require_POST
def start_step(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        services.start_step(person=person, lot_step_id=step.pk, equipment_id=data.get("equipment"))
        return gettext("Started '{name}'.").format(name=words.step_name(step.name))

    return _step_action(request, step_id, forms.StartForm, call)


@login_required
@require_POST
def pause_step(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        services.pause_step(person=person, lot_step_id=step.pk, reason=data.get("reason", ""))
        return gettext("Paused '{name}'. Press Start to resume.").format(
            name=words.step_name(step.name)
        )

    return _step_action(request, step_id, forms.PauseForm, call)


@login_required
@require_POST
def complete_step(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        done = services.complete_step(
            person=person, lot_step_id=step.pk, pin=data["pin"], meaning=data["meaning"]
        )
        sig = done.signature
        meaning = sig.get_meaning_display() if sig else gettext("Performed by")
        return gettext("'{name}' signed off. {meaning}: {person}.").format(
            name=words.step_name(step.name), meaning=meaning, person=person.printed_name
        )

    return _step_action(request, step_id, forms.CompleteForm, call)


@login_required
@require_POST
def record_material(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        use = services.record_material(person=person, lot_step_id=step.pk, code=data["code"])
        return gettext("Recorded {code} ({kind}).").format(
            code=use.material_lot.code, kind=services.material_label(use.kind)
        )

    return _step_action(request, step_id, forms.MaterialForm, call)


@login_required
@require_POST
def record_scrap(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        records = services.record_scrap(
            person=person,
            lot_step_id=step.pk,
            panel_serial=data["panel"],
            reason_code=data["reason"],
            boards=data.get("boards"),
            note=data.get("note") or "",
        )
        n = sum(r.boards for r in records)
        if records[0].panel_scrapped:
            return gettext("Panel {panel} scrapped ({n} board(s)).").format(
                panel=data["panel"], n=n
            )
        return gettext("{n} board(s) crossed out on panel {panel}.").format(
            n=n, panel=data["panel"]
        )

    return _step_action(request, step_id, forms.ScrapForm, call)


@login_required
@require_POST
def record_acceptance(request: HttpRequest, step_id: int) -> HttpResponse:
    def call(person: Person, step: LotStep, data: dict[str, Any]) -> str:
        accepted = {
            k.removeprefix("accepted-"): int(v)
            for k, v in data.items()
            if k.startswith("accepted-")
        }
        rows = services.record_acceptance(
            person=person,
            lot_step_id=step.pk,
            accepted=accepted,
            reason_code=data.get("reason") or "",
        )
        return gettext("Accepted: {list}.").format(
            list=", ".join(
                gettext("{n} of job {job}").format(n=r.boards, job=r.job.number) for r in rows
            )
        )

    return _step_action(request, step_id, forms.AcceptanceForm, call)


def _row_response(
    request: HttpRequest, row: SampleRow | None, lot: Lot, status: int = 200
) -> HttpResponse:
    if row is None or not is_htmx(request):
        if status >= 400:
            return _refuse_page(request, _person(request), lot, row.error if row else "", status)
        return redirect("floor:lot", code=lot.code)
    return render(request, "floor/_sample_row.html", {"row": row}, status=status)


def _refusal_fields(
    exc: DomainError, entered: dict[str, Any], step: LotStep | None = None, quantity: str = ""
) -> dict[str, Any]:
    """A refused reading's row: the message, what was typed, and (typo guard) the
    question to confirm, so the operator can Confirm or Re-enter in place."""
    if isinstance(exc, services.ConfirmationNeeded):
        question = exc.problems[0]["problem"] if exc.problems else exc.detail
        if step is not None and exc.problems:
            question = _guard_question(step, quantity, exc.problems[0], entered) or question
        return {"error": "", "confirm": question, "entered": entered}
    return {"error": exc.detail, "entered": entered}


def _guard_question(
    step: LotStep, quantity: str, problem: dict[str, Any], entered: dict[str, Any]
) -> str:
    """The typo guard's question in the person's language ('' if it cannot be rebuilt)."""
    group = next((g for g in judging.group_plan(step.plan) if g.quantity == quantity), None)
    if group is None:
        return ""
    try:
        value = units.to_canonical(quantity, str(problem.get("value", "")), problem.get("unit", ""))
    except (units.UnitError, ValueError):
        return ""
    return entry_words.guard_question(
        value,
        str(entered.get("value", "")).strip(),
        str(problem.get("unit", "")),
        group.entries,
        problem.get("suggested_unit"),
        words.speech(),
    )


@login_required
@require_POST
def record_reading(request: HttpRequest, step_id: int) -> HttpResponse:
    person = _person(request)
    try:
        step = _step_or_404(step_id)
        _require_assigned(person, step)
    except DomainError as exc:
        lot = step.lot if exc.status == 403 else None
        return _refuse_page(request, person, lot, exc.detail, exc.status)
    form = forms.ReadingForm(words.with_typed_number(request.POST))
    quantity = request.POST.get("quantity", "")
    try:
        sample = int(request.POST.get("sample_index", "1"))
    except ValueError:
        sample = 1
    entered = {
        k: request.POST.get(k, "")
        for k in ("value", "unit", "position", "equipment", "captured_at", "tested")
    }
    try:
        if not form.is_valid():
            raise InvalidInput(form.error_text())
        data = form.cleaned_data

        def action() -> tuple[int, dict[str, Any]]:
            reading = services.record_reading(
                person=person,
                lot_step_id=step.pk,
                data=services.ReadingInput(
                    quantity=data["quantity"],
                    value=data["value"],
                    unit=data["unit"] or "",
                    sample_index=data["sample_index"],
                    position=data["position"] or "",
                    equipment_id=data["equipment"],
                    captured_at=data["captured_at"],
                    confirm_out_of_window=bool(data.get("confirm_out_of_window")),
                    tested=data.get("tested"),
                ),
            )
            return 201, {"reading": reading.pk, "in_window": reading.in_window}

        outcome = _run(request, form, action)
    except DomainError as exc:
        row = _single_row(
            step, quantity, sample, person, **_refusal_fields(exc, entered, step, quantity)
        )
        if row is None:
            return _refuse_page(request, person, step.lot, exc.detail, exc.status)
        return _row_response(request, row, step.lot, exc.status)
    reading = Reading.objects.get(pk=outcome.body["reading"])
    preferences.remember_entry(person, reading.quantity, reading.entered_unit, reading.equipment_id)
    return _row_response(
        request,
        _single_row(step, reading.quantity, reading.sample_index, person),
        step.lot,
        outcome.status,
    )


@login_required
@require_POST
def correct_reading(request: HttpRequest, reading_id: int) -> HttpResponse:
    person = _person(request)
    old = Reading.objects.select_related("lot_step__lot").filter(pk=reading_id).first()
    if old is None:
        return _refuse_page(
            request,
            person,
            None,
            gettext("No reading {id}; reload the lot page.").format(id=reading_id),
            404,
        )
    step = old.lot_step
    try:
        _require_assigned(person, step)
    except DomainError as exc:
        return _refuse_page(request, person, step.lot, exc.detail, exc.status)
    form = forms.CorrectionForm(words.with_typed_number(request.POST))
    entered = {
        "value": request.POST.get("value", ""),
        "unit": request.POST.get("unit", ""),
        "reason": request.POST.get("reason", ""),
        "correcting": True,
    }
    try:
        if not form.is_valid():
            raise InvalidInput(form.error_text())
        data = form.cleaned_data

        def action() -> tuple[int, dict[str, Any]]:
            new = services.correct_reading(
                person=person,
                reading_id=old.pk,
                value=data["value"],
                unit=data["unit"] or "",
                reason=data["reason"],
                captured_at=data["captured_at"],
                confirm_out_of_window=bool(data.get("confirm_out_of_window")),
            )
            return 201, {"reading": new.pk, "in_window": new.in_window}

        outcome = _run(request, form, action)
    except DomainError as exc:
        row = _single_row(
            step,
            old.quantity,
            old.sample_index,
            person,
            **_refusal_fields(exc, entered, step, old.quantity),
        )
        return _row_response(request, row, step.lot, exc.status)
    return _row_response(
        request, _single_row(step, old.quantity, old.sample_index, person), step.lot, outcome.status
    )


# --- locked badges (supervisors and administrators) ---------------------------------


def _domain_page(request: HttpRequest, exc: DomainError) -> HttpResponse:
    template = {403: "403.html", 404: "404.html"}.get(exc.status, "floor/scan.html")
    return render(request, template, {"reason": exc.detail, "error": exc.detail}, status=exc.status)


@login_required
@require_GET
def locked_badges(request: HttpRequest) -> HttpResponse:
    """Badges locked after too many wrong PINs, each with an Unlock button."""
    try:
        people = list(records.locked_badges(read_scope.scope_for(request.user)))
    except DomainError as exc:
        return _domain_page(request, exc)
    return render(request, "floor/locked.html", {"people": people})


@login_required
@require_POST
def unlock_badge(request: HttpRequest, person_id: int) -> HttpResponse:
    try:
        scope = read_scope.scope_for(request.user)
        person = records.access_locked_person(scope, person_id)
        people.unlock_person(by=scope.actor, person_id=person.pk)
    except DomainError as exc:
        return _domain_page(request, exc)
    messages.success(request, f"Badge {person.badge_number} ({person.printed_name}) unlocked.")
    return redirect("floor:locked_badges")


# --- gauge files ----------------------------------------------------------------------


@login_required
@require_http_methods(["GET", "POST"])
def upload_readings(request: HttpRequest) -> HttpResponse:
    """A gauge's exported CSV file recorded as one batch (the same use case as the
    batch API): every line comes back created, duplicate or refused with the reason."""
    person = _person(request)
    if not roles_of(request.user) & FLOOR_ROLES:
        raise PermissionDenied(
            "Only operators, supervisors and administrators may upload readings."
        )
    context: dict[str, Any] = {
        "columns": csv_upload.COLUMNS,
        "required": csv_upload.REQUIRED,
        "max_items": f"{batch.MAX_ITEMS:,}",
        "max_kb": f"{csv_upload.MAX_BYTES // 1000:,}",
        "key": uuid.uuid4().hex,
    }
    if request.method == "GET":
        return render(request, "floor/upload.html", context)
    if "confirm_lines" in request.POST:
        return _confirm_upload_lines(request, person, context)
    upload = request.FILES.get("file")
    try:
        if upload is None:
            raise csv_upload.FileProblem("Choose the gauge's CSV file first.")
        parsed = csv_upload.read(upload.read(csv_upload.MAX_BYTES + 1))
    except csv_upload.FileProblem as exc:
        return render(request, "floor/upload.html", {**context, "error": str(exc)}, status=400)
    codes = {r["equipment"].upper() for r in parsed.rows if r.get("equipment")}
    equipment_ids = dict(
        Equipment.objects.annotate(upper=Upper("code"))
        .filter(upper__in=codes)
        .values_list("upper", "pk")
    )
    raw = [csv_upload.item_data(r, parsed.digest, equipment_ids) for r in parsed.rows]
    lines = [int(r["_line"]) for r in parsed.rows]
    return _record_upload(request, person, context, raw, lines, upload.name or "", parsed.digest)


def _record_upload(
    request: HttpRequest,
    person: Person,
    context: dict[str, Any],
    raw: list[dict[str, Any]],
    lines: list[int],
    file_name: str,
    digest: str,
) -> HttpResponse:
    """Record file lines as one batch and show every line's result. A line the typo
    guard stopped gets the question in plain words and a "store as measured" box."""
    labels = [f"line {n}" for n in lines]
    items, invalid = batch_items(raw, problems_from, labels)

    def action() -> tuple[int, dict[str, Any]]:
        results = batch.record_batch(
            person=person,
            items=items,
            via="upload",
            check_access=lambda step: check_work_center(request, step),  # type: ignore[arg-type]
        )
        body = batch.summary(sorted(results + invalid, key=lambda r: r.index))
        return 200, json.loads(json.dumps(body, cls=DjangoJSONEncoder))

    try:
        outcome = idempotency.run_in_steps(
            user=request.user,
            key=request.POST.get("idempotency_key", ""),
            request_fingerprint=idempotency.fingerprint("POST", request.path, digest),
            action=action,
        )
    except DomainError as exc:
        return render(
            request, "floor/upload.html", {**context, "error": exc.detail}, status=exc.status
        )
    summary = outcome.body
    confirmable = 0
    for entry in summary.get("items", []):
        index = entry["index"]
        entry["line"] = lines[index] if index < len(lines) else ""
        entry["row"] = raw[index] if index < len(raw) else {}
        question = next(
            (
                str(p.get("problem") or "")
                for p in entry.get("problems") or []
                if isinstance(p, dict) and p.get("field") == "confirm_out_of_window"
            ),
            "",
        )
        if entry.get("status") == "refused" and question:
            entry["question"] = question
            entry["held_row"] = json.dumps({**entry["row"], "_line": entry["line"]})
            confirmable += 1
    return render(
        request,
        "floor/upload.html",
        {
            **context,
            "summary": summary,
            "file_name": file_name,
            "replayed": outcome.replayed,
            "confirmable": confirmable,
        },
    )


def _confirm_upload_lines(
    request: HttpRequest, person: Person, context: dict[str, Any]
) -> HttpResponse:
    """The lines of an uploaded file the operator ticked "store as measured" after the
    typo guard's question: recorded as confirmed (the same batch use case)."""
    file_name = request.POST.get("file_name", "")[:200]
    ticked = request.POST.getlist("confirm")
    raw: list[dict[str, Any]] = []
    lines: list[int] = []
    for value in ticked[: batch.MAX_ITEMS]:
        try:
            row = json.loads(request.POST.get(f"held-{value}", ""))
        except ValueError:
            row = None
        if not isinstance(row, dict) or not all(
            isinstance(k, str) and isinstance(v, str | int) for k, v in row.items()
        ):
            continue
        line = row.pop("_line", value)
        body = {k: v for k, v in row.items() if k in csv_upload.COLUMNS}
        body["confirm_out_of_window"] = True
        raw.append(body)
        lines.append(int(line) if str(line).isdigit() else 0)
    if not raw:
        return render(
            request,
            "floor/upload.html",
            {
                **context,
                "error": "No line was ticked, so nothing was recorded. Upload the file "
                "again, tick “Store as measured” beside each value the gauge really "
                "read, then press “Record the ticked lines”.",
            },
            status=400,
        )
    digest = idempotency.fingerprint("POST", request.path, json.dumps(raw, sort_keys=True))
    return _record_upload(request, person, context, raw, lines, file_name, digest)
