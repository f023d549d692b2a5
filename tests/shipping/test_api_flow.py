"""One order from entry to shipment through the API alone (the ERP and instrument path).

The ERP enters the job for a new part, engineering puts its spec, drafts and releases the
routing through the API, and the ERP releases the job; operators (and a gauge's
instrument token) work every step through the floor API, scanning the material lots a
step consumes; one out-of-window AOI count opens an NCR that quality dispositions per
panel through the API (one panel reworked by the library's default, AOI repair and
verify; the other scrapped); final inspection records the accepted boards; the ERP ships
in two partial shipments and reads the certificate back. The gate's refusals come back
as 409 with every reason. Standards: the certificate names IPC-6012 and the class of the
build spec; the PDF is read with pdftotext (poppler-utils).
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess

import pytest
from django.utils import timezone
from rest_framework.test import APIClient

from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import MaterialLot
from shopfloor.quality.models import Nonconformance, OutboxEvent
from shopfloor.quality.services import alerts
from tests.factories import PIN, SPEC_4L_ENIG
from tests.helpers import in_window_value, issue_token, one_entry_per_quantity

pytestmark = pytest.mark.django_db


def _client(person) -> APIClient:
    client = APIClient()
    client.force_login(person.user)
    return client


def _ok(reply, status=(200, 201)):
    assert reply.status_code in ((status,) if isinstance(status, int) else status), (
        reply.status_code,
        reply.content[:600],
    )
    return reply.json()


@pytest.fixture
def materials(db):
    received = timezone.localdate() - dt.timedelta(days=3)
    for code, kind in (
        ("API-CORE", "laminate"),
        ("API-PP", "prepreg"),
        ("API-CU", "foil"),
        ("API-DF", "dry_film"),
        ("API-MASK", "mask_ink"),
        ("API-LEG", "legend_ink"),
    ):
        MaterialLot.objects.create(code=code, kind=kind, description=kind, received_on=received)
    MaterialLot.objects.create(
        code="API-PP-OLD",
        kind="prepreg",
        description="prepreg past its shelf life",
        received_on=timezone.localdate() - dt.timedelta(days=200),
    )
    return {
        "laminate": "API-CORE",
        "prepreg": "API-PP",
        "foil": "API-CU",
        "dry_film": "API-DF",
        "mask_ink": "API-MASK",
        "legend_ink": "API-LEG",
    }


def _work_step(op, step, materials, *, key_prefix, token_client=None):
    """Start, scan materials, record in-window readings, accept (final inspection), sign."""
    _ok(op.post(f"/api/v1/steps/{step.pk}/start/", {}, format="json"))
    for kind in step.materials:
        body = _ok(
            op.post(
                f"/api/v1/steps/{step.pk}/materials/",
                {"material_lot": materials[kind]},
                format="json",
                HTTP_IDEMPOTENCY_KEY=f"{key_prefix}-{step.pk}-{kind}",
            ),
            201,
        )
        assert body["kind"] == kind
    for m in one_entry_per_quantity(step.plan):
        client = token_client if token_client and m["quantity"] == "surface_copper" else op
        for sample in range(1, int(m.get("samples") or 1) + 1):
            _ok(
                client.post(
                    "/api/v1/readings/",
                    {
                        "lot": step.lot.code,
                        "step": step.pk,
                        "quantity": m["quantity"],
                        "value": in_window_value(m),
                        "unit": m["unit"],
                        "sample_index": sample,
                    },
                    format="json",
                ),
                201,
            )
    if floor_services.is_final_inspection(step):
        good = floor_services.lot_good_boards(step.lot)
        from shopfloor.plant.models import Job

        numbers = dict(Job.objects.filter(pk__in=list(good)).values_list("pk", "number"))
        _ok(
            op.post(
                f"/api/v1/steps/{step.pk}/accepted/",
                {"accepted": {numbers[j]: n for j, n in good.items()}},
                format="json",
            ),
            201,
        )
    _ok(op.post(f"/api/v1/steps/{step.pk}/complete/", {"pin": PIN}, format="json"))


def test_order_to_shipment_through_the_api(floor, materials, tmp_path):
    planner = _client(floor.personas["planner"])
    op = _client(floor.personas["operator"])
    qe = _client(floor.personas["quality_engineer"])
    engineer = _client(floor.personas["process_engineer"])
    customer = floor.routing.part_revision.part.customer
    # --- the ERP enters the job for a new part; engineering authors it through the API
    job = _ok(
        planner.post(
            "/api/v1/jobs/",
            {
                "customer": customer.code,
                "part_number": "API-E2E-1",
                "part_revision": "A",
                "quantity": 8,
                "due_date": (timezone.localdate() + dt.timedelta(days=20)).isoformat(),
                "ipc_class": 2,
            },
            format="json",
            HTTP_IDEMPOTENCY_KEY="erp-job-1",
        ),
        201,
    )
    number = job["number"]
    pr_id = job["part_revision_id"]
    _ok(engineer.put(f"/api/v1/part-revisions/{pr_id}/spec/", SPEC_4L_ENIG, format="json"))
    draft = _ok(
        engineer.post(f"/api/v1/part-revisions/{pr_id}/drafts/", {"reason": "new"}, format="json")
    )
    _ok(
        engineer.post(
            f"/api/v1/routing-revisions/{draft['id']}/release/", {"pin": PIN}, format="json"
        )
    )
    from shopfloor.plant.models import PartRevision

    pr = PartRevision.objects.get(pk=pr_id)
    released = _ok(
        planner.post(f"/api/v1/jobs/{number}/release/", {"boards_per_panel": 4}, format="json"),
        201,
    )
    (lot_code,) = [lot["code"] for lot in released["lots"]]
    from shopfloor.plant.models import Lot

    lot = Lot.objects.get(code=lot_code)
    panels = list(lot.panels.order_by("serial"))
    assert len(panels) >= 3
    token = issue_token("plating-xrf", "plating")
    gauge = APIClient()
    gauge.defaults["HTTP_AUTHORIZATION"] = f"Token {token}"

    # --- operators work every step; expired prepreg is refused at layup
    for _ in range(200):
        step = LotStep.objects.current_for(lot)
        if step is None:
            break
        if step.code.startswith("layup"):
            _ok(op.post(f"/api/v1/steps/{step.pk}/start/", {}, format="json"))
            refused = op.post(
                f"/api/v1/steps/{step.pk}/materials/", {"material_lot": "API-PP-OLD"}, format="json"
            )
            assert refused.status_code == 409
            assert "expired on" in refused.json()["detail"]
            _ok(op.post(f"/api/v1/steps/{step.pk}/pause/", {}, format="json"))
        if step.code == "outer_aoi":
            _ok(op.post(f"/api/v1/steps/{step.pk}/start/", {}, format="json"))
            bad = _ok(
                op.post(
                    "/api/v1/readings/",
                    {
                        "lot": lot.code,
                        "quantity": "aoi_defects",
                        "value": 3,
                        "unit": "count",
                        "sample_index": 1,
                    },
                    format="json",
                ),
                201,
            )
            assert bad["in_window"] is False
            event = OutboxEvent.objects.get(kind="reading.recorded", payload__reading=bad["id"])
            alerts.handle_event(event.pk)  # what the worker does
            ncr = Nonconformance.objects.get(lot=lot)
            # shipping now is refused with every reason
            early = planner.post(
                "/api/v1/shipments/",
                {"job": number, "quantity": 1, "lots": [lot.code]},
                format="json",
            )
            assert early.status_code == 409
            reasons = " | ".join(p["problem"] for p in early.json()["problems"])
            assert ncr.number in reasons and "has not completed every step" in reasons
            # quality dispositions per panel: rework the first, scrap the second, use the rest
            actions = {p.serial: "use_as_is" for p in panels}
            actions[panels[0].serial] = "rework"
            actions[panels[1].serial] = "scrap"
            decided = _ok(
                qe.post(
                    f"/api/v1/ncrs/{ncr.number}/disposition/",
                    {
                        "panel_actions": actions,
                        "scrap_reason": "short",
                        "root_cause": "process_drift",
                        "corrective_action": "Etch speed verified at each shift start",
                        "note": "Opens on panel 1 repairable; short on panel 2 is not",
                        "pin": PIN,
                    },
                    format="json",
                ),
                200,
            )
            assert decided["disposition"] == "mixed" and decided["lot_on_hold"] is False
            assert decided["rework_steps"] == [
                "Repair at the AOI verify station",
                "Verify the repair",
            ]
            assert decided["panels"] == actions
            _ok(op.post(f"/api/v1/steps/{step.pk}/complete/", {"pin": PIN}, format="json"))
            continue
        step.refresh_from_db()
        _work_step(op, step, materials, key_prefix="flow", token_client=gauge)
    lot.refresh_from_db()
    assert lot.status == "complete"

    # --- the ERP ships in two parts and reads the certificate back
    state = _ok(planner.get(f"/api/v1/jobs/{number}/"))
    assert state["status"] == "ready_to_ship"
    first = _ok(
        planner.post(
            "/api/v1/shipments/",
            {"job": number, "quantity": 5, "lots": [lot.code]},
            format="json",
            HTTP_IDEMPOTENCY_KEY="erp-ship-1",
        ),
        201,
    )
    assert first["job_closed"] is False and first["certificate"].startswith("COC-")
    replay = planner.post(
        "/api/v1/shipments/",
        {"job": number, "quantity": 5, "lots": [lot.code]},
        format="json",
        HTTP_IDEMPOTENCY_KEY="erp-ship-1",
    )
    assert replay.json()["shipment"] == first["shipment"]  # a retried request ships once
    too_many = planner.post(
        "/api/v1/shipments/", {"job": number, "quantity": 4, "lots": [lot.code]}, format="json"
    )
    assert too_many.status_code == 409  # 3 left to ship of 8
    second = _ok(
        planner.post(
            "/api/v1/shipments/", {"job": number, "quantity": 3, "lots": [lot.code]}, format="json"
        ),
        201,
    )
    assert second["job_closed"] is True
    state = _ok(planner.get(f"/api/v1/jobs/{number}/"))
    assert state["status"] == "shipped" and state["quantities"]["shipped"] == 8
    pdf = planner.get(first["certificate_url"].replace("http://testserver", ""))
    assert pdf.status_code == 200 and pdf["Content-Type"] == "application/pdf"
    if shutil.which("pdftotext"):
        path = tmp_path / "c.pdf"
        path.write_bytes(pdf.content)
        text = subprocess.run(
            ["pdftotext", str(path), "-"], capture_output=True, text=True, check=True
        ).stdout
        flat = " ".join(text.split())
        assert pr.part.number in flat and lot.code in flat and ncr.number in flat
        assert "IPC-6012 performance class 2" in flat
        assert "from memory" not in flat.lower()
