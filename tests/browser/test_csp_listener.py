"""The CSP console listener in conftest.py catches a violation (so a browser test that
silently broke a page under the policy cannot pass), and the real pages raise none."""

from __future__ import annotations

import pytest

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_listener_catches_an_inline_script_and_handler(page, live_url, fail_on_csp_violation):
    # A page served by our own server, with our policy, that tries an inline script and an
    # inline event handler: both must be blocked and reported.
    page.goto(f"{live_url}/floor/login/")
    page.evaluate(
        """() => {
            const s = document.createElement('script');
            s.textContent = 'window.__ran = true';
            document.body.appendChild(s);
            const b = document.createElement('button');
            b.setAttribute('onclick', 'window.__clicked = true');
            b.id = 'inline-handler';
            document.body.appendChild(b);
        }"""
    )
    page.click("#inline-handler")
    page.wait_for_timeout(200)
    assert page.evaluate("window.__ran") is None  # the policy blocked it
    assert page.evaluate("window.__clicked") is None
    caught = list(fail_on_csp_violation)
    assert any("script" in v for v in caught), caught
    fail_on_csp_violation.clear()  # expected here; any other test would fail on it


def test_api_docs_page_runs_under_the_policy(page, live_url, floor, login_as):
    """Swagger UI is self-hosted and its set-up script loads by URL: no violation."""
    login_as(page, floor.personas["supervisor"])
    page.goto(f"{live_url}/api/docs/")
    page.wait_for_selector(".swagger-ui .info", timeout=15000)
    assert "Shop-floor traveller API" in page.inner_text(".swagger-ui .info")
