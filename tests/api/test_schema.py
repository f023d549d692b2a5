"""The OpenAPI schema validates, and real replies conform to it.

Each reply below is checked against the schema drf-spectacular publishes: its status
code must be documented for that operation and its body must validate (jsonschema)
against the documented component. OpenAPI 3.0 schema rules per the OpenAPI
Specification 3.0.3 ("nullable" extends a schema with null).
"""

from __future__ import annotations

import io
from typing import Any

import jsonschema
import pytest
import yaml
from django.core.management import call_command
from rest_framework.test import APIClient

from tests.factories import SPEC_4L_ENIG
from tests.helpers import advance_to

pytestmark = pytest.mark.django_db


def test_schema_validates_without_warnings(tmp_path):
    out = tmp_path / "schema.yml"
    call_command(
        "spectacular", "--validate", "--fail-on-warn", "--file", str(out), stderr=io.StringIO()
    )
    schema = yaml.safe_load(out.read_text())
    paths = set(schema["paths"])
    assert {"/api/v1/readings/", "/api/v1/routing/preview/", "/api/v1/lots/{code}/"} <= paths
    post = schema["paths"]["/api/v1/readings/"]["post"]
    assert any(p["name"] == "Idempotency-Key" and p["in"] == "header" for p in post["parameters"])
    assert {"201", "400", "403", "404", "409", "422"} <= set(post["responses"])
    spec_schema = schema["components"]["schemas"]["PreviewRequestRequest"]["properties"]["spec"]
    assert "enig" in spec_schema["properties"]["finish"]["enum"]


def _to_jsonschema(node: Any) -> Any:
    """OpenAPI 3.0 -> JSON Schema: nullable means null is allowed too."""
    if isinstance(node, list):
        return [_to_jsonschema(n) for n in node]
    if not isinstance(node, dict):
        return node
    out = {k: _to_jsonschema(v) for k, v in node.items() if k != "nullable"}
    for flag, bound in (("exclusiveMinimum", "minimum"), ("exclusiveMaximum", "maximum")):
        if out.get(flag) is True:
            out[flag] = out.pop(bound)
    if "$ref" in out:
        out["$ref"] = out["$ref"].replace("#/components/schemas/", "#/$defs/")
    if node.get("nullable"):
        return {"anyOf": [out, {"type": "null"}]}
    return out


@pytest.fixture(scope="module")
def schema() -> dict[str, Any]:
    from drf_spectacular.generators import SchemaGenerator

    return SchemaGenerator().get_schema(request=None, public=True)


def conforms(schema: dict[str, Any], path: str, method: str, reply: Any) -> None:
    operation = schema["paths"][path][method]
    documented = operation["responses"]
    assert str(reply.status_code) in documented, (path, reply.status_code, reply.content)
    content = documented[str(reply.status_code)].get("content", {})
    body_schema = content["application/json"]["schema"]
    defs = {k: _to_jsonschema(v) for k, v in schema["components"]["schemas"].items()}
    jsonschema.validate(reply.json(), {**_to_jsonschema(body_schema), "$defs": defs})


def test_replies_conform_to_schema(floor, schema):
    client = APIClient()
    client.force_login(floor.personas["operator"].user)
    step = advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    code = floor.lot.code
    cases = [
        (
            "/api/v1/routing/preview/",
            "post",
            client.post("/api/v1/routing/preview/", SPEC_4L_ENIG, format="json"),
        ),
        (
            "/api/v1/routing/preview/",
            "post",
            client.post("/api/v1/routing/preview/", {"layers": 3}, format="json"),
        ),
        ("/api/v1/lots/{code}/", "get", client.get(f"/api/v1/lots/{code}/")),
        ("/api/v1/lots/{code}/", "get", client.get("/api/v1/lots/NOPE/")),
        ("/api/v1/lots/{code}/windows/", "get", client.get(f"/api/v1/lots/{code}/windows/")),
        (
            "/api/v1/readings/",
            "post",
            client.post(
                "/api/v1/readings/",
                {"lot": code, "quantity": "hole_wall_copper", "value": 21, "unit": "um"},
                format="json",
            ),
        ),
        (
            "/api/v1/readings/",
            "post",
            client.post(
                "/api/v1/readings/",
                {"lot": code, "quantity": "hole_wall_copper", "value": "x", "unit": "um"},
                format="json",
            ),
        ),
        (
            "/api/v1/steps/{id}/pause/",
            "post",
            client.post(f"/api/v1/steps/{step.pk}/pause/", {}, format="json"),
        ),
        (
            "/api/v1/steps/{id}/pause/",
            "post",
            client.post(f"/api/v1/steps/{step.pk}/pause/", {}, format="json"),
        ),
        ("/api/v1/lots/{code}/", "get", APIClient().get(f"/api/v1/lots/{code}/")),
    ]
    statuses = set()
    for path, method, reply in cases:
        conforms(schema, path, method, reply)
        statuses.add(reply.status_code)
    assert {200, 201, 400, 401, 404, 409} <= statuses
