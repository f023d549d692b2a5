"""The gauge-file upload page in a real browser at the operator's tablet (1024x768) and
a desk screen (1366x768): choose a file, record it, read the result line by line.

Outside fact: 1 mil = 25.4 µm exactly (NIST SP 811, appendix B); the plating step's
surface copper window starts at 33.75 µm (the routing builder's class 2 window).
"""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from shopfloor.floor.models import Reading
from tests import helpers

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.mark.parametrize(
    ("size", "viewport"),
    [("tablet", {"width": 1024, "height": 768}), ("desk", {"width": 1366, "height": 768})],
)
def test_operator_uploads_a_gauge_file(
    browser, live_url, login_as, floor, shoot, parked_outbox, size, viewport
):
    helpers.start_at(floor, floor.lot)
    context = browser.new_context(viewport=viewport, base_url=live_url)
    try:
        page = login_as(context.new_page(), floor.personas["operator"])
        page.get_by_role("link", name="Upload a gauge file").click()
        expect(page.get_by_role("heading", name="Upload a gauge file")).to_be_visible()
        shoot(page, f"upload-01-form-{size}")
        csv_text = (
            "lot,quantity,value,unit,sample_index,position\n"
            f"{floor.lot.code},surface_copper,1.75,mil,1,panel 1 corner A\n"
            f"{floor.lot.code},hole_wall_copper,0.4,mil,1,panel 1 hole B\n"
            f"{floor.lot.code},nickel_thickness,5,um,1,panel 1\n"
            "NO-SUCH-LOT,surface_copper,45,um,1,\n"
        )
        page.set_input_files(
            "#file",
            {"name": "xrf-export.csv", "mimeType": "text/csv", "buffer": csv_text.encode()},
        )
        page.get_by_role("button", name="Record the readings").click()
        # 0.4 mil = 10.16 µm is far below the thin-area minimum: a file line cannot answer
        # the typo guard's question, so the line waits with the question in plain words
        # and a box to store it as measured (the API's flag is never shown to a person)
        expect(page.locator(".upload-counts")).to_contain_text("1 recorded")
        expect(page.locator(".upload-counts")).to_contain_text("3 refused")
        table = page.locator(".upload-table")
        expect(table).to_contain_text("0.4 mil = 10.2 µm is below")
        expect(table).to_contain_text("not measured at")
        expect(table).to_contain_text("No lot")
        expect(page.locator("#upload-question")).to_contain_text("1 line needs your check")
        assert "confirm_out_of_window" not in page.content().replace(
            'name="confirm_out_of_window"', ""
        )
        # The result table fits the screen: no sideways scrolling at this size.
        width = page.evaluate("document.documentElement.scrollWidth")
        assert width <= viewport["width"], width
        shoot(page, f"upload-02-result-{size}")
        assert Reading.objects.filter(lot_step__lot=floor.lot).count() == 1

        # Nothing ticked: nothing recorded, and the page says what to do.
        page.get_by_role("button", name="Record the ticked lines").click()
        expect(page.locator(".error")).to_contain_text("No line was ticked")
        assert Reading.objects.filter(lot_step__lot=floor.lot).count() == 1

        # The gauge really read 0.4 mil: upload again, tick the line, record it.
        page.set_input_files(
            "#file",
            {"name": "xrf-export.csv", "mimeType": "text/csv", "buffer": csv_text.encode()},
        )
        page.get_by_role("button", name="Record the readings").click()
        expect(page.locator(".upload-counts")).to_contain_text("1 already there")
        row = table.locator("tr", has_text="hole_wall_copper")
        row.get_by_label("Store as measured").check()
        shoot(page, f"upload-03-ticked-{size}")
        page.get_by_role("button", name="Record the ticked lines").click()
        expect(page.locator(".upload-counts")).to_contain_text("1 recorded")
        expect(table).to_contain_text("out of window")
        shoot(page, f"upload-04-confirmed-{size}")
        stored = Reading.objects.get(lot_step__lot=floor.lot, quantity="hole_wall_copper")
        assert stored.entered_value == "0.4" and stored.entered_unit == "mil"
        assert stored.confirmation  # the confirmation is stored with the reading
        assert stored.via == "upload"
    finally:
        context.close()
