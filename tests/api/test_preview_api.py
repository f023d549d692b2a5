"""POST /api/v1/routing/preview/: the preview contract, every problem listed, nothing saved.

Trade facts checked: an ENIG board gets nickel 3-6 µm and immersion gold 0.04-0.10 µm
windows (IPC-4552A, from memory); multilayer boards have an even copper layer count
(common practice: layers come in pairs on cores).
"""

from __future__ import annotations

import pytest
from rest_framework.test import APIClient

from routing.models import RoutingRevision, RoutingStep
from tests.factories import SPEC_4L_ENIG

pytestmark = pytest.mark.django_db
URL = "/api/v1/routing/preview/"


@pytest.fixture
def engineer_client(floor):
    client = APIClient()
    client.force_login(floor.personas["process_engineer"].user)
    return client


def counts():
    return RoutingRevision.objects.count(), RoutingStep.objects.count()


@pytest.mark.parametrize("wrap", [False, True], ids=["bare spec", "spec + overrides"])
def test_preview_contract(floor, engineer_client, wrap):
    before = counts()
    payload = {"spec": SPEC_4L_ENIG, "overrides": []} if wrap else SPEC_4L_ENIG
    reply = engineer_client.post(URL, payload, format="json")
    assert reply.status_code == 200, reply.content
    data = reply.json()
    assert {"steps", "warnings"} <= set(data)
    step = data["steps"][0]
    assert {
        "seq",
        "code",
        "name",
        "work_center",
        "instructions",
        "parameters",
        "hazard",
        "queue_time_limit_minutes",
        "standard_minutes",
        "cycle",
        "measurements",
    } <= set(step)
    windows = {m["quantity"]: m for s in data["steps"] for m in s["measurements"]}
    assert (windows["nickel_thickness"]["min"], windows["nickel_thickness"]["max"]) == (3.0, 6.0)
    assert windows["gold_thickness"]["min"] == pytest.approx(0.04)
    assert all(m["source"] for m in windows.values())
    assert counts() == before


def test_bad_spec_lists_every_problem_and_saves_nothing(floor, engineer_client):
    before = counts()
    spec = {**SPEC_4L_ENIG, "layers": 3, "finish": "gold", "board_thickness_mm": "thick"}
    reply = engineer_client.post(URL, spec, format="json")
    assert reply.status_code == 400
    data = reply.json()
    assert data["error"] == "invalid" and data["detail"]
    fields = {p["field"] for p in data["problems"]}
    assert {"layers", "finish", "board_thickness_mm"} <= fields
    for p in data["problems"]:
        assert set(p) >= {"field", "value", "problem", "allowed"}
    finish = next(p for p in data["problems"] if p["field"] == "finish")
    assert "enig" in finish["allowed"] and finish["value"] == "gold"
    assert counts() == before


@pytest.mark.parametrize(
    "payload",
    [[], "text", 42, {"spec": SPEC_4L_ENIG, "overrides": "x"}, {"spec": SPEC_4L_ENIG, "extra": 1}],
)
def test_odd_bodies_are_400_not_500(floor, engineer_client, payload):
    reply = engineer_client.post(URL, payload, format="json")
    assert reply.status_code == 400
    assert reply.json()["detail"]


def test_looser_override_needs_approval_and_is_flagged(floor, engineer_client):
    looser = {
        "quantity": "nickel_thickness",
        "step_code": "enig_gold",
        "min": 1.0,
        "max": 9.0,
        "target": None,
        "reason": "customer drawing note 4",
    }
    refused = engineer_client.post(
        URL, {"spec": SPEC_4L_ENIG, "overrides": [looser]}, format="json"
    )
    assert refused.status_code == 400
    assert "approv" in refused.json()["detail"]
    approved = {**looser, "approved_by": "Pat Engineer"}
    reply = engineer_client.post(
        URL, {"spec": SPEC_4L_ENIG, "overrides": [approved]}, format="json"
    )
    assert reply.status_code == 200, reply.content
    nickel = next(
        m
        for s in reply.json()["steps"]
        for m in s["measurements"]
        if m["quantity"] == "nickel_thickness"
    )
    assert nickel["deviation"] is True
    assert (nickel["min"], nickel["max"]) == (1.0, 9.0)


def test_anonymous_is_401_and_no_role_is_403(floor):
    assert APIClient().post(URL, SPEC_4L_ENIG, format="json").status_code == 401
    client = APIClient()
    client.force_login(floor.personas["outsider"].user)
    reply = client.post(URL, SPEC_4L_ENIG, format="json")
    assert reply.status_code == 403 and "roles" in reply.json()["detail"]
