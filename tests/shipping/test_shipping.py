"""Shipping and the certificate of conformance, through the real services.

The lot is walked along its whole released route (readings in window, materials
scanned, final inspection accepting the good boards). The certificate's gate (every
step complete, every reading in window or covered by a signed disposition, no open NCR)
is the one issue 12 states; the characteristic table is checked against the IPC-6012
class named in the build spec. The PDF is read back with pdftotext (poppler-utils) and
its page count with pdfinfo.
"""

from __future__ import annotations

import shutil
import subprocess

import pytest

from shopfloor.errors import Conflict, NotAllowed
from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep, ScrapRecord
from shopfloor.plant.models import Lot, Role
from shopfloor.quality.models import Nonconformance
from shopfloor.quality.services import alerts, dispositions
from shopfloor.shipping import services
from shopfloor.shipping.models import Shipment
from tests import factories, helpers
from tests.factories import PIN
from tests.helpers import advance_to, finish_step, out_of_window_value

pytestmark = pytest.mark.django_db

QA = {"root_cause": "process_drift", "corrective_action": "Rectifier checked every shift"}


@pytest.fixture
def planner(floor):
    return factories.make_person(
        Role.ADMIN if not hasattr(Role, "PLANNER") else Role.PLANNER, "1006", "Pia Planner"
    )


@pytest.fixture
def small_job(floor):
    """A job of 6 boards on one lot of 2 panels x 4 images (8 boards)."""
    job = factories.make_job(floor.job.part_revision, floor.routing, quantity=6)
    lot = factories.make_lot(floor.routing, job, panels=2)
    return job, lot


def _walk(lot, person, until=None):
    while True:
        step = LotStep.objects.current_for(lot)
        if step is None or (until and until(step)):
            return step
        finish_step(person, step)


def _pdf_text(pdf: bytes, tmp_path) -> tuple[str, int]:
    if not shutil.which("pdftotext"):
        pytest.skip("pdftotext (poppler-utils) is not installed")
    path = tmp_path / "cert.pdf"
    path.write_bytes(pdf)
    text = subprocess.run(
        ["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True, check=True
    ).stdout
    info = subprocess.run(["pdfinfo", str(path)], capture_output=True, text=True, check=True)
    pages = int(next(x for x in info.stdout.splitlines() if x.startswith("Pages:")).split()[1])
    return text, pages


def test_partial_shipments_close_the_job_and_the_certificate_reads_right(
    floor, small_job, planner, tmp_path
):
    job, lot = small_job
    op = floor.personas["operator"]
    # an operator crosses out one board on the first panel at outer AOI
    aoi = _walk(lot, op, until=lambda s: s.code == "outer_aoi")
    floor_services.start_step(person=op, lot_step_id=aoi.pk)
    panel = lot.panels.order_by("serial").first()
    floor_services.record_scrap(
        person=op, lot_step_id=aoi.pk, panel_serial=panel.serial, boards=1, reason_code="short"
    )
    assert floor_services.lot_good_boards(lot) == {job.pk: 7}
    assert _walk(lot, op) is None
    lot.refresh_from_db()
    assert lot.status == Lot.Status.COMPLETE

    cert = services.ship(person=planner, job_number=job.number, quantity=4, lot_codes=[lot.code])
    state = services.job_shipping(job)
    assert state.shipped == 4 and not state.closed and state.available == 3
    with pytest.raises(Conflict) as exc:  # 3 accepted remain, but only 2 are still ordered
        services.ship(person=planner, job_number=job.number, quantity=3, lot_codes=[lot.code])
    assert "2 board(s) left to ship of 6 ordered" in str(exc.value.problems)
    services.ship(person=planner, job_number=job.number, quantity=2, lot_codes=[lot.code])
    assert services.job_closed(job) and Shipment.objects.filter(job=job).count() == 2

    text, pages = _pdf_text(bytes(cert.pdf), tmp_path)
    assert 1 <= pages <= 2
    flat = " ".join(text.split())
    part = job.part_revision
    for expected in (
        "Certificate of conformance",
        cert.number,
        part.part.number,
        lot.code,
        "IPC-6012 performance class 2",
        "Plated hole wall copper",
        "Final inspection performed and signed by",
        "Olu Operator",
    ):
        assert expected in flat, expected
    assert "Ordered 6" in flat and "This shipment 4" in flat
    assert "from memory" not in text.lower() and "confirm against" not in text.lower()
    for internal in ("pattern_plate_copper", "lot_step", "outer_aoi", "routing revision"):
        assert internal not in text  # no internal step codes or record names


def test_open_ncr_and_unfinished_steps_refuse_the_certificate(floor, small_job, planner):
    job, lot = small_job
    op = floor.personas["operator"]
    step = advance_to(lot, lambda s: s.code == helpers.PLATING, by=op, walk=True)
    floor_services.start_step(person=op, lot_step_id=step.pk)
    window = next(m for m in step.plan if m["quantity"] == "surface_copper")
    reading = helpers.record(floor, step, "surface_copper", out_of_window_value(window))
    alerts.handle_event(helpers.event_for(reading).pk)
    ncr = Nonconformance.objects.get(lot=lot)
    with pytest.raises(Conflict) as exc:
        services.ship(person=planner, job_number=job.number, quantity=1, lot_codes=[lot.code])
    reasons = " | ".join(p["problem"] for p in exc.value.problems)
    assert f"{ncr.number} on lot {lot.code} is open" in reasons
    assert "has not completed every step" in reasons
    assert "no signed disposition covers it" in reasons
    assert "no accepted quantity" in reasons
    assert not Shipment.objects.exists()


def test_only_a_planner_ships(floor, small_job):
    job, lot = small_job
    with pytest.raises(NotAllowed):
        services.ship(
            person=floor.personas["quality_engineer"],
            job_number=job.number,
            quantity=1,
            lot_codes=[lot.code],
        )


def test_mixed_disposition_applies_every_panel_action(floor, planner, tmp_path):
    """Rework one panel, scrap the other, at outer AOI; nothing ticked is dropped, the
    rework is AOI repair and verify (never strip and replate), and the job ships."""
    job = factories.make_job(floor.job.part_revision, floor.routing, quantity=4)
    lot = factories.make_lot(floor.routing, job, panels=2)
    op, qe = floor.personas["operator"], floor.personas["quality_engineer"]
    aoi = advance_to(lot, lambda s: s.code == "outer_aoi", by=op, walk=True)
    floor_services.start_step(person=op, lot_step_id=aoi.pk)
    reading = helpers.record(floor, aoi, "aoi_defects", 2, unit="count")
    alerts.handle_event(helpers.event_for(reading).pk)
    ncr = Nonconformance.objects.get(lot=lot)
    p1, p2 = lot.panels.order_by("serial")
    dispositions.disposition_ncr(
        qe,
        ncr.pk,
        "",
        "Two opens on panel 1 repairable; panel 2 has a short under a BGA",
        PIN,
        panel_actions={p1.serial: "rework", p2.serial: "scrap"},
        scrap_reason="short",
        **QA,
    )
    ncr.refresh_from_db()
    assert ncr.disposition == "mixed" and ncr.root_cause.code == "process_drift"
    assert ncr.panel_actions == {p1.serial: "rework", p2.serial: "scrap"}
    rework = list(LotStep.objects.filter(lot=lot, is_rework=True).order_by("position"))
    assert [s.name for s in rework] == ["Repair at the AOI verify station", "Verify the repair"]
    assert all(p1.serial in s.instructions for s in rework)
    assert not any("strip" in s.name.lower() for s in rework)
    assert rework[1].plan and rework[1].plan[0]["quantity"] == "aoi_defects"
    scrap = ScrapRecord.objects.get(lot_step=aoi)
    assert scrap.boards == 4 and scrap.panel_scrapped and scrap.source == "disposition"
    # the rework runs (AOI step finished first, then repair and verify), then the rest
    floor_services.complete_step(person=op, lot_step_id=aoi.pk, pin=PIN)
    assert LotStep.objects.current_for(lot).pk == rework[0].pk
    assert _walk(lot, op) is None
    cert = services.ship(person=planner, job_number=job.number, quantity=4, lot_codes=[lot.code])
    text, pages = _pdf_text(bytes(cert.pdf), tmp_path)
    assert pages <= 2
    assert ncr.number in text and "Deviations" in text
    assert services.job_closed(job)
