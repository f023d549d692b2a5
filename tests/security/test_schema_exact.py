"""The schema and the server agree (issue 14, finding 12).

OpenAPI 3.0.3 with JSON Schema validation keywords (maxLength, minLength, pattern): a body
the published schema allows must not be refused for its shape, and a body it forbids must
be refused. These are the outside tester's four disagreements; the stateful schemathesis
run (tests/api/test_schemathesis_stateful.py) checks the rest.
"""

from __future__ import annotations

import re

import pytest
from rest_framework.test import APIClient

from tests.helpers import advance_to

pytestmark = pytest.mark.django_db


@pytest.fixture
def api(floor):
    client = APIClient()
    client.force_login(floor.personas["supervisor"].user)
    return client


@pytest.fixture
def schema(api):
    return api.get("/api/schema/?format=json").json()


def _value_schema(schema):
    body = schema["components"]["schemas"]["ReadingInputRequest"]["properties"]["value"]
    return body["oneOf"]


def test_empty_value_is_invalid_by_the_schema_and_by_the_server(api, schema, floor):
    text = next(s for s in _value_schema(schema) if s["type"] == "string")
    assert text["minLength"] == 1 and not re.search(text["pattern"], "")
    advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    reply = api.post(
        "/api/v1/readings/",
        {"lot": floor.lot.code, "quantity": "surface_copper", "value": "", "unit": "um"},
        format="json",
    )
    assert reply.status_code == 400


@pytest.mark.parametrize("text", ["3_0", "٣٠", " 2.5e1 ", "1e400"])
def test_value_text_pattern_matches_what_the_server_reads(schema, text):
    from shopfloor.floor.serializers import NumberOrTextField

    pattern = next(s for s in _value_schema(schema) if s["type"] == "string")["pattern"]
    field = NumberOrTextField()
    allowed = re.search(pattern, text) is not None
    try:
        field.to_internal_value(text)
        accepted = True
    except Exception:
        accepted = False
    assert allowed == accepted, text


def test_a_reason_over_the_limit_is_refused_even_with_trailing_controls(api, floor):
    operator = floor.personas["operator"]
    step = advance_to(floor.lot, "pattern_plate_copper", by=operator, start=True)
    from shopfloor.floor import services

    reading = services.record_reading(
        person=operator,
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="surface_copper", value=40, unit="um"),
    )
    reason = "r" * 300 + "\x1f\x1e"  # 302 characters as sent; 300 once trimmed
    reply = api.post(
        f"/api/v1/readings/{reading.pk}/correct/",
        {"value": 41, "unit": "um", "reason": reason},
        format="json",
    )
    assert reply.status_code == 400
    assert "300" in str(reply.json())


@pytest.mark.parametrize("overrides", [0, "", {}, None, False, "x", [1]])
def test_preview_overrides_of_the_wrong_type_are_a_400(api, overrides):
    from tests.factories import SPEC_4L_ENIG

    reply = api.post(
        "/api/v1/routing/preview/", {"spec": SPEC_4L_ENIG, "overrides": overrides}, format="json"
    )
    assert reply.status_code == 400, reply.content[:200]


@pytest.mark.parametrize(
    "path", ["/api/v1/steps/-1/start/", "/api/v1/readings/-5/correct/", "/api/v1/nothing/"]
)
def test_unroutable_api_paths_get_a_json_404(api, path):
    for reply in (api.get(path), api.post(path, {}, format="json")):
        assert reply.status_code == 404
        assert reply["Content-Type"].startswith("application/json")
        assert reply.json()["error"] == "not_found"
