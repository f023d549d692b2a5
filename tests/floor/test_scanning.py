"""Scanner first (issue 15 item 2): what each scanned code does, through the tablet views.

A job number opens its lot straight away when exactly one of its lots waits at the
operator's own work centers, and offers a choice otherwise; on a lot page whose step
consumes materials, a material lot's label is recorded for the step.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor.floor.models import IdempotencyRecord, LotStep, MaterialUse
from shopfloor.plant.models import MaterialLot
from tests import helpers
from tests.factories import make_lot

pytestmark = pytest.mark.django_db


@pytest.fixture
def op_client(client, floor):
    client.force_login(floor.personas["operator"].user)
    return client


def _skip_to(lot, position_of) -> LotStep:
    """Set-up shortcut: mark steps before the chosen one done (no services)."""
    steps = list(lot.steps.order_by("position"))
    target = position_of(steps)
    lot.steps.filter(position__lt=target.position).update(status=LotStep.Status.DONE)
    return target


@pytest.fixture
def two_lots(floor):
    """The floor's job on two lots: the first at its first step, the second further on
    at another work center."""
    other = make_lot(floor.routing, floor.job)
    first = floor.lot.steps.order_by("position").first()
    later = _skip_to(
        other, lambda steps: next(s for s in steps if s.work_center_id != first.work_center_id)
    )
    return floor.lot, first, other, later


def test_panel_serial_opens_its_lot(op_client, floor):
    serial = floor.lot.panels.order_by("serial").first().serial
    r = op_client.get("/floor/scan/", {"code": serial.lower()})
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{floor.lot.code}/"


def test_job_with_one_lot_here_opens_it(op_client, floor, two_lots):
    lot, first, other, later = two_lots
    operator = floor.personas["operator"]
    operator.work_centers.set([later.work_center])
    r = op_client.get("/floor/scan/", {"code": floor.job.number})
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{other.code}/"
    operator.work_centers.set([first.work_center])
    r = op_client.get("/floor/scan/", {"code": floor.job.number})
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{lot.code}/"


def test_job_with_several_lots_here_offers_a_choice(op_client, floor, two_lots):
    lot, first, other, later = two_lots
    floor.personas["operator"].work_centers.set([first.work_center, later.work_center])
    r = op_client.get("/floor/scan/", {"code": floor.job.number})
    assert r.status_code == 200
    body = r.content.decode()
    assert f"Job {floor.job.number} has 2 lots on the floor" in body
    assert "2 of them wait at your work centers" in body
    assert f'href="/floor/lots/{lot.code}/"' in body and f'href="/floor/lots/{other.code}/"' in body
    assert f"now: {later.name} at {later.work_center.name} (yours)" in body


def test_job_with_no_lot_here_offers_a_choice(op_client, floor, two_lots):
    _lot, first, _other, later = two_lots
    others = [
        wc
        for wc in floor.work_centers.values()
        if wc.pk not in (first.work_center_id, later.work_center_id)
    ]
    floor.personas["operator"].work_centers.set(others[:1])
    r = op_client.get("/floor/scan/", {"code": floor.job.number})
    assert r.status_code == 200
    body = r.content.decode()
    assert "Pick the lot in front of you" in body and "(yours)" not in body


@pytest.fixture
def layup(floor):
    code = floor.lot.steps.filter(code__startswith="layup").order_by("position").first().code
    return helpers.start_at(floor, floor.lot, code)


def _prepreg(code: str = "PP-SCAN-1") -> MaterialLot:
    return MaterialLot.objects.create(
        code=code,
        kind="prepreg",
        description="prepreg for the test",
        received_on=timezone.localdate() - dt.timedelta(days=5),
    )


def test_lot_page_scan_field_records_a_material_lot(op_client, floor, layup):
    _prepreg()
    page = op_client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    assert f'action="/floor/steps/{layup.pk}/scan/"' in page  # the scan field posts here
    r = op_client.post(
        f"/floor/steps/{layup.pk}/scan/", {"code": "pp-scan-1", "idempotency_key": "scan-1"}
    )
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{floor.lot.code}/"
    use = MaterialUse.objects.get(lot_step=layup)
    assert use.material_lot.code == "PP-SCAN-1" and use.kind == "prepreg"
    # a scanner that sends the same scan twice (same key) records it once
    r = op_client.post(
        f"/floor/steps/{layup.pk}/scan/", {"code": "pp-scan-1", "idempotency_key": "scan-1"}
    )
    assert r.status_code == 302 and MaterialUse.objects.filter(lot_step=layup).count() == 1
    assert IdempotencyRecord.objects.filter(key="scan-1").count() == 1


def test_lot_page_scan_field_still_opens_lots_and_refuses_unknown(op_client, floor, layup):
    r = op_client.post(f"/floor/steps/{layup.pk}/scan/", {"code": floor.lot.code.lower()})
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{floor.lot.code}/"
    r = op_client.post(f"/floor/steps/{layup.pk}/scan/", {"code": "NOTHING-9"})
    assert r.status_code == 404
    body = r.content.decode()
    assert "not a material lot on record either" in body
    assert not MaterialUse.objects.exists()


def test_material_of_a_kind_the_step_does_not_use_is_refused(op_client, floor, layup):
    MaterialLot.objects.create(
        code="INK-SCAN-1",
        kind="mask_ink",
        description="mask ink",
        received_on=timezone.localdate() - dt.timedelta(days=5),
    )
    r = op_client.post(
        f"/floor/steps/{layup.pk}/scan/", {"code": "INK-SCAN-1", "idempotency_key": "scan-2"}
    )
    assert r.status_code in (400, 409)
    assert "INK-SCAN-1" in r.content.decode()
    assert not MaterialUse.objects.exists()


def test_scan_field_autofocus_after_login_and_on_the_lot_page(op_client, floor):
    for url in ("/floor/", f"/floor/lots/{floor.lot.code}/"):
        body = op_client.get(url).content.decode()
        field = body[body.index('id="lot-code"') :]
        assert "autofocus" in field[: field.index(">")], url
