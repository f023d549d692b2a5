"""Scanner first: what a scanned code opens or records (issue 15 item 2).

A scanner types the code and Enter into the scan field, which has focus on every floor
page. On any page the code may be a lot code, a panel serial or a job number; on a lot
page whose current step consumes materials it may also be a material lot's label, which
is then recorded for that step (a POST, with its idempotency key, through the same
record_material use case as the material form).

A job number opens its lot straight away when exactly one of its lots waits at the
operator's own work centers; when several do, or none does, the operator picks.
"""

from __future__ import annotations

from dataclasses import dataclass

from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils.translation import gettext
from django.views.decorators.http import require_GET, require_POST

from shopfloor.errors import DomainError, InvalidInput, NotFound
from shopfloor.floor import forms, views
from shopfloor.floor.models import LotStep
from shopfloor.orders.read import lots_for_scan
from shopfloor.plant.models import Lot, MaterialLot, Person


@dataclass(frozen=True)
class ScanChoice:
    """A lot offered to pick after a job number, with where it is now."""

    lot: Lot
    step: LotStep | None
    here: bool  # its current step is at one of the operator's work centers


def choices_for(person: Person, lots: list[Lot]) -> list[ScanChoice]:
    """Each lot with its current step; the operator's own lots first."""
    mine = set(person.work_centers.values_list("pk", flat=True))
    out = []
    for lot in lots:
        step = LotStep.objects.current_for(lot)
        out.append(ScanChoice(lot, step, step is not None and step.work_center_id in mine))
    return sorted(out, key=lambda c: (not c.here, c.lot.code))


def _open(request: HttpRequest, person: Person, lots: list[Lot], code: str) -> HttpResponse:
    if len(lots) == 1:
        return redirect("floor:lot", code=lots[0].code)
    choices = choices_for(person, lots)
    here = [c for c in choices if c.here]
    if len(here) == 1:
        return redirect("floor:lot", code=here[0].lot.code)
    return render(
        request,
        "floor/scan.html",
        {"choices": choices, "code": code, "here_count": len(here)},
    )


def _scan_error(request: HttpRequest, exc: DomainError, code: str) -> HttpResponse:
    return render(
        request, "floor/scan.html", {"error": exc.detail, "code": code}, status=exc.status
    )


@login_required
@require_GET
def scan(request: HttpRequest) -> HttpResponse:
    person = views._person(request)
    form = forms.ScanForm(request.GET)
    code = request.GET.get("code", "")
    try:
        if not form.is_valid():
            raise InvalidInput(gettext("Scan or type a lot code, panel serial or job number."))
        lots = lots_for_scan(form.cleaned_data["code"])
    except DomainError as exc:
        return _scan_error(request, exc, code)
    return _open(request, person, lots, code)


@login_required
@require_POST
def scan_at_step(request: HttpRequest, step_id: int) -> HttpResponse:
    """The scan field of a lot page whose step consumes materials: a lot, panel or job
    opens as anywhere else; a material lot's label is recorded for the step."""
    person = views._person(request)
    code = (request.POST.get("code") or "").strip()
    try:
        lots = lots_for_scan(code)
    except NotFound as not_found:
        if not MaterialLot.objects.filter(code__iexact=code).exists():
            return _scan_error(
                request,
                NotFound(
                    f"{not_found.detail} It is not a material lot on record either, so "
                    "nothing was recorded for this step."
                ),
                code,
            )
        return views.record_material(request, step_id)
    except DomainError as exc:
        return _scan_error(request, exc, code)
    return _open(request, person, lots, code)
