"""Lab pages: tanks, analyses, the addition calculator, exposed lots, SPC per parameter.

Thin views: parse the form, call one service, render. Every refusal is a DomainError
turned into a page by the `reader` decorator (shopfloor.pages) (sign-in, scope, 403/404/400).
Every screen that leads to an addition shows the caution (services.CAUTION).
"""

from __future__ import annotations

from typing import Any

from django.contrib import messages
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST

from shopfloor.access import Scope, require_lot_visible
from shopfloor.chemistry import read, services, spc_view
from shopfloor.chemistry.models import Frequency, Tank, TankEvent
from shopfloor.core.chemistry import plating
from shopfloor.core.chemistry.constants import METALS
from shopfloor.core.chemistry.errors import ChemistryInputError
from shopfloor.errors import DomainError, InvalidInput, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.pages import reader

HISTORY_ROWS = 80  # a busy week of one tank; older entries are in the admin and the audit


def _ctx(scope: Scope, **extra: Any) -> dict[str, Any]:
    can = scope.person is not None  # an account without a badge reads but signs nothing
    return {
        "scope": scope,
        "may_enter": can and bool(scope.roles & services.LAB_ROLES),
        "may_confirm": can and bool(scope.roles & services.CONFIRM_ROLES),
        "may_hold": can and bool(scope.roles & services.HOLD_ROLES),
        "caution": services.CAUTION,
        **extra,
    }


@require_GET
@reader
def lab_home(request: HttpRequest, scope: Scope) -> HttpResponse:
    rows = read.tank_rows()
    return render(request, "chemistry/lab.html", _ctx(scope, tanks=rows))


@require_GET
@reader
def board_strip(request: HttpRequest, scope: Scope) -> HttpResponse:
    """The board's bath line (loaded by htmx beside the board, so it adds no board query):
    tanks out of window and analyses due or overdue."""
    rows = [t for t in read.tank_rows() if t.flagged or t.due or t.overdue]
    return render(request, "chemistry/_board_strip.html", {"tanks": rows})


def _tank_context(scope: Scope, code: str, **extra: Any) -> dict[str, Any]:
    tank = read.get_tank(code)

    row = read.tank_rows(tanks=Tank.objects.filter(pk=tank.pk))[0]
    out_of_window = list(tank.analyses.filter(in_window=False).select_related("parameter")[:10])
    pending = list(
        tank.events.filter(kind=TankEvent.Kind.ADDITION, confirmed_at__isnull=True)
        .select_related("parameter", "entered_by")
        .order_by("entered_at")
    )
    return _ctx(
        scope,
        tank=tank,
        row=row,
        history=read.tank_history(tank, limit=HISTORY_ROWS),
        history_rows=HISTORY_ROWS,
        sources=sorted({r.parameter.source for r in row.rows}),
        out_of_window=out_of_window,
        pending=pending,
        turnovers=read.turnovers(tank),
        doses=read.doses_due(tank),
        event_kinds=[(k.value, k.label) for k in TankEvent.Kind if k != TankEvent.Kind.ADDITION],
        frequencies=dict(Frequency.choices),
        **extra,
    )


@require_GET
@reader
def tank_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    return render(request, "chemistry/tank.html", _tank_context(scope, code))


@require_POST
@reader
def analysis_create(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    data = services.AnalysisInput(
        parameter=request.POST.get("parameter", ""),
        value=request.POST.get("value", ""),
        unit=request.POST.get("unit", ""),
        taken_at=None,
        amp_hours=request.POST.get("amp_hours", ""),
        note=request.POST.get("note", ""),
    )
    try:
        analysis = services.record_analysis(person=scope.actor, tank_code=code, data=data)
    except InvalidInput as exc:
        ctx = _tank_context(scope, code, analysis_error=exc.detail, entered=request.POST)
        return render(request, "chemistry/tank.html", ctx, status=400)
    if analysis.in_window:
        messages.success(
            request,
            f"{analysis.parameter.name}: {read.fmt(analysis.parameter, analysis.value)} "
            "recorded, in window.",
        )
        return redirect("chemistry:tank", code=analysis.tank.code)
    messages.warning(
        request,
        f"{analysis.parameter.name}: {read.fmt(analysis.parameter, analysis.value)} is OUT "
        "of window. The tank is flagged; these are the lots that ran in it since its last "
        "in-window analysis.",
    )
    return redirect("chemistry:analysis", analysis_id=analysis.pk)


@require_GET
@reader
def addition_page(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    tank = read.get_tank(code)
    param_code = request.GET.get("parameter", "")
    concentrations = [
        p
        for p in tank.parameters.all()
        if p.measure in ("mass_concentration", "volume_concentration")
    ]
    ctx = _ctx(scope, tank=tank, parameters=concentrations, chosen=param_code, raw=request.GET)
    chosen = next((p for p in concentrations if p.code == param_code), None)
    if chosen is not None:  # the defaults a blank field takes, in the parameter's unit
        last = chosen.last_analysis
        ctx["defaults"] = {
            "measured": read.fmt(chosen, last.value) if last else "",
            "target": read.fmt(chosen, chosen.target),
            "stock": read.fmt(chosen, chosen.stock_strength)
            if chosen.stock_strength is not None
            else "",
        }
    status = 200
    if param_code:
        try:
            ctx["advice"] = services.advise_addition(
                tank=tank,
                parameter=param_code,
                measured=request.GET.get("measured"),
                target=request.GET.get("target"),
                stock=request.GET.get("stock"),
                volume_l=request.GET.get("volume_l") or None,
            )
        except DomainError as exc:
            ctx["error"] = exc.detail
            status = 400
        ctx["analysis_id"] = request.GET.get("analysis", "")
    return render(request, "chemistry/addition.html", ctx, status=status)


@require_POST
@reader
def event_create(request: HttpRequest, scope: Scope, code: str) -> HttpResponse:
    p = request.POST
    advice = {k: p.get(f"advice_{k}") for k in ("action", "add_l", "water_l", "dump_l")}
    try:
        services.record_event(
            person=scope.actor,
            tank_code=code,
            kind=p.get("kind", ""),
            pin=p.get("pin", ""),
            parameter=p.get("parameter") or None,
            analysis_id=p.get("analysis") or None,
            add_l=p.get("add_l") or 0,
            water_l=p.get("water_l") or 0,
            dump_l=p.get("dump_l") or 0,
            add_g=p.get("add_g") or 0,
            amp_hours=p.get("amp_hours") or None,
            advice={k: v for k, v in advice.items() if v} if p.get("advice_action") else None,
            note=p.get("note", ""),
        )
    except DomainError as exc:
        if exc.status != 400:
            raise
        ctx = _tank_context(scope, code, event_error=exc.detail, entered=p)
        return render(request, "chemistry/tank.html", ctx, status=400)
    messages.success(request, "Recorded in the tank's history.")
    return redirect("chemistry:tank", code=code)


@require_POST
@reader
def event_confirm(request: HttpRequest, scope: Scope, event_id: int) -> HttpResponse:
    event = services.confirm_event(
        person=scope.actor, event_id=event_id, pin=request.POST.get("pin", "")
    )
    messages.success(request, "Addition confirmed.")
    return redirect("chemistry:tank", code=event.tank.code)


@require_GET
@reader
def analysis_page(request: HttpRequest, scope: Scope, analysis_id: int) -> HttpResponse:
    services.require_sees_all_lots(scope)
    analysis = read.get_analysis(analysis_id)
    found = read.exposure(analysis) if not analysis.in_window else None
    return render(
        request,
        "chemistry/analysis.html",
        _ctx(
            scope,
            analysis=analysis,
            exposure=found,
            window=read.window_text(analysis.parameter),
            shown=read.fmt(analysis.parameter, analysis.value),
        ),
    )


@require_POST
@reader
def hold_exposed(request: HttpRequest, scope: Scope, analysis_id: int) -> HttpResponse:
    held = services.hold_exposed_lots(person=scope.actor, analysis_id=analysis_id)
    if held:
        messages.success(
            request,
            f"{len(held)} lot(s) held for quality review: {', '.join(lot.code for lot in held)}.",
        )
    else:
        messages.info(request, "No further lots to hold: every exposed lot is already held.")
    return redirect("chemistry:analysis", analysis_id=analysis_id)


@require_GET
@reader
def parameter_spc(request: HttpRequest, scope: Scope, code: str, parameter: str) -> HttpResponse:
    tank = read.get_tank(code)
    param = read.get_parameter(tank, parameter)
    return render(
        request,
        "chemistry/spc.html",
        _ctx(
            scope,
            tank=tank,
            param=param,
            window=read.window_short(param),
            d=spc_view.parameter_chart(param),
        ),
    )


@require_GET
@reader
def calculator(request: HttpRequest, scope: Scope) -> HttpResponse:
    """The plating calculator on its own (thickness from current density and time, or back)."""
    g = request.GET
    ctx = _ctx(scope, metals=sorted(METALS), raw=g)
    status = 200
    if g.get("metal"):
        try:
            eff = float(g.get("efficiency") or 100) / 100
            if g.get("thickness_um"):
                minutes = plating.minutes_for(
                    g["metal"], g["thickness_um"], g.get("current_density_asd") or "", eff
                )
                ctx["result"] = {"minutes": minutes, "thickness_um": float(g["thickness_um"])}
            else:
                ctx["result"] = {
                    "thickness_um": plating.thickness_um(
                        g["metal"], g.get("current_density_asd") or "", g.get("minutes") or "", eff
                    ),
                    "minutes": float(g.get("minutes") or 0),
                }
            if g.get("area_dm2"):
                j = float(g.get("current_density_asd") or 0)
                area = plating.setup_for(
                    g["metal"],
                    area_dm2=g["area_dm2"],
                    current_density_asd=j,
                    target_um=ctx["result"]["thickness_um"],
                    eff=eff,
                ).area_dm2
                ctx["result"]["current_a"] = j * area
        except (ChemistryInputError, ValueError) as exc:
            ctx["error"] = str(exc)
            status = 400
    return render(request, "chemistry/calculator.html", ctx, status=status)


@reader
def plating_step(request: HttpRequest, scope: Scope, lot_step_id: int) -> HttpResponse:
    step = (
        LotStep.objects.select_related("lot", "work_center").filter(pk=lot_step_id).first()
        if 0 < lot_step_id < 2**63
        else None
    )
    if step is None:
        raise NotFound(f"No lot step {lot_step_id}.")
    require_lot_visible(scope, step.lot)
    ctx = _ctx(
        scope,
        step=step,
        may_set=scope.person is not None and bool(scope.roles & services.PLATING_ROLES),
        design=read.design_area(step),
        defaults=services.PLATING_STEPS.get(services.base_code(step.code)),
    )
    status = 200
    if request.method == "POST":
        try:
            services.compute_plating(
                person=scope.actor,
                lot_step_id=step.pk,
                area_dm2=request.POST.get("area_dm2") or None,
                target_um=request.POST.get("target_um") or None,
                efficiency=(
                    float(request.POST["efficiency_pct"]) / 100
                    if request.POST.get("efficiency_pct")
                    else None
                ),
            )
            messages.success(request, "Amps and minutes computed; the tablet shows them.")
            return redirect(reverse("chemistry:plating", args=[step.pk]))
        except (InvalidInput, ValueError) as exc:
            ctx["error"] = getattr(exc, "detail", None) or f"Not a number: {exc}"
            status = 400
    ctx["setup"] = getattr(step, "plating_setup", None) if hasattr(step, "plating_setup") else None
    return render(request, "chemistry/plating.html", ctx, status=status)
