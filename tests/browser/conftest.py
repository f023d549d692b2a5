"""Playwright fixtures for every browser test (tablet, board, quality pages).

Debian's chromium is used headless (never `playwright install`, which downloads).
Live-server tests need `@pytest.mark.django_db(transaction=True)`: the browser connects
to a server thread that must see committed rows.

Fixtures:
  live_url         the live server's URL (127.0.0.1, a free port)
  login_as(page, person, pin=PIN)   badge + PIN login through the real form
  persona_page(name)  a new tablet-size page already logged in as that persona
  shoot(page, name)   full-page screenshot to test-artifacts/<name>.png (git-ignored)

Every browser context a test opens (pytest-playwright's `page`/`context`, `persona_page`,
or `browser.new_context()` / `browser.new_page()` in the test itself) is watched: a
Content-Security-Policy violation reported on the console or a page error fails the test
(`fail_on_csp_violation`, autouse). A page that needs an inline script or style gets a
nonce (DEVELOPERS.md "Templates under the CSP"), never a weaker policy.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

os.environ.setdefault("DJANGO_ALLOW_ASYNC_UNSAFE", "true")

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
TABLET = {"width": 1024, "height": 768}
PHONE = {"width": 390, "height": 844}


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args):
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        pytest.skip("chromium is not installed (apt-get install -y chromium)")
    return {
        **browser_type_launch_args,
        "executable_path": chromium,
        "headless": True,
        "args": [
            "--no-sandbox",
            "--disable-gpu",
            "--disable-dev-shm-usage",
            "--disable-quic",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
        ],
    }


@pytest.fixture(scope="session")
def browser_context_args(browser_context_args):
    return {**browser_context_args, "viewport": TABLET, "locale": "en-GB"}


#: Chromium's console text for a blocked script, style, image, frame or form target.
CSP_MARKERS = ("Content Security Policy", "Content-Security-Policy")


def csp_problem(text: str) -> bool:
    return any(marker in text for marker in CSP_MARKERS)


@pytest.fixture(autouse=True)
def fail_on_csp_violation(browser, monkeypatch):
    """Fail the test on any CSP violation in any context it opens (console listener)."""
    violations: list[str] = []

    def watch(context):
        def on_console(message) -> None:
            if csp_problem(message.text):
                violations.append(f"{message.type}: {message.text} ({message.location})")

        context.on("console", on_console)
        context.on(
            "weberror",
            lambda error: (
                violations.append(f"page error: {error.error}")
                if csp_problem(str(error.error))
                else None
            ),
        )
        return context

    original_context = browser.new_context
    original_page = browser.new_page

    def new_context(*args, **kwargs):
        return watch(original_context(*args, **kwargs))

    def new_page(*args, **kwargs):
        page = original_page(*args, **kwargs)
        watch(page.context)
        return page

    monkeypatch.setattr(browser, "new_context", new_context)
    monkeypatch.setattr(browser, "new_page", new_page)
    yield violations
    if violations:
        pytest.fail("Content-Security-Policy violations:\n" + "\n".join(violations))


@pytest.fixture
def live_url(live_server) -> str:
    return live_server.url


@pytest.fixture
def login_as(live_url):
    from tests.factories import PIN

    def login(page, person, pin: str = PIN):
        page.goto(f"{live_url}/floor/login/")
        page.fill("#badge", person.badge_number)
        page.fill("#pin", pin)
        page.click("button[type=submit]")
        page.wait_for_load_state()
        return page

    return login


@pytest.fixture
def persona_page(browser, live_url, login_as, floor):
    """persona_page("supervisor") -> a logged-in page (tablet viewport) for that persona."""
    contexts = []

    def make(name: str, viewport: dict | None = None):
        context = browser.new_context(viewport=viewport or TABLET, base_url=live_url)
        contexts.append(context)
        page = context.new_page()
        return login_as(page, floor.personas[name])

    yield make
    for context in contexts:
        context.close()


@pytest.fixture
def shoot():
    ARTIFACTS.mkdir(exist_ok=True)

    def save(page, name: str, full_page: bool = True) -> Path:
        path = ARTIFACTS / f"{name}.png"
        page.screenshot(path=str(path), full_page=full_page)
        return path

    return save


@pytest.fixture
def parked_outbox(monkeypatch):
    from tests import helpers

    return helpers.park_outbox(monkeypatch)
