"""The finish forecast on the wall screen and the quote page, in a real browser.

Board at wall (1920x1080) and desk (1366x768) sizes with P50 / P90 under each lot's
due-date state; the quote page at desk size answers with ship dates. Screenshots go to
test-artifacts/ (looked at by hand when the pages change).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from routing.builder.examples import EXAMPLE_SPECS
from shopfloor.planning import services
from tests.browser.test_board_live import signed_in_page
from tests.factories import make_lot

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


@pytest.mark.parametrize("size", [(1920, 1080), (1366, 768)])
def test_board_shows_the_forecast(browser, live_server, floor, size):
    for _ in range(3):
        make_lot(floor.routing, floor.job)
    assert services.run_forecast("command", replications=20, seed=3) is not None
    width, height = size
    page = signed_in_page(
        browser, live_server, floor.personas["supervisor"].user, width=width, height=height
    )
    page.goto(f"{live_server.url}/board/")
    row = page.locator(f'tr[data-lot="{floor.lot.code}"]')
    forecast = row.locator("td.forecast")
    assert forecast.inner_text().startswith("P50 ")
    assert "P90 " in forecast.inner_text()
    # the P50 / P90 line stays inside its cell (no overflow past the table)
    box, table = forecast.bounding_box(), row.locator("xpath=ancestor::table").bounding_box()
    assert box["x"] + box["width"] <= table["x"] + table["width"] + 1
    assert "finish forecast of" in page.locator(".board-stamp").inner_text()
    assert page.get_by_role("button", name="Forecast now").is_visible()
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"board-forecast-{width}x{height}.png"))


def test_quote_page_answers_at_desk_size(browser, live_server, floor):
    page = signed_in_page(
        browser, live_server, floor.personas["supervisor"].user, width=1366, height=768
    )
    page.goto(f"{live_server.url}/planning/quote/")
    page.fill("input[name=quantity]", "600")
    page.fill("textarea[name=spec]", json.dumps(EXAMPLE_SPECS["eight_layer_buried"], indent=2))
    page.get_by_role("button", name="Quote").click()
    page.wait_for_selector(".quote-result")
    text = page.locator(".quote-result").inner_text()
    assert "P50" in text and "P90" in text
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "quote-1366x768.png"))
    page.screenshot(path=str(ARTIFACTS / "quote-1366x768-full.png"), full_page=True)
    # a bad quantity is refused with what is allowed, the form keeps what was typed
    page.fill("input[name=quantity]", "many")
    page.get_by_role("button", name="Quote").click()
    page.wait_for_selector(".refusal")
    assert "not a whole number" in page.locator(".refusal").inner_text()
    assert page.input_value("input[name=quantity]") == "many"
    page.screenshot(path=str(ARTIFACTS / "quote-refused-1366x768.png"))
