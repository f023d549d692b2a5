"""The refusals issue 12 lists, each through the public API an ERP or a tablet uses:
shipping with an open NCR, releasing a job whose part has no released routing, an
incompatible panel mix (different finishes cannot share a panel: a panel is one
stack-up and one finish, common practice), and expired prepreg at layup (prepreg has a
shelf life counted from receipt, common practice; 90 days is the seeded site value, from
memory). Each refusal says why and saves nothing.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone
from rest_framework.test import APIClient

from shopfloor.floor.models import MaterialUse
from shopfloor.plant.models import MaterialLot, Panel
from shopfloor.quality.models import Nonconformance
from shopfloor.quality.services import alerts
from shopfloor.shipping.models import Shipment
from tests import helpers
from tests.factories import SPEC_4L_ENIG, make_part_revision, release_routing
from tests.helpers import out_of_window_value

pytestmark = pytest.mark.django_db


def _client(person) -> APIClient:
    client = APIClient()
    client.force_login(person.user)
    return client


def _job(planner, part_revision, quantity=20):
    reply = planner.post(
        "/api/v1/jobs/",
        {
            "customer": part_revision.part.customer.code,
            "part_number": part_revision.part.number,
            "part_revision": part_revision.revision,
            "quantity": quantity,
            "due_date": (timezone.localdate() + dt.timedelta(days=20)).isoformat(),
            "ipc_class": part_revision.build_spec.get("ipc_class", 2),
        },
        format="json",
    )
    assert reply.status_code == 201, reply.json()
    return reply.json()["number"]


def test_shipping_with_an_open_ncr_is_refused(floor):
    step = helpers.start_at(floor, floor.lot)
    window = next(m for m in step.plan if m["quantity"] == "surface_copper")
    bad = helpers.record(floor, step, "surface_copper", out_of_window_value(window))
    alerts.handle_event(helpers.event_for(bad).pk)
    ncr = Nonconformance.objects.get(lot=floor.lot)
    reply = _client(floor.personas["planner"]).post(
        "/api/v1/shipments/",
        {"job": floor.job.number, "quantity": 1, "lots": [floor.lot.code]},
        format="json",
    )
    assert reply.status_code == 409
    body = reply.json()
    assert "no certificate was issued" in body["detail"]
    assert any(ncr.number in p["problem"] and "open" in p["problem"] for p in body["problems"])
    assert not Shipment.objects.exists()


def test_releasing_without_a_released_routing_is_refused(floor):
    planner = _client(floor.personas["planner"])
    fresh = make_part_revision(SPEC_4L_ENIG)  # no routing drafted or released
    number = _job(planner, fresh)
    reply = planner.post(f"/api/v1/jobs/{number}/release/", {"boards_per_panel": 4}, format="json")
    assert reply.status_code == 409
    assert "no released routing revision" in reply.json()["detail"]
    assert not Panel.objects.filter(images__job__number=number).exists()


def test_an_incompatible_panel_mix_is_refused(floor):
    planner = _client(floor.personas["planner"])
    osp = make_part_revision({**SPEC_4L_ENIG, "finish": "osp"})
    release_routing(osp, floor.personas["process_engineer"])
    main = _job(planner, floor.routing.part_revision)
    odd = _job(planner, osp)
    reply = planner.post(
        f"/api/v1/jobs/{main}/release/",
        {"boards_per_panel": 4, "share_with": [{"job": odd, "boards_per_panel": 2}]},
        format="json",
    )
    assert reply.status_code == 409
    assert "different finishes (enig vs osp)" in reply.json()["detail"]
    assert not Panel.objects.filter(images__job__number__in=[main, odd]).exists()


def test_expired_prepreg_is_refused_at_layup(floor):
    code = floor.lot.steps.filter(code__startswith="layup").order_by("position").first().code
    layup = helpers.start_at(floor, floor.lot, code)
    MaterialLot.objects.create(
        code="PP-EXPIRED",
        kind="prepreg",
        description="prepreg received long ago",
        received_on=timezone.localdate() - dt.timedelta(days=91),
    )
    reply = _client(floor.personas["operator"]).post(
        f"/api/v1/steps/{layup.pk}/materials/", {"material_lot": "PP-EXPIRED"}, format="json"
    )
    assert reply.status_code == 409
    detail = reply.json()["detail"]
    expired_on = timezone.localdate() - dt.timedelta(days=1)  # received + 90 days
    assert f"expired on {expired_on.isoformat()}" in detail and "quarantine" in detail
    assert not MaterialUse.objects.exists()
    unknown = _client(floor.personas["operator"]).post(
        f"/api/v1/steps/{layup.pk}/materials/", {"material_lot": "PP-NEVER"}, format="json"
    )
    assert unknown.status_code == 400 and "is on record" in unknown.json()["detail"]
