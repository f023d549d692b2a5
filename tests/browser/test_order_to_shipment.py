"""One new order walked from entry to shipment in a real browser, without the admin and
without a shell.

The planner enters the job for a new part on the job page; the process engineer authors
its build spec in the form (copper typed as "0.5 oz"), watches the live preview, makes it
a draft revision in one click and releases it with the PIN; the planner releases the job
to the floor (office screens, 1366x768). Operators work every step: helpers post the
long middle through the same services the API calls, but layup (with its material scan,
an expired prepreg refused first), pattern plating with its readings, and final
inspection (readings and accepted quantity) go through the tablet (1024x768). One AOI
count is out of window; the quality engineer dispositions it per panel on the NCR page
(rework one panel, scrap one, use the rest as is); the rework (AOI repair and verify, the
library's default) runs; the planner ships on the shipping page; the certificate PDF is
read back with pdftotext (poppler-utils). The certificate must name IPC-6012 and the
class of the build spec, and never the shop's sourcing notes ("from memory").
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess

import pytest
from django.utils import timezone
from playwright.sync_api import expect

from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Job, Lot, MaterialLot, PartRevision
from shopfloor.quality.models import Nonconformance
from shopfloor.quality.services import alerts
from tests import helpers
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

OFFICE = {"width": 1366, "height": 768}


def _materials() -> None:
    received = timezone.localdate() - dt.timedelta(days=4)
    for code, kind in (
        ("CORE-E2E", "laminate"),
        ("PP-E2E", "prepreg"),
        ("CU-E2E", "foil"),
    ):
        MaterialLot.objects.create(code=code, kind=kind, description=kind, received_on=received)
    MaterialLot.objects.create(
        code="PP-E2E-OLD",
        kind="prepreg",
        description="prepreg past its shelf life",
        received_on=timezone.localdate() - dt.timedelta(days=150),
    )


def _finish_until(lot, person, code_prefix):
    """Helpers: the long middle, through the floor services (as the API would)."""
    return helpers.advance_to(lot, lambda s: s.code.startswith(code_prefix), by=person, walk=True)


def _tablet_readings(page, step):
    for m in helpers.one_entry_per_quantity(step.plan):
        for sample in range(1, int(m.get("samples") or 1) + 1):
            row = page.locator(f"#r-{step.pk}-{m['quantity']}-{sample}")
            row.locator("input[name=value]").fill(str(helpers.in_window_value(m)))
            row.locator("input[name=value]").press("Enter")
            expect(row.locator(".badge.ok")).to_be_visible()


def _sign(page):
    page.fill("#sign-pin", PIN)
    page.click("button[value=complete]")
    expect(page.locator(".notice.success")).to_contain_text("signed off")


def test_order_to_shipment_in_the_browser(persona_page, floor, shoot, tmp_path):
    _materials()
    customer = floor.routing.part_revision.part.customer
    operator = floor.personas["operator"]

    # --- the planner enters the job for a new part ---------------------------------------
    office = persona_page("planner", viewport=OFFICE)
    office.goto("/jobs/new/")
    office.fill("input[name=customer]", customer.code)
    office.fill("input[name=part_number]", "E2E-4L-01")
    office.fill("input[name=part_revision]", "A")
    office.fill("input[name=quantity]", "8")
    office.fill("input[name=due_date]", (timezone.localdate() + dt.timedelta(days=15)).isoformat())
    office.select_option("select[name=ipc_class]", "2")
    shoot(office, "e2e-01-job-entry")
    office.click("button:has-text('Enter the job')")
    office.wait_for_url("**/jobs/*/")
    number = office.url.rstrip("/").split("/")[-1]
    job = Job.objects.get(number=number)
    pr = PartRevision.objects.get(part__number="E2E-4L-01", revision="A")
    assert pr.build_spec == {}

    # --- the engineer authors the spec in the form, drafts and releases it ----------------
    eng = persona_page("process_engineer", viewport=OFFICE)
    eng.goto(f"/engineering/part-revisions/{pr.pk}/spec/")
    eng.fill("input[name=outer_copper_base_um]", "0.5 oz")
    eng.select_option("select[name=finish]", "enig")
    expect(eng.locator("#spec-preview")).to_contain_text("Layup")
    shoot(eng, "e2e-01b-spec-form")
    eng.fill("input[name=reason]", "first routing for the new part")
    eng.click("button[value=draft]")
    eng.wait_for_url("**/engineering/revisions/*/")
    eng.fill("#pin", PIN)
    eng.click("button:has-text('Release with my signature')")
    expect(eng.locator(".signature")).to_contain_text("Released by")
    shoot(eng, "e2e-01c-routing-released")
    pr.refresh_from_db()
    assert pr.build_spec["finish"] == "enig" and pr.build_spec["outer_copper_base_um"] == 17.39

    # --- the planner releases the job to the floor ---------------------------------------
    office.reload()
    office.fill(".release-form input[name=boards_per_panel]", "4")
    office.click("button:has-text('Release to the floor')")
    expect(office.locator("body")).to_contain_text("Released to the floor")
    shoot(office, "e2e-02-released")
    lot = Lot.objects.filter(panels__images__job=job).distinct().get()
    panels = list(lot.panels.order_by("serial"))
    assert len(panels) >= 3

    # --- layup on the tablet, with the material scan -------------------------------------
    tablet = persona_page("operator")
    layup = _finish_until(lot, operator, "layup")
    tablet.goto(f"/floor/lots/{lot.code}/")
    tablet.click("button[value=start]")
    tablet.fill("#material-code", "PP-E2E-OLD")
    tablet.click("button[value=material]")
    expect(tablet.locator("#refusal")).to_contain_text("expired on")
    shoot(tablet, "e2e-03-layup-expired-prepreg")
    for code in ("CORE-E2E", "PP-E2E"):
        tablet.fill("#material-code", code)
        tablet.click("button[value=material]")
        expect(tablet.locator(".notice.success")).to_contain_text(code)
    tablet.select_option("#material-pick", "CU-E2E")
    tablet.click("button[value=material]")
    expect(tablet.locator("#materials")).to_contain_text("CU-E2E")
    shoot(tablet, "e2e-04-layup-materials")
    _sign(tablet)
    layup.refresh_from_db()
    assert layup.status == "done" and layup.material_uses.count() == 3

    # --- pattern plating on the tablet, with its readings --------------------------------
    plating = _finish_until(lot, operator, "pattern_plate_copper")
    tablet.goto(f"/floor/lots/{lot.code}/")
    tablet.click("button[value=start]")
    _tablet_readings(tablet, plating)
    shoot(tablet, "e2e-05-plating-readings")
    _sign(tablet)

    # --- outer AOI finds defects: quality dispositions per panel -------------------------
    aoi = _finish_until(lot, operator, "outer_aoi")
    floor_services.start_step(person=operator, lot_step_id=aoi.pk)
    bad = helpers.record(floor, aoi, "aoi_defects", 2, unit="count")
    alerts.handle_event(helpers.event_for(bad).pk)
    ncr = Nonconformance.objects.get(lot=lot)
    qe = persona_page("quality_engineer", viewport=OFFICE)
    qe.goto(f"/quality/ncrs/{ncr.number}/")
    qe.click("button[data-set-all=use_as_is]")
    qe.check(f"input[name='action-{panels[0].serial}'][value=rework]")
    qe.check(f"input[name='action-{panels[1].serial}'][value=scrap]")
    assert qe.locator("select[name=rework_route]").first.input_value() == "aoi_repair"
    qe.select_option("#scrap_reason", "short")
    qe.select_option("#root_cause", "process_drift")
    qe.fill("#corrective_action", "Etch conveyor speed verified at each shift start")
    qe.fill("#note", "Two opens on the first panel are repairable; a short on the second is not")
    qe.fill("#pin", PIN)
    shoot(qe, "e2e-06-ncr-per-panel")
    qe.click("#disposition-form button[type=submit]")
    qe.wait_for_selector("#decision")
    decision = qe.inner_text("#decision")
    assert "Per panel (mixed)" in decision and "Repair at the AOI verify station" in decision
    shoot(qe, "e2e-07-ncr-decided")
    floor_services.complete_step(person=operator, lot_step_id=aoi.pk, pin=PIN)
    # the rework runs: repair, then verify (zero defects), then the route goes on
    repair = LotStep.objects.current_for(lot)
    assert repair.is_rework and panels[0].serial in repair.instructions
    helpers.finish_step(operator, repair)
    helpers.finish_step(operator, LotStep.objects.current_for(lot))

    # --- final inspection on the tablet: readings and the accepted quantity ---------------
    final = _finish_until(lot, operator, "final_inspection")
    tablet.goto(f"/floor/lots/{lot.code}/")
    tablet.click("button[value=start]")
    _tablet_readings(tablet, final)
    good = floor_services.lot_good_boards(lot)[job.pk]
    assert tablet.input_value(f"#acc-{job.number}") == str(good)
    tablet.click("button[value=accept]")
    expect(tablet.locator(".notice.success")).to_contain_text(f"{good} of job {job.number}")
    shoot(tablet, "e2e-08-final-inspection")
    _sign(tablet)
    helpers.finish_step(operator, LotStep.objects.current_for(lot))  # pack
    lot.refresh_from_db()
    assert lot.status == "complete"

    # --- the planner ships; the certificate is read back ---------------------------------
    ship = persona_page("planner", viewport=OFFICE)
    ship.goto(f"/shipping/jobs/{job.number}/")
    shoot(ship, "e2e-09-ship-form")
    ship.fill("#ship-qty", str(job.quantity))
    ship.click("button:has-text('Ship and issue the certificate')")
    expect(ship.locator(".notice.success")).to_contain_text("certificate COC-")
    expect(ship.locator("h1")).to_contain_text("CLOSED")
    shoot(ship, "e2e-10-shipped")
    href = ship.locator("#shipments a").first.get_attribute("href")
    pdf = ship.request.get(href)
    assert pdf.ok and pdf.headers["content-type"] == "application/pdf"
    if not shutil.which("pdftotext"):
        pytest.skip("pdftotext (poppler-utils) is not installed")
    path = tmp_path / "certificate.pdf"
    path.write_bytes(pdf.body())
    text = " ".join(
        subprocess.run(
            ["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True, check=True
        ).stdout.split()
    )
    for expected in (
        "Certificate of conformance",
        pr.part.number,
        lot.code,
        "IPC-6012 performance class 2",
        ncr.number,
        "Final inspection performed and signed by",
        f"This shipment {job.quantity}",
    ):
        assert expected in text, expected
    assert "from memory" not in text.lower() and "aoi_defects" not in text
