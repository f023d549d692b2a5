"""Lab pages and the bath API: what a person and a client see, refusals included."""

from __future__ import annotations

import pytest
from rest_framework.test import APIClient

from shopfloor.chemistry.models import Analysis
from tests import helpers
from tests.factories import copper_tank, lab_tech

pytestmark = pytest.mark.django_db


@pytest.fixture
def lab(floor):
    tank, person = copper_tank(), lab_tech()
    helpers.start_at(floor, floor.lot)
    return tank, person


def test_lab_pages_show_plan_caution_and_calculators(lab, client):
    tank, person = lab
    client.force_login(person.user)
    assert "Bath analyses" in client.get("/lab/").content.decode()
    page = client.post(
        f"/lab/tanks/{tank.code}/analyses/",
        {"parameter": "copper_sulfate", "value": "52", "unit": "g/L"},
        follow=True,
    ).content.decode()
    assert "Lots exposed (1)" in page
    addition = client.get(
        f"/lab/tanks/{tank.code}/addition/?parameter=copper_sulfate"
    ).content.decode()
    assert "add acid to water" in addition and "safety data sheets" in addition
    # 4000 L, 52 -> 75 g/L, stock 300: a = 4000 × 23 / 225 = 408.9 L > 200 L headroom, so
    # dump first: d = (4200×75 − 4000×52 − 200×300) / (300 − 52) = 47000 / 248 = 189.5 L
    assert "dump 189.52 L, then add 389.52 L" in addition
    calc = client.get(
        "/lab/calculator/?metal=copper&current_density_asd=2&minutes=60&efficiency=95"
    ).content.decode()
    assert "25.14 µm in 60.0 min" in calc  # 0.220516 × 2 × 60 × 0.95 = 25.14 µm
    bad = client.get("/lab/calculator/?metal=copper&current_density_asd=abc&minutes=60")
    assert bad.status_code == 400 and "must be a number" in bad.content.decode()
    assert client.get(f"/lab/tanks/{tank.code}/spc/copper_sulfate/").status_code == 200


def test_bad_analysis_form_says_what_is_allowed_and_saves_nothing(lab, client):
    tank, person = lab
    client.force_login(person.user)
    reply = client.post(
        f"/lab/tanks/{tank.code}/analyses/",
        {"parameter": "copper_sulfate", "value": "75", "unit": "mL/L"},
    )
    assert reply.status_code == 400
    assert "allowed: &#x27;g/L&#x27;" in reply.content.decode()
    assert not Analysis.objects.exists()


def test_plating_page_computes_amps_and_minutes(floor, client):
    step = helpers.advance_to(floor.lot, "pattern_plate_copper")
    client.force_login(floor.personas["process_engineer"].user)
    reply = client.post(f"/lab/plating/{step.pk}/", {"area_dm2": "20"}, follow=True)
    # 20 dm² × 2 A/dm² = 40 A; 25 µm at 95 %: 59.7 min (see test_faraday)
    assert "40.0 A for 59.7 min" in reply.content.decode()
    bad = client.post(f"/lab/plating/{step.pk}/", {"area_dm2": "-3"})
    assert bad.status_code == 400 and "above zero" in bad.content.decode()


@pytest.mark.parametrize(
    "url",
    [
        "/lab/analyses/99999999999999999999999/",
        "/lab/plating/99999999999999999999999/",
        "/lab/tanks/NOPE/",
        "/lab/tanks/T-CU/spc/nope/",
    ],
)
def test_unknown_records_are_404_never_500(lab, client, url):
    client.force_login(lab[1].user)
    assert client.get(url).status_code == 404


def test_api_post_analysis_lists_exposed_lots_and_replays(lab, floor):
    tank, person = lab
    api = APIClient()
    api.force_login(person.user)
    body = {"tank": tank.code, "parameter": "chloride", "value": "31", "unit": "mg/L"}
    first = api.post("/api/v1/analyses/", body, format="json", HTTP_IDEMPOTENCY_KEY="k1")
    assert first.status_code == 201, first.content
    assert first.json()["in_window"] is False
    assert first.json()["value"] == pytest.approx(0.031)
    assert first.json()["lots_exposed"] == [floor.lot.code]
    again = api.post("/api/v1/analyses/", body, format="json", HTTP_IDEMPOTENCY_KEY="k1")
    assert again.status_code == 201 and again["Idempotent-Replay"] == "true"
    assert Analysis.objects.count() == 1
    bad = api.post("/api/v1/analyses/", {**body, "unit": "furlongs"}, format="json")
    assert bad.status_code == 400 and "not accepted" in bad.json()["detail"]
    missing = api.post("/api/v1/analyses/", {"tank": tank.code}, format="json")
    assert missing.status_code == 400
    assert {p["field"] for p in missing.json()["problems"]} == {"parameter", "value"}
    tanks = api.get("/api/v1/tanks/").json()
    assert tanks[0]["flagged"] is True
    assert api.get("/api/v1/analyses/99999999999999999999/exposure/").status_code == 404
