"""Health check (issue 14, finding 4): the docker-compose healthcheck command, run as it
is written in docker-compose.yml, succeeds against a server on production settings; the
reply names the dependency that is down with a 503.
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
import yaml
from django.conf import settings

from tests.security.test_deploy_settings import production_env

REPO = Path(__file__).resolve().parents[2]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def database_url() -> str:
    db = settings.DATABASES["default"]
    if "postgresql" not in db["ENGINE"]:
        pytest.skip("the production server needs PostgreSQL (DATABASE_URL)")
    user = db["USER"] or "postgres"
    password = f":{db['PASSWORD']}" if db["PASSWORD"] else ""
    return (
        f"postgres://{user}{password}@{db['HOST'] or '127.0.0.1'}:{db['PORT'] or 5432}/{db['NAME']}"
    )


def compose_web_healthcheck(port: int) -> list[str]:
    """The web service's healthcheck command from docker-compose.yml, pointed at `port`."""
    compose = yaml.safe_load((REPO / "docker-compose.yml").read_text())
    test = compose["services"]["web"]["healthcheck"]["test"]
    assert test[0] == "CMD", test
    command = [part.replace("127.0.0.1:8000", f"127.0.0.1:{port}") for part in test[1:]]
    assert command[0] == "python"
    return [sys.executable, *command[1:]]


def start_server(env: dict[str, str], port: int) -> subprocess.Popen[bytes]:
    server = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "gunicorn",
            "shopfloor.wsgi",
            "-b",
            f"127.0.0.1:{port}",
            "-w",
            "1",
            "--timeout",
            "30",
        ],
        cwd=REPO,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
    )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        if server.poll() is not None:
            raise AssertionError(server.stderr.read().decode()[-2000:] if server.stderr else "")
        try:  # the port opens before the worker has loaded Django: wait for a reply
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=10):
                return server
        except urllib.error.HTTPError:
            return server  # an answer (503) is ready enough
        except OSError:
            time.sleep(0.3)
    server.kill()
    raise AssertionError("gunicorn did not answer within 60 s")


def get(url: str) -> tuple[int, dict[str, object]]:
    try:
        with urllib.request.urlopen(url, timeout=10) as reply:
            return reply.status, json.loads(reply.read())
    except urllib.error.HTTPError as exc:
        return exc.code, json.loads(exc.read())


@pytest.fixture
def production_server_env(db) -> dict[str, str]:
    redis_url = settings.REDIS_URL or os.environ.get("REDIS_URL", "")
    if not redis_url:
        pytest.skip("needs REDIS_URL (the broker the health check pings)")
    return production_env(DATABASE_URL=database_url(), REDIS_URL=redis_url)


def _run(env: dict[str, str]):
    port = free_port()
    server = start_server(env, port)
    try:
        check = subprocess.run(
            compose_web_healthcheck(port), capture_output=True, text=True, timeout=30
        )
        status, body = get(f"http://127.0.0.1:{port}/healthz")
    finally:
        server.terminate()
        server.wait(timeout=20)
    return check, status, body


def test_compose_healthcheck_passes_on_production_settings(production_server_env):
    check, status, body = _run(production_server_env)
    assert check.returncode == 0, check.stderr[-1500:]
    assert status == 200
    assert body == {"status": "ok", "database": "ok", "broker": "ok"}


def test_a_down_broker_is_named_with_503(production_server_env):
    env = {**production_server_env, "REDIS_URL": f"redis://127.0.0.1:{free_port()}/0"}
    check, status, body = _run(env)
    assert check.returncode != 0  # the container shows unhealthy
    assert status == 503
    assert body["down"] == ["broker"]
    assert body["database"] == "ok"
    assert str(body["broker"]).startswith("down")


def test_a_down_database_is_named_with_503(production_server_env):
    env = {
        **production_server_env,
        "DATABASE_URL": f"postgres://postgres@127.0.0.1:{free_port()}/nothing_here",
    }
    check, status, body = _run(env)
    assert check.returncode != 0
    assert status == 503
    assert body["down"] == ["database"]
    assert body["broker"] == "ok"
