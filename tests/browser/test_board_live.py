"""The board refreshes in place (htmx poll) when a lot moves; filters keep their values.

The browser comes from tests/browser/conftest.py (Debian's chromium, headless).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from django.test import Client

from shopfloor.floor import services as floor_services
from tests import factories

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


@pytest.fixture
def board_browser(browser):
    """pytest-playwright's shared browser (Debian's chromium, see conftest.py)."""
    return browser


def signed_in_page(browser, live_server, user, width=1280, height=800):
    client = Client()
    client.force_login(user)
    context = browser.new_context(viewport={"width": width, "height": height})
    host = live_server.url.split("//")[1].split(":")[0]
    context.add_cookies(
        [
            {
                "name": "sessionid",
                "value": client.cookies["sessionid"].value,
                "domain": host,
                "path": "/",
            }
        ]
    )
    return context.new_page()


def test_board_refreshes_in_place_when_lot_moves(board_browser, live_server, floor):
    lot = floor.lot
    steps = list(lot.steps.order_by("position"))
    here = steps[0].work_center.code
    nxt = next(s for s in steps if s.work_center.code != here)
    page = signed_in_page(board_browser, live_server, floor.personas["supervisor"].user)
    page.goto(f"{live_server.url}/board/?customer=TST&sort=lot")
    page.wait_for_selector(f'#wc-{here} tr[data-lot="{lot.code}"]')
    page.evaluate("window.__sameDocument = 'yes'")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "board-1280x800.png"))
    # move the lot on through the floor services while the page is open
    op = floor.personas["operator"]
    for s in steps[: steps.index(nxt)]:
        floor_services.start_step(person=op, lot_step_id=s.pk)
        floor_services.complete_step(person=op, lot_step_id=s.pk, pin=factories.PIN)
    page.wait_for_selector(f'#wc-{nxt.work_center.code} tr[data-lot="{lot.code}"]', timeout=30_000)
    assert page.locator(f'#wc-{here} tr[data-lot="{lot.code}"]').count() == 0
    assert page.evaluate("window.__sameDocument") == "yes"  # swapped in place, no reload
    assert page.input_value("#f-customer") == "TST"
    assert page.input_value("#f-sort") == "lot"
    wall = signed_in_page(board_browser, live_server, floor.personas["supervisor"].user, 1920, 1080)
    wall.goto(f"{live_server.url}/board/")
    wall.wait_for_selector(f'tr[data-lot="{lot.code}"]')
    wall.screenshot(path=str(ARTIFACTS / "board-wall-1920x1080.png"))


def test_top_button_moves_a_lot_through_the_center_form(board_browser, live_server, floor):
    """Each row's Top/Up/Down buttons submit their work center's one reorder form (the
    buttons name it with form=...), CSRF token included; the lot then heads the queue."""
    from shopfloor.audit.models import AuditEntry
    from shopfloor.plant.models import WorkCenter
    from tests.factories import bulk_lots

    wc = WorkCenter.objects.get(code="drilling")
    lots = bulk_lots(floor.routing, floor.job, 3, [wc], prefix="BT")
    page = signed_in_page(board_browser, live_server, floor.personas["supervisor"].user, 1024, 768)
    page.goto(f"{live_server.url}/board/?work_center=drilling")
    rows = page.locator("#wc-drilling tr.lot")
    assert rows.nth(0).get_attribute("data-lot") == lots[0].code
    rows.nth(2).get_by_role("button", name="Top").click()
    page.wait_for_url("**/board/?work_center=drilling")
    page.wait_for_selector(f'#wc-drilling tr.lot[data-lot="{lots[2].code}"]')
    assert page.locator("#wc-drilling tr.lot").nth(0).get_attribute("data-lot") == lots[2].code
    assert AuditEntry.objects.filter(action="queue.reordered", object_id=str(wc.pk)).count() == 1
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "board-reordered-1024x768.png"))
