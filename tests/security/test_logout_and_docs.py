"""Logout only by POST with the CSRF token (issue 14, finding 9), and the API description
closed to anonymous callers in production unless opened on purpose (finding 10)."""

from __future__ import annotations

import subprocess
import sys

import pytest
from django.test import Client

from tests.security.test_deploy_settings import REPO, production_env

pytestmark = pytest.mark.django_db


def test_get_does_not_log_out(floor):
    client = Client()
    client.force_login(floor.personas["operator"].user)
    assert client.get("/floor/logout/").status_code == 405
    assert client.get("/floor/").status_code == 200  # still signed in


def test_post_without_csrf_token_does_not_log_out(floor):
    client = Client(enforce_csrf_checks=True)
    client.force_login(floor.personas["operator"].user)
    assert client.post("/floor/logout/").status_code == 403
    assert client.get("/floor/").status_code == 200


def test_post_with_csrf_token_logs_out(floor):
    client = Client(enforce_csrf_checks=True)
    client.force_login(floor.personas["operator"].user)
    page = client.get("/floor/")
    token = page.context["csrf_token"]
    html = page.content.decode()
    assert 'action="/floor/logout/"' in html and 'method="post"' in html
    reply = client.post("/floor/logout/", {"csrfmiddlewaretoken": str(token)})
    assert reply.status_code == 302
    assert client.get("/floor/").status_code == 302  # back to the login page


PROBE = """
import django, json, sys
django.setup()
from django.test import Client
c = Client()
out = {p: c.get(p, secure=True, HTTP_HOST="traveller.shop.example.test").status_code
       for p in ("/api/schema/", "/api/docs/")}
print(json.dumps(out))
"""


def _probe(**env: str) -> dict[str, int]:
    import json

    done = subprocess.run(
        [sys.executable, "-c", PROBE],
        cwd=REPO,
        env=production_env(**env),
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_api_description_needs_a_login_in_production():
    assert _probe() == {"/api/schema/": 401, "/api/docs/": 401}


def test_a_setting_opens_the_api_description():
    assert _probe(API_DOCS_PUBLIC="1") == {"/api/schema/": 200, "/api/docs/": 200}
