"""The wall board on a 1080p screen: nothing scrolls, no text under 20 px, no controls,
and when the busy centers do not fit one screen the pages turn by themselves."""

from __future__ import annotations

import pytest

from shopfloor.plant.models import WorkCenter
from tests.browser.test_board_live import ARTIFACTS, signed_in_page
from tests.factories import bulk_lots

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
WALL = (1920, 1080)


def _wait_for_page(page, wanted, seconds: float = 9.0) -> None:
    """Poll the wall's page number from Python (the CSP forbids wait_for_function's eval);
    bounded: the page turns every 5 s in these tests."""
    for _ in range(int(seconds * 4)):
        if wanted(page.get_attribute("#wall", "data-page")):
            return
        page.wait_for_timeout(250)
    raise AssertionError(f"the wall stayed on page {page.get_attribute('#wall', 'data-page')}")


def test_wall_fits_the_screen_and_turns_pages(browser, live_server, floor):
    centers = list(WorkCenter.objects.order_by("code")[:10])
    bulk_lots(floor.routing, floor.job, 60, centers, prefix="WB")
    page = signed_in_page(browser, live_server, floor.personas["supervisor"].user, *WALL)
    page.goto(f"{live_server.url}/board/wall/?seconds=5")
    page.wait_for_selector("#wall[data-pages]")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "wall-1920x1080-page1.png"))
    assert page.evaluate("document.documentElement.scrollHeight") <= WALL[1]
    assert page.evaluate("document.documentElement.scrollWidth") <= WALL[0]
    # read from 3 m: the smallest text on screen is at least 20 px
    smallest = page.evaluate(
        """() => Math.min(...Array.from(document.querySelectorAll('#wall *'))
             .filter(e => e.offsetParent !== null && e.childNodes.length &&
                     Array.from(e.childNodes).some(n => n.nodeType === 3 && n.textContent.trim()))
             .map(e => parseFloat(getComputedStyle(e).fontSize)))"""
    )
    assert smallest >= 20, smallest
    # no controls: nothing to click or type into
    visible_controls = page.locator("#wall button, #wall input, #wall select, .topbar button")
    assert all(not visible_controls.nth(i).is_visible() for i in range(visible_controls.count()))
    pages = int(page.get_attribute("#wall", "data-pages"))
    assert pages >= 2  # 10 busy centers with 6 lots each do not fit one 1080p screen
    first = page.locator(".wall-center:not([hidden])").first.get_attribute("data-wc")
    _wait_for_page(page, lambda n: n == "2")
    assert page.locator(".wall-center:not([hidden])").first.get_attribute("data-wc") != first
    assert f"page 2 of {pages}" in page.inner_text(".wall-stamp")
    page.screenshot(path=str(ARTIFACTS / "wall-1920x1080-page2.png"))
    # every busy center is on exactly one page
    seen = set()
    for _ in range(pages):
        shown = page.eval_on_selector_all(
            ".wall-center:not([hidden])", "els => els.map(e => e.dataset.wc)"
        )
        assert not seen & set(shown)
        seen |= set(shown)
        now = page.get_attribute("#wall", "data-page")
        _wait_for_page(page, lambda n, now=now: n != now)
    assert seen == {c.code for c in centers} | {
        floor.lot.steps.order_by("position").first().work_center.code
    }
