"""The NCR disposition page, the SPC limit forms and the badge unlock page, through the
Django test client on PostgreSQL.

The NCR comes from the real path: an out-of-window reading is recorded through the floor
service and its outbox event is handled by shopfloor.quality.services.alerts.handle_event.
Use as is / rework / scrap are the trade's standard material-review dispositions
(common practice; IPC-6012 leaves the decision to the material review board). Control
limits of an individuals chart: NIST/SEMATECH e-Handbook of Statistical Methods 6.3.2.2
flow-rate example (from memory: mean 50.81, MR-bar 1.8778, UCL 55.80, LCL 45.82).
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import pytest
from django.conf import settings
from django.test import Client
from django.utils import timezone

from shopfloor.audit.models import AuditEntry, Signature
from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant import people
from shopfloor.plant.models import Lot, Panel, Person, Role
from shopfloor.quality.models import Hold, Nonconformance, OutboxEvent, SeriesState
from shopfloor.quality.services import alerts
from tests import helpers
from tests.factories import PIN, make_person

pytestmark = pytest.mark.django_db


def _client(person: Person | None) -> Client:
    client = Client()
    if person is not None:
        client.force_login(person.user)
    return client


@pytest.fixture
def held(floor):
    """Surface copper 70 um at pattern plating (window 33.75-57.5 um) -> alert, hold, NCR."""
    step = helpers.start_at(floor, floor.lot)
    reading = helpers.record(floor, step, "surface_copper", 70.0)
    alerts.handle_event(helpers.event_for(reading).pk)
    ncr = Nonconformance.objects.get(lot=floor.lot)
    return step, ncr, reading


#: The root cause and corrective action every disposition now records.
QA = {"root_cause": "process_drift", "corrective_action": "Rectifier checked daily"}


def _url(ncr: Nonconformance) -> str:
    return f"/quality/ncrs/{ncr.number}/"


def _still_open(floor, ncr) -> None:
    ncr.refresh_from_db()
    assert ncr.status == "open" and ncr.disposition == ""
    assert Lot.objects.get(pk=floor.lot.pk).on_hold
    assert Hold.objects.filter(ncr=ncr, released_at__isnull=True).count() == 1
    assert not Signature.objects.filter(meaning="dispositioned_by").exists()
    assert not Lot.objects.filter(split_from=floor.lot).exists()
    assert not LotStep.objects.filter(is_rework=True).exists()


def _on_floor_held(floor) -> bool:
    reply = _client(floor.personas["operator"]).get(f"/floor/lots/{floor.lot.code}/")
    assert reply.status_code == 200
    return 'class="hold-banner"' in reply.content.decode()


# --- the page ---------------------------------------------------------------------------


def test_open_ncr_page_shows_evidence_and_form(floor, held):
    step, ncr, reading = held
    reply = _client(floor.personas["quality_engineer"]).get(_url(ncr))
    assert reply.status_code == 200
    html = reply.content.decode()
    assert ncr.number in html and floor.lot.code in html and step.name in html
    assert "70 um" in html and "OUT OF WINDOW" in html
    assert str(reading.window["source"]) in html  # the window's source is shown
    assert "Reading out of window" in html and "OPEN (the lot cannot be worked)" in html
    assert 'id="disposition-form"' in html
    assert "Dispositioned by Quinn Quality" in html  # the signature's meaning, before signing
    for panel in Panel.objects.filter(lot=floor.lot):
        assert f'name="action-{panel.serial}"' in html


def test_ncr_is_linked_from_overview_and_lot_history(floor, held):
    _, ncr, _ = held
    client = _client(floor.personas["quality_engineer"])
    assert f'href="{_url(ncr)}"' in client.get("/quality/").content.decode()
    assert f'href="{_url(ncr)}"' in client.get(f"/quality/lots/{floor.lot.code}/").content.decode()


def test_readers_without_the_role_see_no_form(floor, held):
    _, ncr, _ = held
    html = _client(floor.personas["supervisor"]).get(_url(ncr)).content.decode()
    assert 'id="disposition-form"' not in html
    assert "Only a quality engineer can disposition" in html


def test_unknown_ncr_is_404_and_anonymous_goes_to_login(floor, held):
    _, ncr, _ = held
    reply = _client(floor.personas["quality_engineer"]).get("/quality/ncrs/NCR-999999/")
    assert reply.status_code == 404 and "No nonconformance" in reply.content.decode()
    reply = Client().get(_url(ncr))
    assert reply.status_code == 302 and "/floor/login/" in reply["Location"]


def test_operator_of_another_work_center_may_not_read_it(floor, held):
    step, ncr, _ = held
    elsewhere = [wc for wc in floor.work_centers.values() if wc.pk != step.work_center_id]
    other = make_person(Role.OPERATOR, "1107", "Noor Elsewhere", work_centers=elsewhere[:1])
    reply = _client(other).get(_url(ncr))
    assert reply.status_code == 403 and "has not been at any of your work centers" in (
        reply.content.decode()
    )


# --- refusals save nothing --------------------------------------------------------------


@pytest.mark.parametrize("who", ["supervisor", "operator", "process_engineer"])
def test_wrong_role_gets_403_page_saying_why(floor, held, who):
    _, ncr, _ = held
    reply = _client(floor.personas[who]).post(
        _url(ncr), {"disposition": "use_as_is", "note": "looks fine", "pin": PIN, **QA}
    )
    assert reply.status_code == 403
    assert "Only a quality engineer can disposition a nonconformance" in reply.content.decode()
    _still_open(floor, ncr)
    assert _on_floor_held(floor)


def test_wrong_pin_is_shown_inline(floor, held):
    _, ncr, _ = held
    reply = _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"disposition": "use_as_is", "note": "looks fine", "pin": "0000", **QA}
    )
    assert reply.status_code == 403
    html = reply.content.decode()
    assert 'id="disposition-error"' in html and "Wrong PIN" in html
    assert 'id="disposition-form"' in html and "looks fine" in html  # the note is kept
    _still_open(floor, ncr)


def test_missing_note_is_shown_inline(floor, held):
    _, ncr, _ = held
    reply = _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"disposition": "use_as_is", "note": "  ", "pin": PIN, **QA}
    )
    assert reply.status_code == 400
    assert "needs a note" in reply.content.decode()
    _still_open(floor, ncr)


def test_partial_scrap_without_panels_is_refused(floor, held):
    _, ncr, _ = held
    reply = _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"disposition": "scrap_some", "note": "one burnt", "pin": PIN, **QA}
    )
    assert reply.status_code == 400
    assert "non-empty list of panel ids" in reply.content.decode()
    _still_open(floor, ncr)


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"disposition": "bin_it"}, "use one of use_as_is, rework, scrap"),
        ({"disposition": ""}, "is not known"),
        ({"disposition": "scrap_some", "panels": ["999999"]}, "not live panels"),
        ({"disposition": "scrap_some", "panels": ["abc"]}, "non-empty list of panel ids"),
        ({"disposition": "rework", "rework_steps": "ab"}, "3 to 120 characters"),
        ({"disposition": "rework", "rework_steps": "Strip | NOPE"}, "no work center"),
    ],
)
def test_bad_choices_are_refused_with_the_reason(floor, held, data, message):
    _, ncr, _ = held
    reply = _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"note": "a reason", "pin": PIN, **QA, **data}
    )
    assert reply.status_code == 400, reply.content.decode()[:400]
    assert message in reply.content.decode()
    _still_open(floor, ncr)


# --- dispositions -----------------------------------------------------------------------


def test_use_as_is_signs_releases_and_shows_the_decision(floor, held):
    _, ncr, _ = held
    client = _client(floor.personas["quality_engineer"])
    assert _on_floor_held(floor)
    reply = client.post(
        _url(ncr), {"disposition": "use_as_is", "note": "Customer deviation D-17", "pin": PIN, **QA}
    )
    assert reply.status_code == 302 and reply["Location"] == _url(ncr)
    ncr.refresh_from_db()
    sig = ncr.disposition_signature
    assert ncr.status == "closed" and ncr.disposition == "use_as_is"
    assert sig.meaning == "dispositioned_by" and sig.signer == floor.personas["quality_engineer"]
    assert not _on_floor_held(floor)
    html = client.get(_url(ncr)).content.decode()
    local = timezone.localtime(sig.signed_at, ZoneInfo(settings.SITE_TIME_ZONE))
    assert "Dispositioned by <strong>Quinn Quality</strong>" in html
    assert f"{local:%Y-%m-%d %H:%M}" in html and settings.SITE_TIME_ZONE in html
    assert "Disposition: Use as is" in html and "Customer deviation D-17" in html
    assert 'id="disposition-form"' not in html
    # A second decision on a closed NCR is a conflict (the form is gone, a stale tab posts).
    again = client.post(_url(ncr), {"disposition": "scrap_all", "note": "again", "pin": PIN, **QA})
    assert again.status_code == 409 and "already dispositioned" in again.content.decode()
    assert Signature.objects.filter(meaning="dispositioned_by").count() == 1


def test_rework_adds_named_steps_and_shows_them(floor, held):
    step, ncr, _ = held
    client = _client(floor.personas["quality_engineer"])
    reply = client.post(
        _url(ncr),
        {
            "disposition": "rework",
            "note": "Strip and replate the panels",
            "pin": PIN,
            **QA,
            "rework_steps": f"Strip copper | {step.work_center.code}\n\nReplate copper\n",
        },
    )
    assert reply.status_code == 302
    rework = list(LotStep.objects.filter(is_rework=True).order_by("position"))
    assert [s.name for s in rework] == ["Strip copper", "Replate copper"]
    assert all(s.added_by_ncr_id == ncr.pk and s.position > step.position for s in rework)
    assert not Lot.objects.filter(split_from=floor.lot).exists()
    html = client.get(_url(ncr)).content.decode()
    assert "Rework steps added" in html and "Strip copper" in html and "Replate copper" in html
    assert not _on_floor_held(floor)


def test_rework_without_lines_adds_the_library_default(floor, held):
    """Low copper at pattern plating: the default is to plate again at that step (the
    process library's default for a measured step), never a strip."""
    step, ncr, _ = held
    _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"disposition": "rework", "note": "replate", "pin": PIN, **QA}
    )
    names = list(LotStep.objects.filter(is_rework=True).values_list("name", flat=True))
    assert names == [step.name]
    assert not any("strip" in n.lower() for n in names)


def test_partial_scrap_splits_the_lot_and_both_keep_history(floor, held):
    step, ncr, reading = held
    client = _client(floor.personas["quality_engineer"])
    panels = list(Panel.objects.filter(lot=floor.lot).order_by("serial"))
    assert len(panels) == 2
    reply = client.post(
        _url(ncr),
        {
            "disposition": "scrap_some",
            "note": "First panel burnt at the rack contact",
            "pin": PIN,
            **QA,
            "panels": [str(panels[0].pk)],
        },
    )
    assert reply.status_code == 302
    split = Lot.objects.get(split_from=floor.lot)
    lot = Lot.objects.get(pk=floor.lot.pk)
    assert split.status == "scrapped" and split.panel_count == 1
    assert lot.status == "in_process" and lot.panel_count == 1 and not lot.on_hold
    assert list(Panel.objects.filter(lot=split).values_list("serial", flat=True)) == [
        panels[0].serial
    ]
    # The parent keeps its steps and readings; the split lot points back to it.
    assert Reading.objects.filter(pk=reading.pk, lot_step__lot=lot).exists()
    parent = client.get(f"/quality/lots/{lot.code}/").content.decode()
    assert f"/quality/lots/{split.code}/" in parent and step.name in parent
    assert ncr.number in parent
    child = client.get(f"/quality/lots/{split.code}/")
    assert child.status_code == 200
    assert f'Split from lot <a href="/quality/lots/{lot.code}/"' in child.content.decode()
    assert AuditEntry.objects.filter(action="lot.split").count() == 1
    html = client.get(_url(ncr)).content.decode()
    assert "(some panels scrapped)" in html and f"/quality/lots/{split.code}/" in html
    assert not _on_floor_held(floor)


def test_scrap_all_ignores_ticked_panels(floor, held):
    _, ncr, _ = held
    first = Panel.objects.filter(lot=floor.lot).first()
    _client(floor.personas["quality_engineer"]).post(
        _url(ncr),
        {
            "disposition": "scrap_all",
            "note": "all burnt",
            "pin": PIN,
            **QA,
            "panels": [str(first.pk)],
        },
    )
    lot = Lot.objects.get(pk=floor.lot.pk)
    assert lot.status == "scrapped" and not Lot.objects.filter(split_from=lot).exists()


def test_only_the_disposition_releases_the_hold(floor, held):
    step, ncr, _ = held
    operator = _client(floor.personas["operator"])
    sample2 = {"quantity": "surface_copper", "value": "41", "unit": "um", "sample_index": "2"}
    # Signing the step off is refused while held, however often it is tried.
    for _ in range(2):
        reply = operator.post(
            f"/floor/steps/{step.pk}/complete/", {"pin": PIN, "meaning": "performed_by"}
        )
        assert reply.status_code == 409 and "on hold" in reply.content.decode()
        assert _on_floor_held(floor)
    supervisor = _client(floor.personas["supervisor"])
    supervisor.post(_url(ncr), {"disposition": "use_as_is", "note": "fine", "pin": PIN, **QA})
    assert _on_floor_held(floor)
    assert Hold.objects.get(ncr=ncr).released_at is None
    _client(floor.personas["quality_engineer"]).post(
        _url(ncr), {"disposition": "use_as_is", "note": "fine", "pin": PIN, **QA}
    )
    assert Hold.objects.get(ncr=ncr).released_at is not None
    assert not _on_floor_held(floor)
    # the rest of the set could be recorded while held, and still can after release
    reply = operator.post(f"/floor/steps/{step.pk}/readings/", sample2)
    assert reply.status_code == 302
    assert Reading.objects.filter(lot_step=step, sample_index=2).exists()


# --- SPC limits -------------------------------------------------------------------------

NIST = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]
WINDOW = {
    "quantity": "hole_wall_copper",
    "min": 45.0,
    "max": 58.0,
    "unit": "um",
    "source": "test window (invented)",
    "attribute": False,
}


@pytest.fixture
def series(floor):
    step = helpers.start_at(floor, floor.lot)
    start = timezone.now() - dt.timedelta(minutes=30)
    for i, value in enumerate(NIST):
        when = start + dt.timedelta(minutes=i)
        reading = Reading.objects.create(
            lot_step=step,
            quantity="hole_wall_copper",
            entered_value=str(value),
            entered_unit="um",
            value=value,
            unit="um",
            operator=floor.personas["operator"],
            captured_at=when,
            recorded_at=when,
            window=WINDOW,
            in_window=True,
        )
        event = OutboxEvent.objects.create(
            kind="reading.recorded", payload={"reading": reading.pk, "message": "test"}
        )
        alerts.handle_event(event.pk)
    return SeriesState.objects.get(quantity="hole_wall_copper")


def _limits_url(s: SeriesState) -> str:
    return f"/quality/spc/{s.key}/limits/"


def test_series_page_shows_limit_forms_to_quality_only(floor, series):
    qe = _client(floor.personas["quality_engineer"]).get(f"/quality/spc/{series.key}/")
    assert qe.status_code == 200 and 'name="action" value="fix"' in qe.content.decode()
    sup = _client(floor.personas["supervisor"]).get(f"/quality/spc/{series.key}/")
    assert sup.status_code == 200 and 'value="fix"' not in sup.content.decode()


def test_fix_limits_is_audited_and_shown(floor, series):
    client = _client(floor.personas["quality_engineer"])
    reply = client.post(
        _limits_url(series), {"action": "fix", "centre": "50", "ucl": "56", "lcl": "44,5"}
    )
    assert reply.status_code == 302
    series.refresh_from_db()
    assert (series.limits["centre"], series.limits["ucl"], series.limits["lcl"]) == (50, 56, 44.5)
    assert series.limits_fixed
    assert AuditEntry.objects.filter(action="spc.limits_fixed").count() == 1
    html = client.get(f"/quality/spc/{series.key}/").content.decode()
    # shown rounded to the quantity's resolution (0.1 um for hole copper), stored exactly
    assert "UCL 56 ·" in html and "LCL 44.5 " in html


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"centre": "50", "ucl": "44", "lcl": "56"}, "lcl &lt;= centre &lt;= ucl"),
        ({"centre": "fifty", "ucl": "56", "lcl": "44"}, "Centre line must be a number"),
        ({"centre": "50", "ucl": "", "lcl": "44"}, "UCL must be a number"),
        ({"centre": "50", "ucl": "inf", "lcl": "44"}, "UCL must be a finite number"),
    ],
)
def test_bad_limits_are_refused_inline(floor, series, data, message):
    before = series.limits
    reply = _client(floor.personas["quality_engineer"]).post(
        _limits_url(series), {"action": "fix", **data}
    )
    assert reply.status_code == 400
    html = reply.content.decode()
    assert 'id="limits-error"' in html and message in html
    series.refresh_from_db()
    assert series.limits == before
    assert not AuditEntry.objects.filter(action__startswith="spc.limits").exists()


def test_recompute_from_baseline_days_matches_handbook(floor, series):
    client = _client(floor.personas["quality_engineer"])
    client.post(_limits_url(series), {"action": "fix", "centre": "50", "ucl": "60", "lcl": "40"})
    tz = ZoneInfo(settings.SITE_TIME_ZONE)
    today = timezone.localtime(timezone.now(), tz).date()
    reply = client.post(
        _limits_url(series),
        {
            "action": "recompute",
            "start": (today - dt.timedelta(days=1)).isoformat(),
            "end": today.isoformat(),
        },
    )
    assert reply.status_code == 302
    series.refresh_from_db()
    assert series.limits["centre"] == pytest.approx(50.81, abs=0.005)
    assert series.limits["ucl"] == pytest.approx(55.80, abs=0.01)
    assert series.limits["lcl"] == pytest.approx(45.82, abs=0.01)
    assert AuditEntry.objects.filter(action="spc.limits_recomputed").count() == 1


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"start": "2020-01-01", "end": "2020-01-02"}, "at least"),
        ({"start": "yesterday", "end": "2020-01-02"}, "must be a date like"),
        ({"start": "2020-01-05", "end": "2020-01-02"}, "must start before it ends"),
        ({"start": "", "end": "2020-01-02"}, "Give the baseline"),
    ],
)
def test_bad_baseline_is_refused_inline(floor, series, data, message):
    reply = _client(floor.personas["quality_engineer"]).post(
        _limits_url(series), {"action": "recompute", **data}
    )
    assert reply.status_code == 400 and message in reply.content.decode()


@pytest.mark.parametrize("who", ["supervisor", "operator", "process_engineer"])
def test_limits_need_a_quality_engineer(floor, series, who):
    reply = _client(floor.personas[who]).post(
        _limits_url(series), {"action": "fix", "centre": "50", "ucl": "56", "lcl": "44"}
    )
    assert reply.status_code == 403
    assert "Only a quality engineer can fix control limits" in reply.content.decode()


def test_limits_of_unknown_series_or_action(floor, series):
    client = _client(floor.personas["quality_engineer"])
    reply = client.post("/quality/spc/nope|x|-/limits/", {"action": "fix"})
    assert reply.status_code == 404 and "not stored yet" in reply.content.decode()
    reply = client.post(_limits_url(series), {"action": "delete"})
    assert reply.status_code == 400 and "use fix, recompute or rules" in reply.content.decode()


def test_quality_engineer_chooses_the_run_rules(floor, series):
    from shopfloor.audit.models import AuditEntry

    client = _client(floor.personas["quality_engineer"])
    page = client.get(f"/quality/spc/{series.key}/").content.decode()
    assert 'id="rules-form"' in page and "run rules: Western Electric" in page
    reply = client.post(_limits_url(series), {"action": "rules", "rules": "nelson"})
    assert reply.status_code == 302
    series.refresh_from_db()
    assert series.rules == "nelson"
    entry = AuditEntry.objects.get(action="spc.rules_changed")
    assert entry.before == {"rules": "western_electric"} and entry.after == {"rules": "nelson"}
    assert "run rules: Nelson" in client.get(f"/quality/spc/{series.key}/").content.decode()

    reply = client.post(_limits_url(series), {"action": "rules", "rules": "shewhart_9"})
    assert reply.status_code == 400
    assert "allowed: western_electric (Western Electric), nelson (Nelson)" in reply.content.decode()
    series.refresh_from_db()
    assert series.rules == "nelson"  # nothing saved

    sup = _client(floor.personas["supervisor"])
    reply = sup.post(_limits_url(series), {"action": "rules", "rules": "western_electric"})
    assert reply.status_code == 403


# --- locked badges ----------------------------------------------------------------------


def _lock(person: Person) -> None:
    for _ in range(settings.PIN_MAX_FAILURES):
        with pytest.raises(Exception, match="Wrong PIN"):
            people.verify_pin(person, "0000")
    person.refresh_from_db()
    assert person.is_locked


@pytest.mark.parametrize("who", ["supervisor", "admin"])
def test_unlock_page_lists_and_unlocks(floor, who):
    victim = floor.personas["operator"]
    _lock(victim)
    person = floor.personas.get(who) or make_person(Role.ADMIN, "1106", "Ada Admin")
    client = _client(person)
    html = client.get("/floor/people/locked/").content.decode()
    assert "Olu Operator" in html and f"/floor/people/{victim.pk}/unlock/" in html
    reply = client.post(f"/floor/people/{victim.pk}/unlock/")
    assert reply.status_code == 302
    victim.refresh_from_db()
    assert not victim.is_locked and victim.pin_failures == 0
    assert AuditEntry.objects.filter(action="person.unlocked").count() == 1
    assert "No badge is locked" in client.get("/floor/people/locked/").content.decode()


@pytest.mark.parametrize("who", ["operator", "quality_engineer", "process_engineer", "outsider"])
def test_unlock_refused_to_others_with_reason(floor, who):
    victim = floor.personas["supervisor"]
    _lock(victim)
    client = _client(floor.personas[who])
    for reply in (
        client.get("/floor/people/locked/"),
        client.post(f"/floor/people/{victim.pk}/unlock/"),
    ):
        assert reply.status_code == 403
        assert "supervisor or administrator" in reply.content.decode() or (
            "no shop-floor role" in reply.content.decode()
        )
    victim.refresh_from_db()
    assert victim.is_locked


def test_unlock_unknown_badge_is_404(floor):
    reply = _client(floor.personas["supervisor"]).post("/floor/people/999999/unlock/")
    assert reply.status_code == 404 and "No badge with id" in reply.content.decode()


def _corrected_back_inside(floor, reading) -> None:
    floor_services.correct_reading(
        person=floor.personas["operator"],
        reading_id=reading.pk,
        value="41.5",
        unit="um",
        reason="typed 70 for 41.5",
    )
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)


def test_recording_error_offered_only_once_a_correction_brings_the_set_back(floor, held):
    _step, ncr, reading = held
    qe = _client(floor.personas["quality_engineer"])
    assert 'value="recording_error"' not in qe.get(_url(ncr)).content.decode()
    _corrected_back_inside(floor, reading)
    page = qe.get(_url(ncr)).content.decode()
    assert "Back in window after a correction" in page
    assert 'value="recording_error"' in page
    response = qe.post(
        _url(ncr),
        {"disposition": "recording_error", "note": "typing slip", "pin": PIN, **QA},
    )
    assert response.status_code == 302
    ncr.refresh_from_db()
    assert ncr.disposition == "recording_error" and ncr.status == "closed"
    assert not Lot.objects.get(pk=floor.lot.pk).on_hold


def test_recording_error_that_also_scraps_a_panel_is_refused(floor, held):
    """Without the page's script the panel choices are still sent: refused, nothing saved."""
    _step, ncr, reading = held
    _corrected_back_inside(floor, reading)
    serial = floor.lot.panels.order_by("serial").first().serial
    response = _client(floor.personas["quality_engineer"]).post(
        _url(ncr),
        {"disposition": "recording_error", f"action-{serial}": "scrap", "note": "slip", "pin": PIN}
        | QA,
    )
    assert response.status_code == 400
    assert "keeps every panel as it is" in response.content.decode()
    _still_open(floor, ncr)


def test_a_later_reading_out_again_withdraws_the_back_in_window_note(floor, held):
    step, ncr, reading = held
    _corrected_back_inside(floor, reading)
    ncr.refresh_from_db()
    assert ncr.correction_note
    current = Reading.objects.get(lot_step=step, quantity="surface_copper", superseded_by=None)
    floor_services.correct_reading(
        person=floor.personas["operator"],
        reading_id=current.pk,
        value="75",
        unit="um",
        reason="re-measured: the first value was right",
        confirm_out_of_window=True,
    )
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)
    ncr.refresh_from_db()
    assert ncr.correction_note == ""
    assert 'value="recording_error"' not in (
        _client(floor.personas["quality_engineer"]).get(_url(ncr)).content.decode()
    )
