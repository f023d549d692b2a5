"""Desk size (1366 x 768): the board shows a whole lot row without scrolling, even with
alerts and the lab strip above the queues; the planner's job list never scrolls sideways.
Screenshots go to test-artifacts/ (looked at when the layout changes)."""

from __future__ import annotations

import pytest

from shopfloor.quality.models import Alert
from tests.browser.test_board_live import ARTIFACTS, signed_in_page

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
DESK = (1366, 768)


def test_board_shows_a_lot_row_at_desk_size(browser, live_server, floor):
    for i in range(8):  # more alerts than the desk lists unfolded
        Alert.objects.create(
            kind=Alert.Kind.OUT_OF_WINDOW,
            severity=Alert.Severity.WARNING,
            dedupe_key=f"desk-{i}",
            lot=floor.lot,
            message="Copper thickness below its window on a long explanatory line " * 3,
        )
    page = signed_in_page(browser, live_server, floor.personas["supervisor"].user, *DESK)
    page.goto(f"{live_server.url}/board/")
    page.wait_for_load_state("networkidle")
    page.wait_for_selector(".lab-strip-body")  # the lab strip loads after the page
    row = page.locator("tr.lot").first
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "board-desk-1366x768.png"))
    box = row.bounding_box()
    assert box is not None and box["y"] + box["height"] <= DESK[1], box
    assert page.evaluate("document.documentElement.scrollWidth") <= DESK[0]
    # the folded alerts open on demand
    page.get_by_text("5 more open alerts").click()
    assert page.locator(".more-alerts li").first.is_visible()
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "board-desk-1366x768.png"))


@pytest.mark.parametrize("size", [DESK, (1024, 768), (390, 844)])
def test_job_list_does_not_scroll_sideways(browser, live_server, floor, size):
    page = signed_in_page(browser, live_server, floor.personas["planner"].user, *size)
    page.goto(f"{live_server.url}/jobs/")
    page.wait_for_selector("table.jobs")
    assert page.evaluate("document.documentElement.scrollWidth") <= size[0]
    if size == DESK:  # at a desk the whole table fits, no inner scrolling either
        table = page.locator("table.jobs").bounding_box()
        assert table is not None and table["x"] + table["width"] <= size[0]
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"jobs-{size[0]}x{size[1]}.png"))
