"""Content-Security-Policy (issue 14, finding 11).

The policy is Django's built-in one (django.middleware.csp, SECURE_CSP). What it must say
follows the CSP Level 3 recommendation (W3C, https://www.w3.org/TR/CSP3/): scripts only
from 'self' or with a per-response nonce, never 'unsafe-inline' or 'unsafe-eval'; and the
templates must hold no inline script, no inline event handler and no style attribute,
because the policy would block them in the browser (the browser tests fail on any
violation through the console listener in tests/browser/conftest.py).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
TEMPLATE_DIRS = [REPO / "templates", *REPO.glob("*/templates"), *REPO.glob("shopfloor/*/templates")]


def directives(header: str) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    for part in header.split(";"):
        words = part.split()
        if words:
            out[words[0]] = words[1:]
    return out


@pytest.mark.django_db
@pytest.mark.parametrize("path", ["/floor/login/", "/healthz", "/api/v1/lots/X/"])
def test_every_response_carries_a_strict_policy(client, path):
    response = client.get(path)
    header = response.headers.get("Content-Security-Policy")
    assert header, f"{path} has no Content-Security-Policy"
    d = directives(header)
    assert d["default-src"] == ["'self'"]
    assert d["object-src"] == ["'none'"]
    assert d["frame-ancestors"] == ["'none'"]
    for name in ("script-src", "style-src"):
        assert "'unsafe-inline'" not in d[name]
        assert "'unsafe-eval'" not in d[name]
        assert "'self'" in d[name]
        assert all(s == "'self'" or s.startswith("'nonce-") for s in d[name]), d[name]


@pytest.mark.django_db
def test_nonce_is_fresh_per_response_and_matches_the_inline_style(admin_client):
    """The API docs page has the one inline <style>; it carries this response's nonce."""
    a = admin_client.get("/api/docs/")
    b = admin_client.get("/api/docs/")
    assert a.status_code == 200
    nonce_a = re.search(r"'nonce-([^']+)'", a.headers["Content-Security-Policy"]).group(1)
    nonce_b = re.search(r"'nonce-([^']+)'", b.headers["Content-Security-Policy"]).group(1)
    assert nonce_a != nonce_b
    html = a.content.decode()
    assert f'<style nonce="{nonce_a}">' in html
    # Swagger UI is served from our static files (no CDN) and its set-up script by URL.
    scripts = re.findall(r"<script([^>]*)>", html)
    assert scripts and all('src="/' in attrs for attrs in scripts), scripts


def _templates() -> list[Path]:
    seen: list[Path] = []
    for base in TEMPLATE_DIRS:
        seen += sorted(p for p in base.rglob("*.html") if p.is_file())
    return seen


INLINE_SCRIPT = re.compile(r"<script(?![^>]*\bsrc=)[^>]*>", re.I)
EVENT_HANDLER = re.compile(r"<[^>]*\son[a-z]+\s*=", re.I)
STYLE_ATTR = re.compile(r"<[^>]*\sstyle\s*=", re.I)
STYLE_WITHOUT_NONCE = re.compile(r"<style(?![^>]*\bnonce=)[^>]*>", re.I)
JS_URL = re.compile(r"""(href|src|action)\s*=\s*["']\s*javascript:""", re.I)


def test_templates_hold_nothing_the_policy_would_block():
    templates = _templates()
    assert len(templates) > 10
    problems = []
    for path in templates:
        text = path.read_text()
        for name, pattern in [
            ("inline <script> (move it to shopfloor/static/ and load it by src)", INLINE_SCRIPT),
            ("inline event handler (use addEventListener in a static file)", EVENT_HANDLER),
            ("style attribute (use a class in a stylesheet)", STYLE_ATTR),
            ('<style> without nonce="{{ csp_nonce }}"', STYLE_WITHOUT_NONCE),
            ("javascript: URL", JS_URL),
        ]:
            for match in pattern.finditer(text):
                line = text[: match.start()].count("\n") + 1
                problems.append(f"{path.relative_to(REPO)}:{line}: {name}")
    assert not problems, "\n".join(problems)


def test_the_scanner_finds_what_it_looks_for():
    """The patterns above are not vacuous: each matches its own example."""
    assert INLINE_SCRIPT.search("<script>alert(1)</script>")
    assert not INLINE_SCRIPT.search('<script src="/static/x.js"></script>')
    assert EVENT_HANDLER.search('<button onclick="go()">')
    assert STYLE_ATTR.search('<p style="color:red">')
    assert STYLE_WITHOUT_NONCE.search("<style>p{}</style>")
    assert not STYLE_WITHOUT_NONCE.search('<style nonce="{{ csp_nonce }}">')
    assert JS_URL.search('<a href="javascript:go()">')
