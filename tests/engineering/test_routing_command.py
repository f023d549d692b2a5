"""`manage.py routing preview`: the same contract as the API, exit 2 with every problem.

Trade facts: ENIG nickel 3-6 µm (IPC-4552A, from memory); copper layers of a multilayer
board come in pairs (common practice).
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import call_command

from routing.models import RoutingRevision, RoutingStep
from tests.factories import SPEC_4L_ENIG

pytestmark = pytest.mark.django_db


def run(*args, stdin: str | None = None, monkeypatch=None):
    out, err = io.StringIO(), io.StringIO()
    if stdin is not None:
        monkeypatch.setattr("sys.stdin", io.StringIO(stdin))
    try:
        call_command("routing", *args, stdout=out, stderr=err)
        code = 0
    except SystemExit as exc:
        code = exc.code
    return code, out.getvalue(), err.getvalue()


def counts():
    return RoutingRevision.objects.count(), RoutingStep.objects.count()


def test_json_preview_from_file(tmp_path):
    path = tmp_path / "spec.json"
    path.write_text(json.dumps(SPEC_4L_ENIG))
    before = counts()
    code, out, _ = run("preview", str(path), "--format", "json")
    assert code == 0
    data = json.loads(out)
    assert {"steps", "warnings"} <= set(data)
    nickel = next(
        m for s in data["steps"] for m in s["measurements"] if m["quantity"] == "nickel_thickness"
    )
    assert (nickel["min"], nickel["max"]) == (3.0, 6.0)
    assert counts() == before


def test_text_preview_from_stdin(monkeypatch):
    code, out, _ = run("preview", "-", stdin=json.dumps(SPEC_4L_ENIG), monkeypatch=monkeypatch)
    assert code == 0
    assert "source:" in out and "caution:" in out
    assert "enig_gold" in out


@pytest.mark.parametrize("fmt", ["json", "text"])
def test_bad_spec_exits_2_listing_every_problem(tmp_path, fmt):
    path = tmp_path / "bad.json"
    path.write_text(json.dumps({**SPEC_4L_ENIG, "layers": 3, "finish": "gold", "profile": "laser"}))
    before = counts()
    code, out, err = run("preview", str(path), "--format", fmt)
    assert code == 2 and out == ""
    assert "Traceback" not in err
    if fmt == "json":
        problems = json.loads(err)["problems"]
        assert {p["field"] for p in problems} >= {"layers", "finish", "profile"}
        assert all({"field", "value", "problem", "allowed"} <= set(p) for p in problems)
    else:
        for field in ("layers", "finish", "profile"):
            assert f"  {field}:" in err
        assert "allowed: enig" in err
    assert counts() == before


@pytest.mark.parametrize("content", ["{not json", "[1, NaN]", ""])
def test_invalid_json_exits_2(tmp_path, content):
    path = tmp_path / "broken.json"
    path.write_text(content)
    code, _, err = run("preview", str(path))
    assert code == 2 and "not valid JSON" in err


def test_unreadable_file_exits_2(tmp_path):
    code, _, err = run("preview", str(tmp_path / "missing.json"))
    assert code == 2 and "Cannot read" in err


def test_text_preview_applies_a_customer_override(tmp_path):
    # ENIG nickel defaults to 3-6 µm (IPC-4552A, from memory); a customer asks for 4-6 µm.
    body = {
        "spec": SPEC_4L_ENIG,
        "overrides": [
            {"quantity": "nickel_thickness", "min": 4.0, "max": 6.0, "reason": "customer drawing"}
        ],
    }
    path = tmp_path / "spec.json"
    path.write_text(json.dumps(body))
    code, out, err = run("preview", str(path), "--format", "text")
    assert code == 0, err
    nickel = [line for line in out.splitlines() if "nickel_thickness" in line]
    assert nickel and all("4" in line and "6" in line for line in nickel)
    code_json, out_json, _ = run("preview", str(path), "--format", "json")
    assert code_json == 0
    window = next(
        m
        for s in json.loads(out_json)["steps"]
        for m in s["measurements"]
        if m["quantity"] == "nickel_thickness"
    )
    assert (window["min"], window["max"]) == (4.0, 6.0)
