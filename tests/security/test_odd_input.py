"""Odd input is a 400 with the usual error body, never a 500 (issue 14, finding 5).

Each case is one the outside test sent: 100,000 nested brackets, 1e400 in a number field,
a NUL byte in a code in a URL (every route that takes a code) and in the login badge; and
digits Python's float() accepts but a person never means: "3_0" (PEP 515 underscores),
Arabic-Indic "٣٠" and fullwidth "３０" (Unicode decimal digits, Unicode Standard ch. 4.6).
"""

from __future__ import annotations

import json
import re

import pytest
from django.test import Client
from django.urls import URLPattern, URLResolver, get_resolver

from shopfloor.core import units
from tests.helpers import advance_to

pytestmark = pytest.mark.django_db

_CONVERTER = re.compile(r"<(?:(?P<conv>\w+):)?(?P<name>\w+)>")


def code_routes() -> list[str]:
    """Every route that takes a text code (<str:...>), with the code replaced by %00."""

    def walk(patterns, prefix=""):
        for entry in patterns:
            route = str(entry.pattern)
            if isinstance(entry, URLResolver):
                if route.startswith("admin/"):
                    continue
                yield from walk(entry.url_patterns, prefix + route)
            elif isinstance(entry, URLPattern):
                yield prefix + route

    out = set()
    for r in walk(get_resolver().url_patterns):
        if not any(m.group("conv") in (None, "str") for m in _CONVERTER.finditer(r)):
            continue
        out.add(
            "/"
            + _CONVERTER.sub(
                lambda m: "1" if m.group("conv") == "int" else "%00", r.lstrip("^").rstrip("$")
            )
        )
    return sorted(out)


def test_the_route_list_finds_the_code_routes():
    routes = code_routes()
    assert "/floor/lots/%00/" in routes and "/api/v1/lots/%00/" in routes
    assert "/quality/lots/%00/" in routes
    assert len(routes) >= 14


@pytest.fixture
def supervisor(floor):
    client = Client()
    client.force_login(floor.personas["supervisor"].user)
    return client


def test_nul_in_every_code_route_is_a_400(supervisor):
    wrong = {}
    for url in code_routes():
        for method in ("get", "post"):
            reply = getattr(supervisor, method)(url)
            if reply.status_code != 400:
                wrong[f"{method.upper()} {url}"] = reply.status_code
    assert not wrong, wrong


def test_nul_in_an_api_code_is_a_json_400(supervisor):
    reply = supervisor.get("/api/v1/lots/L%001/")
    assert reply.status_code == 400
    assert reply.json()["error"] == "invalid" and "NUL" in reply.json()["detail"]


def test_nul_in_the_login_badge_and_in_a_query_are_400(floor):
    client = Client()
    reply = client.post("/floor/login/", {"badge": "10\x0001", "pin": "1234"})
    assert reply.status_code == 400 and b"NUL" in reply.content
    client.force_login(floor.personas["supervisor"].user)
    assert client.get("/floor/scan/?code=L%001").status_code == 400
    assert client.get("/quality/search/?lot=%00").status_code == 400


def _post(client, body: bytes | str):
    return client.post("/api/v1/readings/", body, content_type="application/json")


def test_deeply_nested_json_is_a_400(supervisor):
    reply = _post(supervisor, "[" * 100_000)
    assert reply.status_code == 400
    assert "nested" in reply.json()["detail"]


@pytest.mark.parametrize("number", ["1e400", "-1e400", "NaN", "Infinity", "1" * 5000])
def test_out_of_range_numbers_are_a_400(supervisor, floor, number):
    body = (
        f'{{"lot": "{floor.lot.code}", "quantity": "surface_copper", "value": {number},'
        ' "unit": "um"}'
    )
    reply = _post(supervisor, body)
    assert reply.status_code == 400, reply.content[:300]
    assert reply.json()["error"] and reply.json()["detail"]


def test_nul_escape_in_a_json_string_is_a_400(supervisor, floor):
    body = json.dumps({"lot": floor.lot.code + "\x00", "quantity": "surface_copper"})
    reply = _post(supervisor, body)
    assert reply.status_code == 400 and "NUL" in reply.json()["detail"]


def test_deep_json_in_the_engineering_preview_page_is_a_400(floor):
    client = Client()
    client.force_login(floor.personas["process_engineer"].user)
    reply = client.post("/engineering/preview/", {"spec": "[" * 50_000})
    assert reply.status_code == 400 and b"nested" in reply.content


@pytest.mark.parametrize("text", ["3_0", "٣٠", "３０", "30 ", "+3.0e1", "1,5", "0x1E", " "])
def test_only_ascii_decimal_numbers_are_read(text):
    ascii_ok = text.strip() in {"30", "+3.0e1"}
    if ascii_ok:
        assert units.parse_decimal(text) == 30.0
    else:
        with pytest.raises(ValueError, match="ASCII digits"):
            units.parse_decimal(text)


@pytest.mark.parametrize("value", ["3_0", "٣٠", "３０"])
def test_unusual_digits_are_refused_by_the_api_and_the_tablet(floor, value):
    operator = floor.personas["operator"]
    step = advance_to(floor.lot, "pattern_plate_copper", by=operator, start=True)
    client = Client()
    client.force_login(operator.user)
    reply = client.post(
        "/api/v1/readings/",
        {"lot": floor.lot.code, "quantity": "surface_copper", "value": value, "unit": "um"},
        content_type="application/json",
    )
    assert reply.status_code == 400
    assert "ASCII digits" in json.dumps(reply.json())
    page = client.post(
        f"/floor/steps/{step.pk}/readings/",
        {"quantity": "surface_copper", "value": value, "unit": "um", "sample_index": "1"},
    )
    assert page.status_code == 400
    assert "ASCII digits" in page.content.decode()
    assert not step.readings.exists()
