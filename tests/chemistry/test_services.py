"""Bath analyses, additions, the impact query and the lot history, through the services."""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor.chemistry import read, services
from shopfloor.chemistry.models import Analysis, TankEvent, TankUse
from shopfloor.errors import Conflict, InvalidInput, NotAllowed, NotFound
from shopfloor.floor import services as floor_services
from shopfloor.plant.models import Lot
from shopfloor.quality.models import Alert, Hold, Nonconformance
from tests import helpers
from tests.factories import PIN, copper_tank, lab_tech, make_lot

pytestmark = pytest.mark.django_db


def analyse(person, tank, parameter, value, unit="", taken_at=None):
    return services.record_analysis(
        person=person,
        tank_code=tank.code,
        data=services.AnalysisInput(parameter=parameter, value=value, unit=unit, taken_at=taken_at),
    )


def test_analysis_in_oz_per_gallon_is_stored_in_g_per_l_and_judged(floor):
    tank, lab = copper_tank(), lab_tech()
    # 10 oz/gal × 7.4891517 g/L per oz/gal (NIST SP 811 definitions) = 74.89 g/L: in window
    a = analyse(lab, tank, "copper_sulfate", "10", "oz/gal")
    assert a.value == pytest.approx(74.891517, rel=1e-6)
    assert a.in_window
    assert a.window["source"] == "common practice"
    # 31 mg/L chloride = 0.031 g/L, below the 0.040 g/L floor: out, the tank is flagged
    b = analyse(lab, tank, "chloride", "31", "mg/L")
    assert not b.in_window
    assert read.tank_rows()[0].flagged
    assert Alert.objects.filter(kind=Alert.Kind.BATH_OUT_OF_WINDOW, dedupe_key=f"bath_oow:{b.pk}")


@pytest.mark.parametrize(
    ("value", "unit", "words"),
    [
        ("12,5", "g/L", "decimal separator"),
        ("70", "mL/L", "not accepted; allowed: 'g/L'"),
        ("-3", "g/L", "negative"),
        ("5000", "g/L", "plausible maximum"),
    ],
)
def test_bad_analysis_is_refused_and_nothing_saved(floor, value, unit, words):
    tank, lab = copper_tank(), lab_tech()
    with pytest.raises(InvalidInput, match=words):
        analyse(lab, tank, "copper_sulfate", value, unit)
    assert not Analysis.objects.exists()


def test_only_lab_roles_enter_analyses(floor):
    tank = copper_tank()
    with pytest.raises(NotAllowed, match="lab technician"):
        analyse(floor.personas["operator"], tank, "copper_sulfate", "75")
    with pytest.raises(NotFound, match="no parameter 'nickel'"):
        analyse(lab_tech(), tank, "nickel", "5")


def _step_in(floor, tank, lot_code, at):
    lot = make_lot(floor.routing, floor.job, code=lot_code)
    step = lot.steps.get(code="pattern_plate_copper")
    TankUse.objects.create(lot_step=step, tank=tank, used_at=at)
    return lot


def test_impact_query_on_a_constructed_history(floor):
    """Lots exposed = lot steps in the tank after the last in-window analysis before the
    bad one, and before the next in-window one (constructed times, checked by hand)."""
    tank, lab = copper_tank(), lab_tech()
    t0 = timezone.now() - dt.timedelta(hours=10)
    h = dt.timedelta(hours=1)
    analyse(lab, tank, "copper_sulfate", "74", taken_at=t0)  # in window
    a_before = _step_in(floor, tank, "LA", t0 - h)  # before the in-window analysis: covered by it
    b = _step_in(floor, tank, "LB", t0 + h)
    c = _step_in(floor, tank, "LC", t0 + 2 * h)
    bad = analyse(lab, tank, "copper_sulfate", "52", taken_at=t0 + 3 * h)  # below 60
    d = _step_in(floor, tank, "LD", t0 + 4 * h)  # still out until the next good analysis
    analyse(lab, tank, "copper_sulfate", "76", taken_at=t0 + 5 * h)  # back in window
    e = _step_in(floor, tank, "LE", t0 + 6 * h)
    # the other parameter's analyses do not bound this parameter's exposure
    analyse(lab, tank, "chloride", "60", "mg/L", taken_at=t0 + 2.5 * h)

    found = read.exposure(bad)
    assert [lot.code for lot in found.lots] == [b.code, c.code, d.code]
    assert found.since == t0 and found.until == t0 + 5 * h
    assert a_before.code not in {lot.code for lot in found.lots}
    assert e.code not in {lot.code for lot in found.lots}

    # one click holds them: a hold and an NCR each; a second click holds nothing more
    qe = floor.personas["quality_engineer"]
    held = services.hold_exposed_lots(person=qe, analysis_id=bad.pk)
    assert {lot.code for lot in held} == {b.code, c.code, d.code}
    assert Lot.objects.filter(code__in=["LB", "LC", "LD"], on_hold=True).count() == 3
    assert Hold.objects.filter(lot__code="LB", released_at__isnull=True).count() == 1
    assert Nonconformance.objects.filter(lot__code="LC").exists()
    assert services.hold_exposed_lots(person=qe, analysis_id=bad.pk) == []
    with pytest.raises(NotAllowed):
        services.hold_exposed_lots(person=lab, analysis_id=bad.pk)
    good = Analysis.objects.filter(in_window=True).first()
    with pytest.raises(Conflict, match="in window"):
        services.hold_exposed_lots(person=qe, analysis_id=good.pk)


def test_starting_a_wet_step_records_its_tank_and_the_lot_history_shows_the_coverage(floor, client):
    tank, lab = copper_tank(), lab_tech()
    covering = analyse(lab, tank, "copper_sulfate", "75")
    step = helpers.start_at(floor, floor.lot)  # pattern_plate_copper at the plating line
    use = TankUse.objects.get(lot_step=step)
    assert use.tank == tank
    coverage = read.bath_coverage(floor.lot)
    assert coverage[0].tank == tank
    assert dict((p.code, a) for p, a in coverage[0].analyses)["copper_sulfate"] == covering
    client.force_login(floor.personas["quality_engineer"].user)
    page = client.get(f"/quality/lots/{floor.lot.code}/").content.decode()
    assert "Baths the wet steps ran in" in page and tank.code in page
    assert f"#{covering.pk}" in page


def test_addition_advice_record_and_engineer_confirmation(floor):
    tank, lab = copper_tank(), lab_tech()
    analyse(lab, tank, "copper_sulfate", "60")
    # 4000 L at 60 g/L to 75 with 300 g/L stock: a = 4000 × 15 / 225 = 266.67 L, which
    # passes the 4200 L highest level, so dump first (mass balance, by hand):
    # d = (4200×75 − 4000×60 − 200×300) / (300 − 60) = 15000 / 240 = 62.5 L,
    # a = 200 + 62.5 = 262.5 L. Check: 3937.5 × 60 + 262.5 × 300 = 315000 = 4200 × 75.
    advice = services.advise_addition(tank=tank, parameter="copper_sulfate")
    assert advice.advice.action == "dump_then_add"
    assert advice.advice.dump_l == pytest.approx(62.5)
    assert advice.advice.add_l == pytest.approx(262.5)
    assert advice.shown["measured"] == "60 g/L"
    assert "add acid to water" in advice.caution
    event = services.record_event(
        person=lab, tank_code=tank.code, kind="addition", pin=PIN, parameter="copper_sulfate",
        add_l=250, dump_l=250,
    )  # fmt: skip
    assert event.confirmed_at is None  # a lab technician's addition waits for an engineer
    with pytest.raises(NotAllowed):
        services.confirm_event(person=lab, event_id=event.pk, pin=PIN)
    engineer = floor.personas["process_engineer"]
    with pytest.raises(NotAllowed, match="Wrong PIN"):
        services.confirm_event(person=engineer, event_id=event.pk, pin="0000")
    confirmed = services.confirm_event(person=engineer, event_id=event.pk, pin=PIN)
    assert confirmed.confirmed_by == engineer and confirmed.confirmed_at is not None
    with pytest.raises(Conflict, match="already confirmed"):
        services.confirm_event(person=engineer, event_id=event.pk, pin=PIN)
    rows = read.tank_history(tank)
    assert any("confirmed by Pat Engineer" in r.who for r in rows)


def test_events_refuse_bad_amounts(floor):
    tank, lab = copper_tank(), lab_tech()
    with pytest.raises(InvalidInput, match="names the parameter"):
        services.record_event(person=lab, tank_code=tank.code, kind="addition", pin=PIN)
    with pytest.raises(InvalidInput, match="more than the tank holds"):
        services.record_event(person=lab, tank_code=tank.code, kind="dump", pin=PIN, dump_l=5000)
    with pytest.raises(InvalidInput, match="unknown tank event"):
        services.record_event(person=lab, tank_code=tank.code, kind="boil", pin=PIN)
    assert not TankEvent.objects.exists()


def test_make_up_restarts_the_electroless_nickel_age(floor):
    from shopfloor.chemistry.models import PlanParameter, Tank
    from shopfloor.plant.models import WorkCenter

    tank = Tank.objects.create(
        work_center=WorkCenter.objects.get(code="finish_line"), code="T-NI", name="EN",
        kind="electroless_nickel", volume_l=200, makeup_nickel_g_per_l=6.0,
        dump_at_turnovers=5.0, step_codes=["enig_nickel"],
    )  # fmt: skip
    PlanParameter.objects.create(
        tank=tank, code="nickel", name="Nickel", measure="mass_concentration", unit="g/L",
        low=5.5, target=6.0, high=6.5, source="common practice", frequency="per_shift",
        method="EDTA titration", stock_strength=100,
    )  # fmt: skip
    engineer = floor.personas["process_engineer"]
    for _ in range(4):  # 4 × 12 L × 100 g/L = 4800 g = 4.0 MTO of a 200 L × 6 g/L bath
        services.record_event(
            person=engineer, tank_code="T-NI", kind="addition", pin=PIN, parameter="nickel",
            add_l=12,
        )  # fmt: skip
    age = read.turnovers(tank)
    assert age.turnovers == pytest.approx(4.0) and not age.dump_due
    services.record_event(person=engineer, tank_code="T-NI", kind="make_up", pin=PIN)
    tank.refresh_from_db()
    assert read.turnovers(tank).turnovers == 0.0


def test_plating_step_parameters_from_current_density_and_area(floor):
    from shopfloor.chemistry.models import PlatedArea

    step = helpers.advance_to(floor.lot, "pattern_plate_copper")
    engineer = floor.personas["process_engineer"]
    with pytest.raises(InvalidInput, match="design data has no plated area"):
        services.compute_plating(person=engineer, lot_step_id=step.pk)
    # entered: 20 dm² × 2.0 A/dm² (routing) = 40 A; 25 µm at 95 %:
    # 25 / (0.220516 × 2 × 0.95) = 59.67 min (Faraday's law, see test_faraday)
    setup = services.compute_plating(person=engineer, lot_step_id=step.pk, area_dm2="20")
    assert setup.current_a == pytest.approx(40.0)
    assert setup.minutes == pytest.approx(59.669, abs=0.001)
    step.refresh_from_db()
    assert step.parameters["rectifier_current_a"] == 40.0
    assert step.parameters["time_min"] == pytest.approx(59.7)
    # from the job's design data when no area is entered
    PlatedArea.objects.create(
        part_revision=floor.job.part_revision, area_dm2=30, source="design import"
    )
    setup = services.compute_plating(person=engineer, lot_step_id=step.pk)
    assert setup.area_source == "design" and setup.current_a == pytest.approx(60.0)
    with pytest.raises(NotAllowed):
        services.compute_plating(person=floor.personas["operator"], lot_step_id=step.pk)
    other = floor.lot.steps.get(code="outer_etch")
    with pytest.raises(InvalidInput, match="not a plating step"):
        services.compute_plating(person=engineer, lot_step_id=other.pk, area_dm2=5)
    # the tablet shows them as the step's parameters
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)


def test_lamination_cycle_steps_share_the_tank_and_the_calculator():
    # 'panel_plate_c1' is the first sub-assembly cycle's panel plate (routing builder)
    assert services.base_code("panel_plate_c1") == "panel_plate"
    assert services.base_code("panel_plate") == "panel_plate"
    assert services.base_code("inner_etch_c12") == "inner_etch"


def test_in_window_analysis_that_breaks_a_run_rule_raises_a_drift_warning(floor):
    tank, lab = copper_tank(), lab_tech()
    t0 = timezone.now() - dt.timedelta(days=3)
    # 25 baseline analyses alternating 74.9 / 75.1 g/L: moving range 0.2, sigma = 0.2 /
    # d2(2) = 0.2 / 1.128 = 0.177, UCL = 75 + 3 × 0.177 = 75.53 (individuals chart,
    # Montgomery; the same spc module as readings). 80 g/L is in the 60-90 window but
    # beyond 3 sigma: Western Electric rule 1.
    for i in range(25):
        analyse(
            lab,
            tank,
            "copper_sulfate",
            74.9 if i % 2 else 75.1,
            taken_at=t0 + i * dt.timedelta(hours=2),
        )
    assert not Alert.objects.filter(kind=Alert.Kind.DRIFT).exists()
    drifted = analyse(lab, tank, "copper_sulfate", "80", taken_at=t0 + dt.timedelta(hours=60))
    assert drifted.in_window
    alert = Alert.objects.get(kind=Alert.Kind.DRIFT, dedupe_key=f"bath_drift:{drifted.pk}")
    assert "drifting" in alert.message and tank.code in alert.message
    assert not Lot.objects.filter(on_hold=True).exists()  # a drift warning never holds


def test_a_drift_run_is_reported_once(floor):
    tank, lab = copper_tank(), lab_tech()
    t0 = timezone.now() - dt.timedelta(days=3)
    for i in range(25):
        analyse(
            lab,
            tank,
            "copper_sulfate",
            74.9 if i % 2 else 75.1,
            taken_at=t0 + i * dt.timedelta(hours=2),
        )
    # two points beyond 3 sigma in a row: one run, one warning
    analyse(lab, tank, "copper_sulfate", "80", taken_at=t0 + dt.timedelta(hours=60))
    analyse(lab, tank, "copper_sulfate", "80.5", taken_at=t0 + dt.timedelta(hours=62))
    # (the second point also starts a run of another rule, 2 of 3 beyond 2 sigma)
    assert Alert.objects.filter(kind=Alert.Kind.DRIFT, rule="western_electric_1").count() == 1
