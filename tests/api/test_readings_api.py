"""POST /api/v1/readings/: happy path, every bad input refused with nothing saved,
Idempotency-Key replay / 422 / 409, and instrument-token scope.

Unit facts used: 1 mil = 0.001 inch = 25.4 µm exactly (the inch is 25.4 mm by definition;
NIST SP 811, appendix B). Class 2 plated-hole wall copper minimum 20 µm average
(IPC-6012, from memory) is the window the builder gives this routing.
"""

from __future__ import annotations

import psycopg
import pytest
from django.db import connection
from rest_framework.test import APIClient

from shopfloor.floor import idempotency
from shopfloor.floor.models import IdempotencyRecord, InstrumentToken, Reading
from shopfloor.plant.models import Person
from tests.helpers import advance_to, gauge_at, issue_token

pytestmark = pytest.mark.django_db

URL = "/api/v1/readings/"


@pytest.fixture
def plating(floor):
    """The floor's lot started at pattern plating (hole and surface copper measured)."""
    step = advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    return step


@pytest.fixture
def operator_client(floor):
    client = APIClient()
    client.force_login(floor.personas["operator"].user)
    return client


def body(floor, **over):
    data = {
        "lot": floor.lot.code,
        "quantity": "hole_wall_copper",
        "value": 0.8,
        "unit": "mil",
        "sample_index": 1,
        "position": "panel 1 corner A",
    }
    data.update(over)
    return data


def test_reading_is_converted_judged_and_returns_window_with_source(
    floor, plating, operator_client
):
    gauge = gauge_at(plating)
    reply = operator_client.post(URL, body(floor, equipment=gauge.pk), format="json")
    assert reply.status_code == 201, reply.content
    data = reply.json()
    # 0.8 mil × 25.4 µm/mil = 20.32 µm (exact definition of the mil).
    assert data["value"] == pytest.approx(20.32)
    assert data["unit"] == "um"
    assert data["entered_value"] == "0.8" and data["entered_unit"] == "mil"
    assert data["in_window"] is True
    # IPC-6012 class 2 hole copper: the average of the set >= 20 um, each reading (thin
    # area) >= 18 um (from memory); the reading itself is judged against the 18 um
    assert data["window"]["min"] == pytest.approx(18.0)
    assert data["window"]["in_words"] == "average of 5 samples ≥ 20 µm; each ≥ 18 µm"
    assert "IPC-6012" in data["window"]["source"]
    assert data["step"] == plating.pk and data["lot"] == floor.lot.code
    assert data["via"] == "api"
    assert Reading.objects.filter(lot_step=plating).count() == 1


def test_reading_below_the_class_2_minimum_is_out_of_window(floor, plating, operator_client):
    # 0.7 mil = 17.78 µm, under the 18 µm class 2 thin-area minimum (IPC-6012, from memory)
    reply = operator_client.post(URL, body(floor, value="0.7"), format="json")
    # the typo guard: nothing saved, and the reply says what to confirm
    assert reply.status_code == 409
    assert reply.json()["error"] == "confirm_out_of_window"
    assert "0.7 mil = 17.8 µm is below" in reply.json()["detail"]
    assert '"confirm_out_of_window": true' in reply.json()["detail"]
    assert Reading.objects.count() == 0
    reply = operator_client.post(
        URL, body(floor, value="0.7", confirm_out_of_window=True), format="json"
    )
    assert reply.status_code == 201
    assert reply.json()["value"] == pytest.approx(17.78)
    assert reply.json()["in_window"] is False
    assert reply.json()["confirmation"].startswith("0.7 mil = 17.8 µm is below")


def test_typo_guard_suggests_the_unit_that_fits(floor, plating, operator_client):
    # 1.1 typed as um, meant as mil: 1.1 mil = 27.94 um (1 mil = 25.4 um exactly) fits
    reply = operator_client.post(URL, body(floor, value="1.1", unit="um"), format="json")
    assert reply.status_code == 409
    assert "Did you mean 1.1 mil?" in reply.json()["detail"]
    assert reply.json()["problems"][0]["suggested_unit"] == "mil"
    assert Reading.objects.count() == 0


BAD_INPUTS = [
    ("non-numeric", {"value": "twenty"}, 400, "value"),
    ("comma decimal", {"value": "20,5"}, 400, "value"),
    ("boolean", {"value": True}, 400, "value"),
    ("NaN text", {"value": "NaN"}, 400, "value"),
    ("infinity text", {"value": "inf"}, 400, "value"),
    ("unknown unit", {"unit": "furlong"}, 400, "value"),
    ("wrong dimension", {"unit": "percent"}, 400, "value"),
    ("absurd magnitude", {"value": 5, "unit": "m"}, 400, "value"),
    ("negative", {"value": -3}, 400, "value"),
    ("quantity not measured here", {"quantity": "bow_twist", "unit": "percent"}, 400, "quantity"),
    ("sample beyond the plan", {"sample_index": 6}, 400, "sample_index"),
    ("naive capture time", {"captured_at": "2025-01-01T08:00:00"}, 400, "captured_at"),
    ("missing lot", {"lot": None}, 400, "lot"),
    ("unknown lot", {"lot": "NO-SUCH-LOT"}, 404, None),
    ("step of another lot", {"step": 999_999_999}, 404, None),
    ("unknown equipment", {"equipment": 999_999_999}, 400, None),
]


@pytest.mark.parametrize("label,change,status,field", BAD_INPUTS, ids=[b[0] for b in BAD_INPUTS])
def test_bad_input_gets_structured_refusal_and_saves_nothing(
    floor, plating, operator_client, label, change, status, field
):
    before = Reading.objects.count()
    reply = operator_client.post(URL, body(floor, **change), format="json")
    assert reply.status_code == status, reply.content
    data = reply.json()
    assert data["error"] and data["detail"]
    if field:
        assert field in {p.get("field") for p in data["problems"]}, data
    assert Reading.objects.count() == before


def test_nan_literal_in_json_is_refused(floor, plating, operator_client):
    raw = (
        f'{{"lot": "{floor.lot.code}", "quantity": "hole_wall_copper", "value": NaN, "unit": "um"}}'
    )
    reply = operator_client.post(URL, raw, content_type="application/json")
    assert reply.status_code == 400
    assert reply.json()["error"] == "parse_error"
    assert Reading.objects.count() == 0


def test_step_that_is_not_current_is_a_conflict(floor, plating, operator_client):
    later = floor.lot.steps.filter(code="final_inspection").get()
    reply = operator_client.post(
        URL,
        body(floor, step=later.pk, quantity="board_thickness", value=1.6, unit="mm"),
        format="json",
    )
    assert reply.status_code == 409
    assert "current step" in reply.json()["detail"]
    assert not Reading.objects.filter(lot_step=later).exists()


def test_same_key_replays_and_records_once(floor, plating, operator_client):
    headers = {"HTTP_IDEMPOTENCY_KEY": "tablet-7-0001"}
    first = operator_client.post(URL, body(floor), format="json", **headers)
    again = operator_client.post(URL, body(floor), format="json", **headers)
    assert first.status_code == again.status_code == 201
    assert again["Idempotent-Replay"] == "true"
    assert again.json() == first.json()
    assert Reading.objects.filter(lot_step=plating).count() == 1


def test_same_key_other_body_is_422(floor, plating, operator_client):
    headers = {"HTTP_IDEMPOTENCY_KEY": "tablet-7-0002"}
    assert operator_client.post(URL, body(floor), format="json", **headers).status_code == 201
    other = operator_client.post(URL, body(floor, sample_index=2), format="json", **headers)
    assert other.status_code == 422
    assert other.json()["error"] == "idempotency_key_reused"
    assert Reading.objects.filter(lot_step=plating).count() == 1


def test_same_key_while_first_still_running_is_409(floor, plating, operator_client):
    key = "tablet-7-0003"
    user = floor.personas["operator"].user
    settings = connection.settings_dict
    # A second session holds the advisory lock the first request would hold mid-flight.
    with psycopg.connect(
        host=settings["HOST"] or "127.0.0.1",
        port=settings["PORT"] or 5432,
        user=settings["USER"],
        dbname=settings["NAME"],
        autocommit=True,
    ) as other:
        other.execute("SELECT pg_advisory_lock(%s)", [idempotency._lock_id(user.pk, key)])
        reply = operator_client.post(URL, body(floor), format="json", HTTP_IDEMPOTENCY_KEY=key)
    assert reply.status_code == 409
    assert "retry" in reply.json()["detail"]
    assert Reading.objects.count() == 0
    assert not IdempotencyRecord.objects.filter(key=key).exists()


def test_instrument_token_posts_at_its_own_work_center(floor, plating):
    raw = issue_token("xrf-1", plating.work_center.code)
    token = InstrumentToken.objects.get(name="xrf-1")
    person = Person.objects.get(user=token.user)
    assert person.badge_number == "INST-xrf-1" and person.printed_name == "xrf-1"
    assert not person.pin_matches("") and not person.pin_matches("0000")
    assert token.key_hash != raw  # only the hash is stored
    client = APIClient()
    reply = client.post(URL, body(floor), format="json", HTTP_AUTHORIZATION=f"Token {raw}")
    assert reply.status_code == 201, reply.content
    assert reply.json()["operator"] == "xrf-1" and reply.json()["via"] == "instrument"


def test_instrument_token_refused_at_another_work_center(floor, plating):
    other = next(wc for wc in floor.work_centers.values() if wc.pk != plating.work_center_id)
    raw = issue_token("xrf-2", other.code)
    reply = APIClient().post(URL, body(floor), format="json", HTTP_AUTHORIZATION=f"Token {raw}")
    assert reply.status_code == 403
    assert "another work center" in reply.json()["detail"]
    assert Reading.objects.count() == 0


def test_instrument_token_may_only_post_readings(floor, plating):
    raw = issue_token("xrf-3", plating.work_center.code)
    client = APIClient(HTTP_AUTHORIZATION=f"Token {raw}")
    assert client.get(f"/api/v1/lots/{floor.lot.code}/").status_code == 403
    assert client.post(f"/api/v1/steps/{plating.pk}/pause/", {}, format="json").status_code == 403
    assert client.post("/api/v1/routing/preview/", {}, format="json").status_code == 403


def test_withdrawn_or_wrong_token_is_401(floor, plating):
    raw = issue_token("xrf-4", plating.work_center.code)
    InstrumentToken.objects.filter(name="xrf-4").update(active=False)
    for header in (f"Token {raw}", "Token not-a-token"):
        reply = APIClient().post(URL, body(floor), format="json", HTTP_AUTHORIZATION=header)
        assert reply.status_code == 401
        assert reply.json()["detail"]


def test_correction_supersedes_with_reason(floor, plating, operator_client):
    first = operator_client.post(
        URL, body(floor, value=0.7, confirm_out_of_window=True), format="json"
    ).json()
    reply = operator_client.post(
        f"/api/v1/readings/{first['id']}/correct/",
        {"value": 21.0, "unit": "um", "reason": "probe not seated"},
        format="json",
    )
    assert reply.status_code == 201, reply.content
    assert reply.json()["in_window"] is True
    old = Reading.objects.get(pk=first["id"])
    assert old.superseded_by_id == reply.json()["id"]
    assert old.correction_reason == "probe not seated"
    no_reason = operator_client.post(
        f"/api/v1/readings/{reply.json()['id']}/correct/",
        {"value": 22, "unit": "um", "reason": ""},
        format="json",
    )
    assert no_reason.status_code == 400
    assert Reading.objects.count() == 2


def test_steps_start_pause_complete_via_api(floor, operator_client):
    from tests.factories import PIN

    step = floor.lot.steps.order_by("position").first()
    assert (
        operator_client.post(f"/api/v1/steps/{step.pk}/start/", {}, format="json").json()["status"]
        == "in_progress"
    )
    assert (
        operator_client.post(
            f"/api/v1/steps/{step.pk}/pause/", {"reason": "break"}, format="json"
        ).json()["status"]
        == "paused"
    )
    operator_client.post(f"/api/v1/steps/{step.pk}/start/", {}, format="json")
    wrong = operator_client.post(
        f"/api/v1/steps/{step.pk}/complete/", {"pin": "0000"}, format="json"
    )
    assert wrong.status_code == 403 and "Wrong PIN" in wrong.json()["detail"]
    done = operator_client.post(
        f"/api/v1/steps/{step.pk}/complete/", {"pin": PIN, "meaning": "performed_by"}, format="json"
    )
    assert done.status_code == 200 and done.json()["status"] == "done"
    lot = operator_client.get(f"/api/v1/lots/{floor.lot.code}/").json()
    assert lot["current_step"]["position"] > step.position
    assert lot["steps"][0]["completed_by"] == "Olu Operator"


def test_lot_windows_show_sources(floor, plating, operator_client):
    data = operator_client.get(f"/api/v1/lots/{floor.lot.code}/windows/").json()
    assert data["step"]["code"] == "pattern_plate_copper"
    assert {w["quantity"] for w in data["windows"]} == {"hole_wall_copper", "surface_copper"}
    assert all(w["source"] for w in data["windows"])
    assert operator_client.get("/api/v1/lots/NOPE/windows/").status_code == 404
