"""Every page a person touches meets WCAG 2.2 AA as axe-core checks it, at tablet size.

axe-core (the npm package, pinned in tests/a11y/package-lock.json) is injected into each
page with Playwright's add_script_tag and run with the WCAG 2.0/2.1/2.2 A and AA rule
tags; any violation of serious or critical impact fails, listed with its nodes. The
pages are walked signed in as the person who uses them, in the standard and in the
high-contrast theme. Missing node_modules is installed with `npm ci` (needs npm and the
registry); without npm the test fails and says so, rather than skipping silently.

Reference: W3C Web Content Accessibility Guidelines (WCAG) 2.2, success criteria 1.4.3
(contrast minimum 4.5:1, 3:1 for large text), 1.3.1, 2.4.x, 4.1.2, as encoded in
axe-core's rules (an independent, widely used checker).
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from django.test import Client

from shopfloor.plant.models import Role
from tests.browser.test_board_live import ARTIFACTS
from tests.factories import make_person

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

A11Y = Path(__file__).resolve().parents[1] / "a11y"
AXE = A11Y / "node_modules" / "axe-core" / "axe.min.js"
TABLET = (1024, 768)
WCAG_TAGS = ["wcag2a", "wcag2aa", "wcag21a", "wcag21aa", "wcag22aa"]
BLOCKING = {"serious", "critical"}


@pytest.fixture(scope="session")
def axe_script() -> Path:
    """axe.min.js, installed from the lock file with `npm ci` when node_modules is missing."""
    if not AXE.exists():
        npm = shutil.which("npm")
        if npm is None:
            pytest.fail(
                "npm is not installed, so axe-core cannot be installed for the accessibility "
                f"test: install Node.js 20 with npm, or run `npm ci` in {A11Y} elsewhere."
            )
        done = subprocess.run(
            [npm, "ci", "--no-audit", "--no-fund"],
            cwd=A11Y,
            capture_output=True,
            text=True,
            timeout=300,
            check=False,
        )
        if done.returncode != 0 or not AXE.exists():
            pytest.fail(f"`npm ci` in {A11Y} failed (registry reachable?):\n{done.stderr[-2000:]}")
    return AXE


def _pages(floor) -> list[tuple[str, str]]:
    """(persona, path) for every page a person opens, with the test floor's records."""
    lot, job = floor.lot, floor.job
    first = lot.steps.order_by("position").first()
    return [
        ("anonymous", "/floor/login/"),
        ("operator", "/floor/"),
        ("operator", f"/floor/centers/{first.work_center.code}/"),
        ("operator", f"/floor/lots/{lot.code}/"),
        ("operator", "/floor/readings/upload/"),
        ("supervisor", "/board/"),
        ("supervisor", "/board/wall/"),
        ("supervisor", "/floor/people/locked/"),
        ("quality_engineer", "/quality/"),
        ("quality_engineer", "/quality/search/"),
        ("quality_engineer", f"/quality/lots/{lot.code}/"),
        ("quality_engineer", f"/quality/jobs/{job.number}/"),
        ("quality_engineer", "/quality/spc/"),
        ("lab_technician", "/lab/"),
        ("lab_technician", "/lab/calculator/"),
        ("process_engineer", "/engineering/"),
        ("process_engineer", "/engineering/import-design/"),
        ("planner", "/jobs/"),
        ("planner", "/jobs/new/"),
        ("planner", f"/jobs/{job.number}/"),
        ("planner", "/planning/quote/"),
        ("planner", "/shipping/"),
    ]


def _violations(page, axe: Path) -> list[str]:
    page.add_script_tag(path=str(axe))
    result = page.evaluate(
        "tags => axe.run(document, {runOnly: {type: 'tag', values: tags}})", WCAG_TAGS
    )
    out = []
    for v in result["violations"]:
        if v["impact"] in BLOCKING:
            where = "; ".join(n["target"][0] for n in v["nodes"][:5])
            out.append(f"{v['id']} ({v['impact']}): {v['help']} at {where}")
    return out


def _page_for(browser, live_server, user, theme: str):
    """A tablet-size page signed in as `user` (None: signed out) with the theme cookie.

    axe.min.js goes in as an inline script, so this context alone bypasses the CSP (the
    pages' own scripts and styles are held to it by the CSP listener in every other test).
    """
    context = browser.new_context(
        viewport={"width": TABLET[0], "height": TABLET[1]}, bypass_csp=True
    )
    host = live_server.url.split("//")[1].split(":")[0]
    cookies = [{"name": "theme", "value": theme, "domain": host, "path": "/"}]
    if user is not None:
        client = Client()
        client.force_login(user)
        cookies.append(
            {
                "name": "sessionid",
                "value": client.cookies["sessionid"].value,
                "domain": host,
                "path": "/",
            }
        )
    context.add_cookies(cookies)
    return context.new_page()


@pytest.mark.parametrize("theme", ["standard", "contrast"])
def test_no_serious_or_critical_violation_on_any_page(
    browser, live_server, floor, axe_script, theme
):
    # The checker itself: faint grey text on white must be reported (so a pass is real).
    probe = _page_for(browser, live_server, None, theme)
    probe.set_content('<html lang="en"><main><p style="color:#bbb">faint</p></main></html>')
    assert any(p.startswith("color-contrast (serious)") for p in _violations(probe, axe_script))
    people = dict(floor.personas)
    people["lab_technician"] = make_person(Role.LAB_TECHNICIAN, "1077", "Lee Lab")
    found: dict[str, list[str]] = {}
    pages: dict[str, object] = {}
    for persona, path in _pages(floor):
        if persona not in pages:
            user = None if persona == "anonymous" else people[persona].user
            pages[persona] = _page_for(browser, live_server, user, theme)
        page = pages[persona]
        response = page.goto(f"{live_server.url}{path}")
        assert response is not None and response.status < 400, (path, response and response.status)
        page.wait_for_load_state("networkidle")
        assert page.get_attribute("html", "data-theme") == theme, path
        problems = _violations(page, axe_script)
        if problems:
            found[f"{persona} {path}"] = problems
            ARTIFACTS.mkdir(exist_ok=True)
            name = path.strip("/").replace("/", "_") or "home"
            page.screenshot(path=str(ARTIFACTS / f"a11y-{theme}-{name}.png"))
    assert not found, "\n".join(f"{k}:\n  " + "\n  ".join(v) for k, v in found.items())
