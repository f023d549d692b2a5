"""Fuzz every API operation in-process with schemathesis, as a person and as an instrument.

The published OpenAPI document is the contract (OpenAPI Specification 3.0.3): every reply
must have a documented status code, a documented content type and headers, and a body
that validates against the documented schema; no input may produce a 5xx (the customer's
rule: never a 500 for anything a user or instrument can send). Generated data is both
positive (fits the schema) and negative (breaks it), and some cases are pointed at the
real lot, steps, reading and gauge so the fuzzer reaches the services, not only the 404s.
Idempotency-Key header values come from the fuzzer too.

Bounded: EXAMPLES cases per operation and caller, no Hypothesis example database, no
deadline (a shared 2-core machine is slow at times; speed goals live in bench/).
"""

from __future__ import annotations

import contextlib
import secrets
from collections import Counter
from collections.abc import Iterator
from typing import Any

import pytest
import schemathesis
from django.conf import settings as django_settings
from django.core.handlers.wsgi import WSGIHandler
from django.core.signals import request_finished, request_started
from django.db import close_old_connections
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from requests.exceptions import InvalidHeader
from requests.utils import check_header_validity
from rest_framework.test import APIClient
from schemathesis.checks import not_a_server_error
from schemathesis.generation import GenerationMode
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from shopfloor.audit import services as audit
from shopfloor.floor import services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Lot, Person
from tests.factories import PIN, SPEC_4L_ENIG, make_floor
from tests.helpers import advance_to, gauge_at, issue_token

EXAMPLES = 50
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
]


@contextlib.contextmanager
def connections_kept_open() -> Iterator[None]:
    """In-process requests share the test's connection; Django must not close it per request."""
    request_started.disconnect(close_old_connections)
    request_finished.disconnect(close_old_connections)
    try:
        yield
    finally:
        request_started.connect(close_old_connections)
        request_finished.connect(close_old_connections)


@pytest.fixture
def app() -> Iterator[WSGIHandler]:
    with connections_kept_open():
        yield WSGIHandler()


@pytest.fixture
def world(transactional_db) -> dict[str, Any]:
    """The small floor, its lot started at pattern plating with one reading and a gauge."""
    floor = make_floor()
    supervisor = floor.personas["supervisor"]
    step = advance_to(floor.lot, "pattern_plate_copper", by=supervisor, start=True)
    gauge = gauge_at(step)
    reading = services.record_reading(
        person=supervisor,
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="hole_wall_copper", value=22, unit="um"),
        via="api",
    )
    return {
        "floor": floor,
        "lot": floor.lot.code,
        "current_step": step.pk,
        "reading": reading.pk,
        "gauge": gauge.pk,
        "work_center": step.work_center.code,
        "supervisor": supervisor.pk,
    }


def session_credentials(world: dict[str, Any]) -> tuple[dict[str, str], dict[str, str]]:
    """A supervisor's session cookie plus the CSRF pair SessionAuthentication demands."""
    client = APIClient()
    client.force_login(world["floor"].personas["supervisor"].user)
    token = secrets.token_hex(16)  # 32 alphanumerics: an unmasked CSRF secret
    cookies = {
        django_settings.SESSION_COOKIE_NAME: client.cookies[
            django_settings.SESSION_COOKIE_NAME
        ].value,
        django_settings.CSRF_COOKIE_NAME: token,
    }
    return {"X-CSRFToken": token}, cookies


def token_credentials(world: dict[str, Any]) -> tuple[dict[str, str], dict[str, str]]:
    raw = issue_token("fuzz-gauge", world["work_center"])
    return {"Authorization": f"Token {raw}"}, {}


def routable(params: dict[str, Any]) -> dict[str, Any]:
    """Path values the URL patterns route to the API (<int:pk>, <str:code>).

    A path the resolver cannot match never reaches DRF and gets the site's HTML 404 page:
    that is test_unroutable_api_path_gets_json_404 below, not something to fuzz here.
    """
    if "id" in params:
        pk = params["id"]
        if isinstance(pk, bool) or not isinstance(pk, int) or pk < 0:
            params["id"] = 987654321
    if "code" in params:
        code = params["code"]
        if not isinstance(code, str) or not code or "/" in code or code in {".", ".."}:
            params["code"] = "NO-SUCH-LOT"
    return params


def valid_body(path: str, world: dict[str, Any], reading: dict[str, Any]) -> Any:
    """A body the service accepts for the operation at `path` (reading fields drawn)."""
    value, unit = reading["value"], reading["unit"]
    if path.endswith("/readings/"):
        return {"lot": world["lot"], **reading}
    if path.endswith("/correct/"):
        return {"value": value, "unit": unit, "reason": "gauge was not zeroed"}
    if path.endswith("/complete/"):
        return {"pin": PIN}
    if path.endswith("/start/"):
        return {"equipment": world["gauge"]}
    if path.endswith("/pause/"):
        return {"reason": "shift change"}
    if path.endswith("/preview/"):
        return {"spec": dict(SPEC_4L_ENIG)}
    return None


def aim(case: Any, world: dict[str, Any], mode: str, idempotency: str | None, reading: dict) -> Any:
    """Point a generated case at real records so it gets past the 404s.

    mode "fuzz" leaves the generated case alone (ids made routable), "ids" swaps in the
    real lot, step, reading and gauge but keeps the generated body, "valid" sends a body
    the service accepts (with the drawn reading fields).
    """
    if idempotency is not None and "/api/v1/lots/" not in case.operation.path:
        case.headers = {**(case.headers or {}), "Idempotency-Key": idempotency}
    params = routable(dict(case.path_parameters or {}))
    case.path_parameters = params
    if mode == "fuzz":
        return case
    lot = Lot.objects.get(code=world["lot"])
    current = LotStep.objects.current_for(lot)
    step_id = current.pk if current else world["current_step"]
    if "code" in params:
        params["code"] = world["lot"]
    if "id" in params:
        newest = Reading.objects.filter(superseded_by=None).order_by("-pk").first()
        reading_id = newest.pk if newest else world["reading"]
        params["id"] = reading_id if "/readings/" in case.operation.path else step_id
    case.path_parameters = params
    if mode == "valid" and case.operation.method.upper() == "POST":
        case.body = valid_body(case.operation.path, world, reading)
        return case
    body = case.body
    if isinstance(body, dict):
        if "lot" in body:
            body["lot"] = world["lot"]
        if "step" in body:
            body["step"] = step_id
        if "equipment" in body:
            body["equipment"] = world["gauge"]
        if "quantity" in body and isinstance(body.get("quantity"), str):
            body["quantity"] = "hole_wall_copper"
        if "spec" in body and not isinstance(body.get("spec"), dict):
            body["spec"] = dict(SPEC_4L_ENIG)
    return case


def wire_header_value(text: str) -> str | None:
    """What an HTTP client will put on the wire (None: a client refuses to send it).

    RFC 9110 section 5.5: a field value is latin-1 text without CR, LF or NUL, and is
    trimmed of leading and trailing whitespace.
    """
    text = text.encode("latin-1", "ignore").decode("latin-1")
    text = "".join(ch for ch in text if ch not in "\r\n\x00").strip()
    try:
        check_header_validity(("Idempotency-Key", text))
    except InvalidHeader:
        return None
    return text


def fuzz_operation(
    operation: Any, world: dict[str, Any], headers: dict, cookies: dict
) -> Counter[int]:
    """Run EXAMPLES generated cases against one operation; count the status codes."""
    statuses: Counter[int] = Counter()
    cases = st.one_of(
        operation.as_strategy(generation_mode=GenerationMode.POSITIVE),
        operation.as_strategy(generation_mode=GenerationMode.NEGATIVE),
    )
    keys = st.one_of(
        st.none(), st.sampled_from(["fuzz-1", "fuzz-1 ", "  ", "x" * 101]), st.text(max_size=120)
    )

    @settings(
        max_examples=EXAMPLES,
        deadline=None,
        database=None,
        suppress_health_check=list(HealthCheck),
    )
    @given(
        case=cases,
        mode=st.sampled_from(["fuzz", "ids", "valid"]),
        key=keys,
        reading=st.fixed_dictionaries(
            {
                "quantity": st.sampled_from(["hole_wall_copper", "surface_copper"]),
                "value": st.one_of(
                    st.floats(min_value=0, max_value=80, allow_nan=False),
                    st.integers(min_value=0, max_value=80),
                    st.sampled_from(["21.5", "0.8", " 25 "]),
                ),
                "unit": st.sampled_from(["um", "µm", "mil", "mm"]),
                "sample_index": st.integers(min_value=1, max_value=5),
            }
        ),
    )
    def run(case: Any, mode: str, key: str | None, reading: dict) -> None:
        if key is not None:
            key = wire_header_value(key)
        # A supervisor would unlock a badge the fuzzer locked with wrong PINs.
        Person.objects.filter(pk=world["supervisor"]).update(pin_failures=0, locked_at=None)
        case = aim(case, world, mode, key, reading)
        response = case.call_and_validate(headers=headers, cookies=cookies, checks=CHECKS)
        statuses[response.status_code] += 1

    run()
    return statuses


@pytest.mark.parametrize("caller", ["supervisor_session", "instrument_token"])
def test_every_operation_survives_fuzzing_and_conforms(app, world, caller):
    schema = schemathesis.openapi.from_wsgi("/api/schema/", app)
    operations = [result.ok() for result in schema.get_all_operations()]
    documented = {
        (method.upper(), path)
        for path, item in schema.raw_schema["paths"].items()
        for method in item
        if method in {"get", "put", "post", "patch", "delete"}
    }
    assert len(documented) >= 8
    make_credentials = session_credentials if caller == "supervisor_session" else token_credentials
    headers, cookies = make_credentials(world)

    tested: dict[tuple[str, str], Counter[int]] = {}
    for operation in operations:
        statuses = fuzz_operation(operation, world, headers, cookies)
        print(caller, operation.label, dict(statuses))
        assert statuses.total() >= EXAMPLES // 2, operation.label
        tested[(operation.method.upper(), operation.path)] = statuses

    assert set(tested) == documented

    def succeeded(method: str, path: str) -> int:
        return sum(n for code, n in tested[(method, path)].items() if 200 <= code < 300)

    writes = [key for key in tested if key[0] == "POST" and key[1] != "/api/v1/routing/preview/"]
    if caller == "supervisor_session":
        # The aimed cases got through authentication and CSRF into the services.
        assert succeeded("GET", "/api/v1/lots/{code}/") > 0
        assert succeeded("GET", "/api/v1/lots/{code}/windows/") > 0
        assert succeeded("POST", "/api/v1/routing/preview/") > 0
        assert sum(succeeded(*key) for key in writes) > 0
    else:
        # An instrument token may post readings (one or a batch) and nothing else
        # (permissions.py).
        readings = tested[("POST", "/api/v1/readings/")]
        assert set(readings) - {401, 403}, readings
        posts = {("POST", "/api/v1/readings/"), ("POST", "/api/v1/readings/batch/")}
        assert set(tested[("POST", "/api/v1/readings/batch/")]) - {401, 403}
        for key, statuses in tested.items():
            if key not in posts:
                assert set(statuses) == {403}, (key, statuses)
    # Whatever the fuzzer got recorded, the audit trail is still an unbroken hash chain.
    chain = audit.verify_chain()
    assert chain.ok, chain.problem


@pytest.mark.django_db
def test_unroutable_api_path_gets_json_404(client):
    reply = client.post(
        "/api/v1/readings/not-a-number/correct/", {}, content_type="application/json"
    )
    assert reply.status_code == 404
    assert reply["Content-Type"].startswith("application/json")
    assert reply.json()["error"] == "not_found"
