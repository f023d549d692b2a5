"""The ERP and engineering path through the API alone: enter a job for a new part,
author its spec, draft and release the routing, release the job to the floor."""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone
from rest_framework.test import APIClient

from tests.factories import PIN, SPEC_4L_ENIG

pytestmark = pytest.mark.django_db


def _client(person) -> APIClient:
    client = APIClient()
    client.force_login(person.user)
    return client


def test_order_to_floor_through_the_api(floor):
    planner = _client(floor.personas["planner"])
    engineer = _client(floor.personas["process_engineer"])
    due = (timezone.localdate() + dt.timedelta(days=30)).isoformat()
    entered = planner.post(
        "/api/v1/jobs/",
        {
            "customer": "API",
            "customer_name": "Api Customer (invented)",
            "part_number": "AP-100",
            "part_revision": "A",
            "quantity": 64,
            "due_date": due,
            "ipc_class": 2,
        },
        format="json",
        HTTP_IDEMPOTENCY_KEY="erp-job-1",
    )
    assert entered.status_code == 201, entered.json()
    job = entered.json()
    assert job["has_spec"] is False
    number, pr = job["number"], job["part_revision_id"]
    refused = planner.post(
        f"/api/v1/jobs/{number}/release/", {"boards_per_panel": 8}, format="json"
    )
    assert refused.status_code == 409 and "no released routing" in refused.json()["detail"]

    bad = engineer.put(
        f"/api/v1/part-revisions/{pr}/spec/", {**SPEC_4L_ENIG, "layers": 5}, format="json"
    )
    assert bad.status_code == 400 and bad.json()["problems"][0]["field"] == "layers"
    assert (
        planner.put(f"/api/v1/part-revisions/{pr}/spec/", SPEC_4L_ENIG, format="json").status_code
        == 403
    )
    stored = engineer.put(
        f"/api/v1/part-revisions/{pr}/spec/",
        {**SPEC_4L_ENIG, "finish": "ENIG", "inner_copper_um": "1 oz"},
        format="json",
    )
    assert stored.status_code == 200 and stored.json()["build_spec"]["finish"] == "enig"
    draft = engineer.post(
        f"/api/v1/part-revisions/{pr}/drafts/", {"reason": "first"}, format="json"
    )
    assert draft.status_code == 201, draft.json()
    released = engineer.post(
        f"/api/v1/routing-revisions/{draft.json()['id']}/release/", {"pin": PIN}, format="json"
    )
    assert released.status_code == 200 and released.json()["status"] == "released"
    same = engineer.post(f"/api/v1/part-revisions/{pr}/drafts/", {"reason": "again"}, format="json")
    assert same.json()["changes"] == []
    again = engineer.post(
        f"/api/v1/routing-revisions/{same.json()['id']}/release/", {"pin": PIN}, format="json"
    )
    assert again.status_code == 409 and "no differences" in again.json()["detail"]

    out = planner.post(f"/api/v1/jobs/{number}/release/", {"boards_per_panel": 8}, format="json")
    assert out.status_code == 201, out.json()
    # ceil(64 / 8 x 1.08) = 9 panels (site default 8 % allowance), one lot of 9
    assert len(out.json()["panels"]) == 9 and len(out.json()["lots"]) == 1
    status = planner.get(f"/api/v1/jobs/{number}/").json()
    assert status["status"] == "released" and status["quantities"]["on_panels"] == 72
