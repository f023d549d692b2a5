"""A quality engineer searches a material lot, opens the affected lot and its PDF record."""

from __future__ import annotations

import pytest

from shopfloor.plant.models import MaterialLot
from tests.browser.test_board_live import ARTIFACTS, board_browser, signed_in_page  # noqa: F401

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_material_search_to_lot_history_and_pdf(board_browser, live_server, floor):  # noqa: F811
    step = floor.lot.steps.order_by("position").first()
    mat = MaterialLot.objects.create(
        code="PP-2116-0007", kind="prepreg", description="Prepreg 2116", supplier_lot="R-555"
    )
    step.material_lots.add(mat)
    page = signed_in_page(board_browser, live_server, floor.personas["quality_engineer"].user)
    page.goto(f"{live_server.url}/quality/search/")
    page.fill("#s-material", "PP-2116-0007")
    page.click("#search-form button[type=submit]")
    page.wait_for_selector("text=1 lot(s) found")
    page.click(f'a.hit:has-text("{floor.lot.code}")')
    page.wait_for_selector(f"h1:has-text('Lot {floor.lot.code}')")
    assert "PP-2116-0007" in page.content()
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "quality-lot-1280x800.png"), full_page=False)
    href = page.get_attribute("#pdf-record", "href")
    response = page.context.request.get(f"{live_server.url}{href}")
    assert response.status == 200
    assert response.headers["content-type"] == "application/pdf"
    assert response.body()[:5] == b"%PDF-"
