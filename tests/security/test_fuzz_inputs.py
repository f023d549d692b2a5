"""Fuzz every parser of user and instrument input: never a 5xx (issue 14, finding 5).

Hypothesis generates hostile text (NUL and other control characters, unusual digits,
surrogate-free Unicode, very long strings), arbitrary JSON (deep, wide, huge numbers) and
raw bytes, and sends them where people and instruments send input: JSON bodies of every
API POST, form fields of every page form, codes in URLs, query parameters, unit strings,
build specs, and design (XML) uploads. The one assertion everywhere: the reply is not a
5xx (the pure-core parsers: they raise only their own documented error types).

Bounded so the suite stays quick: EXAMPLES per target, no example database, no deadline
(a shared 2-core machine is slow at times).
"""

from __future__ import annotations

import pytest
from django.test import Client
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from routing.builder import spec as spec_module
from shopfloor import strict_json
from shopfloor.core import units
from tests.helpers import advance_to

pytestmark = pytest.mark.django_db

EXAMPLES = 25
FUZZ = settings(
    max_examples=EXAMPLES,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)

# Text a scanner, keyboard, instrument or attacker can send.
hostile_text = st.one_of(
    st.text(max_size=60),
    st.text(alphabet=st.characters(codec="utf-8"), max_size=300),
    st.sampled_from(
        [
            "\x00",
            "L\x001",
            "3_0",
            "٣٠",
            "３０",
            "1e400",
            "-0",
            "NaN",
            "<i>",
            "=HYPERLINK(1)",
            "../../etc/passwd",
            "%00",
            "\r\n",
            " " * 500,
            "9" * 5000,
        ]
    ),
)
json_scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(allow_nan=False, allow_infinity=False),
    hostile_text,
)
json_values = st.recursive(
    json_scalars,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(hostile_text, inner, max_size=4),
    max_leaves=20,
)
raw_bodies = st.one_of(
    st.binary(max_size=300),
    st.sampled_from(
        [b"[" * 100_000, b'{"value": 1e400}', b'{"a": NaN}', b'"\\u0000"', b"{" * 3000]
    ),
)

API_POSTS = [
    "/api/v1/readings/",
    "/api/v1/readings/1/correct/",
    "/api/v1/steps/1/start/",
    "/api/v1/steps/1/pause/",
    "/api/v1/steps/1/complete/",
    "/api/v1/routing/preview/",
]


@pytest.fixture
def world(floor):
    step = advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)
    clients = {}
    for name in ("supervisor", "process_engineer", "quality_engineer"):
        client = Client()
        client.force_login(floor.personas[name].user)
        clients[name] = client
    return {"floor": floor, "step": step, "clients": clients}


def no_5xx(reply, what: str) -> None:
    assert reply.status_code < 500, f"{what}: {reply.status_code} {reply.content[:300]!r}"


@FUZZ
@given(body=json_values, path=st.sampled_from(API_POSTS))
def test_api_json_bodies(world, body, path):
    import json

    client = world["clients"]["supervisor"]
    text = json.dumps(body, ensure_ascii=False)
    no_5xx(client.post(path, text, content_type="application/json"), f"POST {path}")


@FUZZ
@given(raw=raw_bodies, path=st.sampled_from(API_POSTS))
def test_api_raw_bodies(world, raw, path):
    client = world["clients"]["supervisor"]
    no_5xx(client.post(path, raw, content_type="application/json"), f"POST {path}")


CODE_URLS = [
    "/floor/lots/{}/",
    "/floor/lots/{}/traveller.pdf",
    "/floor/centers/{}/",
    "/quality/lots/{}/",
    "/quality/lots/{}/readings.csv",
    "/quality/lots/{}/record.pdf",
    "/quality/api/lots/{}/history.json",
    "/quality/jobs/{}/",
    "/quality/panels/{}/",
    "/quality/materials/{}/",
    "/quality/spc/{}/",
    "/quality/ncrs/{}/",
    "/api/v1/lots/{}/",
    "/api/v1/lots/{}/windows/",
]


@FUZZ
@given(code=hostile_text.filter(lambda t: t.strip("/") and "/" not in t and "?" not in t))
def test_codes_in_urls(world, code):
    from urllib.parse import quote

    client = world["clients"]["supervisor"]
    for template in CODE_URLS:
        url = template.format(quote(code, safe=""))
        no_5xx(client.get(url), f"GET {url}")


@FUZZ
@given(
    params=st.dictionaries(
        st.sampled_from(
            [
                "lot",
                "job",
                "panel",
                "material",
                "q",
                "from",
                "to",
                "center",
                "sort",
                "status",
                "code",
            ]
        ),
        hostile_text,
        max_size=4,
    )
)
def test_query_parameters(world, params):
    client = world["clients"]["supervisor"]
    for path in ("/quality/search/", "/board/", "/board/body/", "/floor/scan/"):
        no_5xx(client.get(path, params), f"GET {path} {params!r}")


@FUZZ
@given(
    fields=st.dictionaries(
        st.sampled_from(
            [
                "badge",
                "pin",
                "value",
                "unit",
                "quantity",
                "sample_index",
                "position",
                "equipment",
                "reason",
                "captured_at",
                "idempotency_key",
                "meaning",
                "note",
                "disposition",
                "rework_steps",
                "panels",
                "action",
                "centre",
                "ucl",
                "lcl",
                "start",
                "end",
                "rules",
                "spec",
                "move",
                "lot_step",
                "back",
            ]
        ),
        hostile_text,
        max_size=8,
    )
)
def test_form_fields(world, fields):
    step = world["step"]
    sup = world["clients"]["supervisor"]
    qe = world["clients"]["quality_engineer"]
    pe = world["clients"]["process_engineer"]
    no_5xx(Client().post("/floor/login/", fields), "login")
    for path in (
        f"/floor/steps/{step.pk}/readings/",
        f"/floor/steps/{step.pk}/pause/",
        f"/floor/steps/{step.pk}/start/",
        f"/floor/steps/{step.pk}/complete/",
        f"/board/queue/{step.work_center_id}/move/",
        f"/board/steps/{step.pk}/release-queue-warning/",
    ):
        no_5xx(sup.post(path, fields), f"POST {path}")
    no_5xx(qe.post("/quality/spc/surface_copper|plating|-/limits/", fields), "SPC limits")
    no_5xx(qe.post("/quality/ncrs/NCR-000001/", fields), "NCR disposition")
    no_5xx(pe.post("/engineering/preview/", fields), "engineering preview")


@FUZZ
@given(
    quantity=st.sampled_from(units.quantities()) | hostile_text,
    value=json_scalars,
    unit=hostile_text,
)
def test_unit_strings_and_values(quantity, value, unit):
    try:
        units.to_canonical(quantity, value, unit)
    except units.UnitError:
        pass  # the documented refusal; anything else fails the test


@FUZZ
@given(data=json_values)
def test_build_specs(data):
    try:
        spec_module.parse_spec(data)
    except spec_module.SpecInvalid:
        pass


@FUZZ
@given(text=st.one_of(hostile_text, raw_bodies.map(lambda b: b.decode("latin-1"))))
def test_strict_json_text(text):
    try:
        strict_json.loads(text)
    except strict_json.StrictJSONError:
        pass


xml_uploads = st.one_of(
    st.binary(max_size=400),
    st.sampled_from(
        [
            b"<?xml version='1.0'?><IPC-2581 revision='C'></IPC-2581>",
            b"<!DOCTYPE x [<!ENTITY a 'aaaa'>]><x>&a;</x>",
            b"<a>" * 5000,
            b"\xff\xfe<\x00a\x00>\x00",
            b"<IPC-2581 revision='B'><Content><Layer name='\x00'/></Content></IPC-2581>",
        ]
    ),
)


@FUZZ
@given(content=xml_uploads, name=hostile_text)
def test_design_uploads(world, content, name):
    from django.core.files.uploadedfile import SimpleUploadedFile

    pe = world["clients"]["process_engineer"]
    safe_name = (name.replace("\x00", "").replace("/", "_") or "x")[:80] + ".xml"
    for path in ("/api/v1/routing/import-design/", "/engineering/import-design/"):
        upload = SimpleUploadedFile(safe_name, content, content_type="application/xml")
        no_5xx(pe.post(path, {"file": upload}), f"POST {path}")
