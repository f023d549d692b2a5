"""The high-contrast floor theme: toggled on the tablet, kept for the person and the
device, and drawn black on white (screenshots at tablet and phone size)."""

from __future__ import annotations

import pytest

from tests.browser.conftest import PHONE
from tests.browser.test_board_live import ARTIFACTS

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_toggle_on_the_tablet(persona_page, floor, live_url):
    page = persona_page("operator")
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    assert page.get_attribute("html", "data-theme") == "standard"
    page.get_by_role("button", name="High contrast").click()
    page.wait_for_load_state()
    assert page.url.endswith(f"/floor/lots/{floor.lot.code}/")  # back where it was pressed
    assert page.get_attribute("html", "data-theme") == "contrast"
    assert page.get_attribute(".theme-toggle button", "aria-pressed") == "true"
    bg = page.evaluate("getComputedStyle(document.body).backgroundColor")
    ink = page.evaluate("getComputedStyle(document.querySelector('main')).color")
    assert (bg, ink) == ("rgb(255, 255, 255)", "rgb(0, 0, 0)")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "contrast-lot-1024x768.png"))
    floor.personas["operator"].refresh_from_db()
    assert floor.personas["operator"].theme == "contrast"  # follows the person
    page.set_viewport_size(PHONE)
    page.reload()
    assert page.get_attribute("html", "data-theme") == "contrast"
    page.screenshot(path=str(ARTIFACTS / "contrast-lot-390x844.png"))
    page.get_by_role("button", name="High contrast").click()
    page.wait_for_load_state()
    assert page.get_attribute("html", "data-theme") == "standard"
