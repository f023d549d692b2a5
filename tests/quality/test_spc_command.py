"""`manage.py spc evaluate` against the NIST/SEMATECH e-Handbook of Statistical Methods,
section 6.3.2.2 (individuals control chart, flow-rate example; values from memory):
mean 50.81, MR-bar 1.8778, UCL 55.80, LCL 45.82, moving-range UCL 6.13."""

from __future__ import annotations

import io
import json
import subprocess
import sys
from pathlib import Path

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

NIST_FLOW_RATE = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]
ROOT = Path(__file__).resolve().parents[2]


def test_evaluate_matches_handbook_example(tmp_path):
    data = tmp_path / "flow.json"
    data.write_text(json.dumps({"chart": "individuals", "values": NIST_FLOW_RATE}))
    out = io.StringIO()
    call_command("spc", "evaluate", str(data), stdout=out)
    result = json.loads(out.getvalue())
    assert result["centre"] == pytest.approx(50.81, abs=0.005)
    assert result["ucl"] == pytest.approx(55.80, abs=0.01)
    assert result["lcl"] == pytest.approx(45.82, abs=0.01)
    assert result["range"]["centre"] == pytest.approx(1.8778, abs=0.0001)
    assert result["range"]["ucl"] == pytest.approx(6.13, abs=0.01)
    assert result["signals"] == []  # the handbook finds the process in control


def _run(*args, stdin=""):
    return subprocess.run(
        [sys.executable, "manage.py", "spc", *args],
        cwd=ROOT,
        input=stdin,
        capture_output=True,
        text=True,
        timeout=60,
        env={"DEBUG": "1", "PATH": "/usr/bin:/bin"},
    )


def test_stdin_and_clean_errors():
    ok = _run("evaluate", "-", stdin=json.dumps({"chart": "individuals", "values": NIST_FLOW_RATE}))
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["ucl"] == pytest.approx(55.80, abs=0.01)

    bad_json = _run("evaluate", "-", stdin="{not json")
    assert bad_json.returncode == 2 and "not valid JSON" in bad_json.stderr
    assert "Traceback" not in bad_json.stderr

    refused = _run("evaluate", "-", stdin=json.dumps({"chart": "pie", "values": [1, 2]}))
    assert refused.returncode == 2 and "allowed charts" in refused.stderr
    assert "Traceback" not in refused.stderr

    missing = _run("evaluate", "/nonexistent/data.json")
    assert missing.returncode == 2 and "cannot read" in missing.stderr


def test_call_command_raises_with_exit_code_two(tmp_path):
    data = tmp_path / "bad.json"
    data.write_text(json.dumps({"chart": "individuals", "values": [1]}))
    with pytest.raises(CommandError) as err:
        call_command("spc", "evaluate", str(data))
    assert err.value.returncode == 2 and "at least 2" in str(err.value)
