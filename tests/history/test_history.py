"""Lot history, genealogy both ways, material recall, search, exports and read scoping."""

from __future__ import annotations

import csv
import datetime as dt
import io
import subprocess

import pytest
from django.http import StreamingHttpResponse
from django.utils import timezone

from shopfloor.audit import services as audit
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant import services as plant_services
from shopfloor.plant.models import Equipment, MaterialLot, WorkCenter
from shopfloor.quality.models import Alert, Hold, Nonconformance
from shopfloor.quality.read import history
from tests import factories

pytestmark = pytest.mark.django_db

# A window as the routing builder snapshots it; the source names where the limit comes
# from (IPC-6012 sets minimum plated copper in holes by class; value here is a test value).
WINDOW = {
    "quantity": "hole_copper_thickness",
    "unit": "um",
    "min": 20.0,
    "max": 40.0,
    "target": 25.0,
    "samples": 3,
    "source": "IPC-6012 Table 3-3 (class 2, test)",
}


@pytest.fixture
def rich(floor):
    """The floor lot with a done step (material lot, equipment, readings incl. a corrected
    one, signature), an NCR + hold + alert, a routing move audit entry and a split lot."""
    lot = floor.lot
    op = floor.personas["operator"]
    step = lot.steps.order_by("position").first()
    prepreg = MaterialLot.objects.create(
        code="PP-7781-0042",
        kind="prepreg",
        description="Prepreg 1080 roll",
        supplier_lot="S-99812",
        received_on=dt.date(2030, 1, 5),
    )
    step.material_lots.add(prepreg)
    now = timezone.now()
    step.equipment = floor.gauge
    step.status = LotStep.Status.DONE
    step.started_at, step.started_by = now - dt.timedelta(hours=2), op
    step.completed_at, step.completed_by = now - dt.timedelta(hours=1), op
    step.save()
    r_ok = Reading.objects.create(
        lot_step=step,
        quantity="hole_copper_thickness",
        entered_value="25.1",
        entered_unit="um",
        value=25.1,
        unit="um",
        sample_index=1,
        operator=op,
        equipment=floor.gauge,
        captured_at=now - dt.timedelta(minutes=100),
        window=WINDOW,
        in_window=True,
    )
    r_new = Reading.objects.create(
        lot_step=step,
        quantity="hole_copper_thickness",
        entered_value="22.0",
        entered_unit="um",
        value=22.0,
        unit="um",
        sample_index=2,
        operator=op,
        captured_at=now - dt.timedelta(minutes=80),
        window=WINDOW,
        in_window=True,
        via="correction",
    )
    Reading.objects.create(
        lot_step=step,
        quantity="hole_copper_thickness",
        entered_value="2.2",
        entered_unit="um",
        value=2.2,
        unit="um",
        sample_index=2,
        operator=op,
        captured_at=now - dt.timedelta(minutes=90),
        window=WINDOW,
        in_window=False,
        superseded_by=r_new,
        correction_reason="decimal point slipped on entry",
    )
    r_bad = Reading.objects.create(
        lot_step=step,
        quantity="hole_copper_thickness",
        entered_value="18.0",
        entered_unit="um",
        value=18.0,
        unit="um",
        sample_index=3,
        operator=op,
        captured_at=now - dt.timedelta(minutes=70),
        window=WINDOW,
        in_window=False,
    )
    sig = audit.sign(
        person=op,
        meaning="performed_by",
        record_type="lot_step",
        record_id=step.pk,
        content={"lot": lot.pk},
    )
    step.signature = sig
    step.save(update_fields=["signature"])
    alert = Alert.objects.create(
        kind="out_of_window",
        severity="critical",
        dedupe_key="h1",
        lot=lot,
        lot_step=step,
        reading=r_bad,
        message="hole copper 18 um below 20 um",
    )
    ncr = Nonconformance.objects.create(
        number="NCR-0001",
        lot=lot,
        lot_step=step,
        alert=alert,
        description="Thin hole copper, sample 3",
        status="closed",
        disposition="use_as_is",
        disposition_note="Customer deviation accepted",
        dispositioned_at=now - dt.timedelta(minutes=30),
    )
    ncr.readings.add(r_bad)
    Hold.objects.create(
        lot=lot,
        lot_step=step,
        alert=alert,
        ncr=ncr,
        reason="Out of window",
        opened_at=now - dt.timedelta(minutes=69),
        released_at=now - dt.timedelta(minutes=30),
    )
    audit.record(
        actor=floor.personas["process_engineer"].user,
        action="lot.moved_revision",
        object_type="lot",
        object_id=lot.pk,
        before={"routing_revision": 1},
        after={"routing_revision": 2, "reason": "drill program corrected"},
    )
    child = plant_services.create_lot(
        actor=None,
        code="SPLIT-1",
        routing_revision=floor.routing,
        images=[(floor.job, 4)],
        panels=1,
        split_from=lot,
    )
    return {"lot": lot, "step": step, "prepreg": prepreg, "child": child, "r_ok": r_ok}


def _qe(client, floor):
    client.force_login(floor.personas["quality_engineer"].user)
    return client


def test_timeline_has_every_kind_of_event(rich, floor, client):
    html = _qe(client, floor).get(f"/quality/lots/{rich['lot'].code}/").content.decode()
    for text in [
        "Started",
        "Completed",
        "PP-7781-0042",
        floor.gauge.code,
        "IPC-6012 Table 3-3",
        "SUPERSEDED (reason: decimal point slipped on entry)",
        "(superseded)",
        "Signed: Performed by",
        "Hold opened",
        "Hold released",
        "Alert: Reading out of window",
        "NCR NCR-0001 opened",
        "dispositioned: Use as is",
        "Moved to another routing revision",
        "drill program corrected",
        "SPLIT-1",
        "Olu Operator",
    ]:
        assert text in html, text


def test_superseded_reading_in_json_with_reason(rich, floor, client):
    data = _qe(client, floor).get(f"/quality/api/lots/{rich['lot'].code}/history.json").json()
    readings = data["steps"][0]["readings"]
    old = [r for r in readings if r["superseded_by"]]
    assert len(old) == 1 and old[0]["correction_reason"] == "decimal point slipped on entry"
    assert data["lot"]["splits"] == ["SPLIT-1"]
    assert any(e["kind"] == "moved" for e in data["timeline"])


def test_ipc_1782_fields_present_in_json(rich, floor, client):
    """From memory of IPC-1782: material level M2 needs the material lots (with their
    supplier identity) tied to the production lot; process level P2 needs each process
    step of the lot with when, who, which equipment and its measurements. Check every
    field the claim in shopfloor.quality.read.history relies on is in the JSON history."""
    data = _qe(client, floor).get(f"/quality/api/lots/{rich['lot'].code}/history.json").json()
    assert data["traceability"]["material"] == "M2"
    assert data["traceability"]["process"] == "P2"
    fields = history.TRACEABILITY_FIELDS
    lot = data["lot"]
    assert all(k in lot for k in fields["M2"]["lot"])
    done = data["steps"][0]
    assert all(k in done for k in fields["M2"]["step"] + fields["P2"]["step"])
    material = done["material_lots"][0]
    assert all(material[k] for k in fields["M2"]["material_lot"])
    assert material["supplier_lot"] == "S-99812"
    assert done["equipment"] and done["started_by"] and done["completed_at"]
    reading = done["readings"][0]
    assert all(k in reading for k in fields["P2"]["reading"])
    assert reading["source"].startswith("IPC-6012")
    assert lot["panels"][0]["jobs"][0]["job"] == floor.job.number


def test_genealogy_both_ways(rich, floor, client):
    c = _qe(client, floor)
    job_html = c.get(f"/quality/jobs/{floor.job.number}/").content.decode()
    assert rich["lot"].code in job_html and "SPLIT-1" in job_html
    panel = rich["lot"].panels.first()
    other = factories.make_job(floor.job.part_revision, floor.routing)
    from shopfloor.plant.models import PanelImage

    PanelImage.objects.create(panel=panel, job=other, count=2)
    panel_html = c.get(f"/quality/panels/{panel.serial}/").content.decode()
    assert floor.job.number in panel_html and other.number in panel_html
    assert rich["lot"].code in panel_html


def test_material_lot_recall(rich, floor, client):
    html = _qe(client, floor).get("/quality/materials/PP-7781-0042/").content.decode()
    assert rich["lot"].code in html and floor.job.number in html
    assert "SPLIT-1" not in html  # the split lot never used that prepreg


def test_split_lot_links_back(rich, floor, client):
    html = _qe(client, floor).get("/quality/lots/SPLIT-1/").content.decode()
    assert "Split from lot" in html and rich["lot"].code in html


def test_search_hits_no_hits_and_bad_ranges(rich, floor, client):
    c = _qe(client, floor)
    r = c.get("/quality/search/", {"material": "PP-7781-0042"})
    assert rich["lot"].code in r.content.decode() and b"1 lot(s) found" in r.content
    r = c.get("/quality/search/", {"job": floor.job.number})
    assert b"2 lot(s) found" in r.content
    r = c.get("/quality/search/", {"part": floor.job.part_revision.part.number, "customer": "TST"})
    assert b"2 lot(s) found" in r.content
    r = c.get("/quality/search/", {"equipment": floor.gauge.code})
    assert b"1 lot(s) found" in r.content
    r = c.get("/quality/search/", {"lot": "NO-SUCH-LOT"})
    assert r.status_code == 200 and b"No lots match this search." in r.content
    today = timezone.localdate()
    r = c.get(
        "/quality/search/",
        {"date_from": today.isoformat(), "date_to": (today - dt.timedelta(days=1)).isoformat()},
    )
    assert r.status_code == 400 and b"ends before it starts" in r.content
    r = c.get("/quality/search/", {"date_from": "2029-01-01", "date_to": "2030-06-01"})
    assert r.status_code == 400 and b"wider than 400 days" in r.content
    r = c.get("/quality/search/", {"date_from": "soon"})
    assert r.status_code == 400 and b"YYYY-MM-DD" in r.content
    r = c.get("/quality/search/", {"date_from": today.isoformat(), "date_to": today.isoformat()})
    assert b"2 lot(s) found" in r.content


def test_unknown_lot_job_panel_material_404(floor, client):
    c = _qe(client, floor)
    for url, word in [
        ("/quality/lots/NOPE/", b"No lot with code"),
        ("/quality/jobs/NOPE/", b"No job with number"),
        ("/quality/panels/NOPE/", b"No panel with serial"),
        ("/quality/materials/NOPE/", b"No material lot"),
        ("/quality/api/lots/NOPE/history.json", b"No lot with code"),
        ("/quality/lots/NOPE/record.pdf", b"No lot with code"),
        ("/quality/lots/NOPE/readings.csv", b"No lot with code"),
        ("/quality/spc/nothing/", b"No SPC series"),
    ]:
        r = c.get(url)
        assert r.status_code == 404 and word in r.content, url


def test_role_scoping(rich, floor, client):
    drill = WorkCenter.objects.get(code="drilling")
    first_wc = rich["step"].work_center
    stranger = factories.make_person("operator", "3001", "Nia Night", work_centers=[drill])
    local = factories.make_person("operator", "3002", "Rio Local", work_centers=[first_wc])
    client.force_login(stranger.user)
    r = client.get(f"/quality/lots/{rich['lot'].code}/")
    assert r.status_code == 403 and b"has not been at any of your work centers" in r.content
    assert client.get(f"/quality/api/lots/{rich['lot'].code}/history.json").status_code == 403
    r = client.get("/quality/search/", {"material": "PP-7781-0042"})
    assert b"No lots match" in r.content
    client.force_login(local.user)
    assert client.get(f"/quality/lots/{rich['lot'].code}/").status_code == 200
    client.force_login(floor.personas["outsider"].user)
    r = client.get(f"/quality/lots/{rich['lot'].code}/")
    assert r.status_code == 403 and b"no shop-floor role" in r.content
    for role in ("supervisor", "process_engineer", "quality_engineer"):
        client.force_login(floor.personas[role].user)
        assert client.get(f"/quality/lots/{rich['lot'].code}/").status_code == 200


def test_csv_is_streamed_with_every_reading(rich, floor, client):
    r = _qe(client, floor).get(f"/quality/lots/{rich['lot'].code}/readings.csv")
    assert isinstance(r, StreamingHttpResponse) and r.status_code == 200
    rows = list(csv.DictReader(io.StringIO(b"".join(r.streaming_content).decode())))
    readings = [x for x in rows if x["record"] == "reading"]
    assert len(readings) == 4
    superseded = [x for x in readings if x["superseded_by"]]
    assert superseded[0]["note"] == "decimal point slipped on entry"
    assert {x["window_source"] for x in readings} == {WINDOW["source"]}
    assert any(x["record"] == "step" and x["what"] == "completed" for x in rows)
    assert any(x["record"] == "ncr" and "use_as_is" in x["note"] for x in rows)


def test_pdf_lot_record_contains_part_source_and_class(rich, floor, client, tmp_path):
    c = _qe(client, floor)
    for suffix in ("",):
        r = c.get(f"/quality/lots/{rich['lot'].code}/record.pdf{suffix}")
        assert r.status_code == 200 and r["Content-Type"] == "application/pdf"
        pdf = tmp_path / "lot.pdf"
        pdf.write_bytes(r.content)
        text = subprocess.run(
            ["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True, check=True
        ).stdout
        assert floor.job.part_revision.part.number in text
        assert "IPC-6012 Table 3-3" in text
        assert "Class 2" in text and "IPC class 2" in text
        assert "NCR-0001" in text  # the reading outside the window names its NCR
        assert "M2" in text and "P2" in text  # traceability claim in the footer
    # A lot alone never gets a certificate: certificates are issued with a shipment,
    # only when the records show conformance (issue 12).
    refused = c.get(f"/quality/lots/{rich['lot'].code}/record.pdf?kind=certificate")
    assert refused.status_code == 409
    assert "issued with a shipment" in refused.content.decode()


def test_reading_summary_against_window(rich):
    from shopfloor.access import scope_for
    from shopfloor.quality.read.exports import reading_summary

    h = history.lot_history(scope_for(_qe_user(rich)), rich["lot"].code)
    (s,) = reading_summary(h)
    # superseded 2.2 is left out; 25.1, 22.0, 18.0 remain
    assert s["count"] == 3 and s["min"] == 18.0 and s["max"] == 25.1
    assert s["mean"] == pytest.approx((25.1 + 22.0 + 18.0) / 3)
    assert "1 outside" in s["verdict"] and "NCR-0001" in s["verdict"]


def _qe_user(rich):
    from shopfloor.plant.models import Person

    return Person.objects.get(badge_number="1004").user


def test_overview_lists_open_items(rich, floor, client):
    Alert.objects.create(
        kind="late",
        severity="warning",
        dedupe_key="ov1",
        lot=rich["lot"],
        message="Job is late now",
    )
    html = _qe(client, floor).get("/quality/").content.decode()
    assert "Job is late now" in html and "No open holds." in html
    assert Equipment.objects.exists()


def test_busy_step_is_summarised_on_the_page_but_complete_in_exports(floor, client):
    """A step with many readings shows one aggregate line per quantity plus every notable
    reading; the CSV export still carries every reading (nothing is hidden from audit)."""
    from tests.factories import bulk_readings

    step = floor.lot.steps.order_by("position").first()
    count = history.READING_EVENTS_PER_STEP * 3
    bulk_readings(step, floor.personas["operator"], count)  # values 25.0 .. 28.0, window 20-30
    bad = Reading.objects.filter(lot_step=step).order_by("pk").first()
    Reading.objects.filter(pk=bad.pk).update(value=31.5, in_window=False)
    page = _qe(client, floor).get(f"/quality/lots/{floor.lot.code}/")
    text = page.content.decode()
    assert page.status_code == 200
    assert f"{count} Copper thickness readings at {step.name}" in text  # its label
    assert "25 to 31.5 µm" in text  # min and max come from the database aggregate
    assert "1 OUT OF WINDOW (listed)" in text
    assert "= 31.5 µm" in text  # the out-of-window reading is listed on its own
    assert text.count("Copper thickness sample") == 1  # in-window ones are summarised
    csv_reply = client.get(f"/quality/lots/{floor.lot.code}/readings.csv")
    rows = list(csv.DictReader(io.StringIO(b"".join(csv_reply.streaming_content).decode())))
    assert sum(1 for x in rows if x["record"] == "reading") == count
