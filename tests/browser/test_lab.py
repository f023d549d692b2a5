"""The lab in a browser: an out-of-window analysis lists the exposed lots, the addition
screen shows the caution, and a quality engineer holds the lots with one click.

Lab tablet 1024x768 for the technician, desk 1366x768 for the quality engineer;
screenshots in test-artifacts/ (looked at while building the pages).
"""

from __future__ import annotations

import pytest

from shopfloor.plant.models import Lot
from tests import helpers
from tests.browser.conftest import TABLET
from tests.factories import copper_tank, lab_tech

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
DESK = {"width": 1366, "height": 768}


def test_bad_analysis_to_exposed_lots_to_hold(browser, live_url, login_as, floor, shoot):
    tank = copper_tank()
    lab = lab_tech()
    helpers.start_at(floor, floor.lot)  # the lot's copper plating step runs in the tank

    context = browser.new_context(viewport=TABLET, base_url=live_url)
    page = login_as(context.new_page(), lab)
    page.goto(f"{live_url}/lab/")
    page.click(f"text={tank.code} · {tank.name}")
    page.select_option("select[name=parameter]", "chloride")
    page.fill("input[name=value]", "31")
    page.fill("input[name=unit]", "mg/L")
    page.click("text=Save analysis")
    page.wait_for_selector("#exposed")
    assert "OUT OF WINDOW" in page.content()
    assert page.locator("#exposed tbody tr").count() == 1
    assert floor.lot.code in page.inner_text("#exposed")
    # the technician may not hold lots: quality does
    assert page.locator("#hold-form").count() == 0
    shoot(page, "lab-exposed-1024x768")

    page.click("text=Work out the addition")
    page.wait_for_selector("#advice")
    caution = page.inner_text(".lab-caution")
    assert "add acid to water" in caution and "safety data sheets" in caution
    assert "gold salts" in caution and "ventilation" in caution
    assert "Record for an engineer to confirm" in page.content()
    shoot(page, "lab-addition-1024x768")
    # nothing in the tablet page is wider than the screen
    assert page.evaluate("document.documentElement.scrollWidth") <= TABLET["width"]
    context.close()

    desk = browser.new_context(viewport=DESK, base_url=live_url)
    qe_page = login_as(desk.new_page(), floor.personas["quality_engineer"])
    qe_page.goto(f"{live_url}/lab/tanks/{tank.code}/")
    qe_page.click("text=See the lots exposed")
    qe_page.click("#hold-form button")
    qe_page.wait_for_selector("text=1 lot(s) held for quality review")
    assert Lot.objects.get(pk=floor.lot.pk).on_hold
    shoot(qe_page, "lab-held-1366x768")
    assert qe_page.evaluate("document.documentElement.scrollWidth") <= DESK["width"]
    desk.close()
