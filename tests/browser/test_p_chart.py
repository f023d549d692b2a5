"""Electrical test's "failed k of n tested" on the tablet (1024x768), and the series'
p chart at the desk (1366x768): limits step with each lot's n, p-bar named, no Cpk.

Limits p-bar +- 3 sqrt(p-bar (1 - p-bar) / n), LCL at least 0 (NIST/SEMATECH
e-Handbook of Statistical Methods 6.3.3.2); the counts are the handbook example's first
ones (from memory), spread over lots of different sizes.
"""

from __future__ import annotations

from urllib.parse import quote

import pytest
from playwright.sync_api import expect

from shopfloor.floor import services as floor_services
from shopfloor.floor.models import Reading
from shopfloor.quality import series as series_core
from shopfloor.quality.models import OutboxEvent, SeriesState
from shopfloor.quality.services import alerts
from tests import factories, helpers
from tests.browser.conftest import TABLET

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
DESK = {"width": 1366, "height": 768}
LOTS = [(12, 50), (15, 60), (8, 40), (10, 50), (4, 30), (7, 50), (16, 60), (9, 40)]


def _etest(floor, lot):
    code = next(s.code for s in floor.lot.steps.order_by("position") if "etest" in s.code)
    step = helpers.advance_to(lot, code)
    floor_services.start_step(person=floor.personas["operator"], lot_step_id=step.pk)
    return step


def _handle_all() -> None:
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)


def test_failed_of_tested_on_the_tablet_and_the_p_chart(
    persona_page, floor, shoot, monkeypatch, parked_outbox
):
    monkeypatch.setattr(series_core, "DEFAULT_BASELINE", len(LOTS))
    for failed, tested in LOTS:
        step = _etest(floor, factories.new_lot(floor))
        floor_services.record_reading(
            person=floor.personas["operator"],
            lot_step_id=step.pk,
            data=floor_services.ReadingInput(
                quantity="etest_failed", value=failed, unit="count", tested=tested
            ),
        )
    _handle_all()

    # the tablet: one more lot, 3 of 45 boards failed
    lot = factories.new_lot(floor)
    step = _etest(floor, lot)
    tablet = persona_page("operator", viewport=TABLET)
    tablet.goto(f"/floor/lots/{lot.code}/")
    row = tablet.locator(f"#r-{step.pk}-etest_failed-1")
    expect(row).to_contain_text("Boards failed")
    row.locator("input[name=value]").fill("3")
    row.locator("input[name=tested]").fill("45")
    row.scroll_into_view_if_needed()
    shoot(tablet, "p-chart-1-tablet-entry", full_page=False)
    row.get_by_role("button", name="Record").click()
    expect(tablet.locator(f"#r-{step.pk}-etest_failed-1")).to_contain_text(
        "3 of 45 boards failed (6.7 %)"
    )
    tablet.locator(f"#r-{step.pk}-etest_failed-1").scroll_into_view_if_needed()
    shoot(tablet, "p-chart-2-tablet-recorded", full_page=False)
    assert Reading.objects.get(lot_step=step, quantity="etest_failed").tested == 45
    _handle_all()

    series = SeriesState.objects.get(quantity="etest_failed")
    assert series.chart == "p"  # lots of 30 to 60 boards: n varies
    desk = persona_page("quality_engineer", viewport=DESK)
    desk.goto(f"/quality/spc/{quote(series.key, safe='')}/")
    expect(desk.locator("#attribute-summary")).to_contain_text("p-bar")
    expect(desk.locator("#current-limits")).to_contain_text("n = 45")
    assert desk.locator("figure.chart svg polyline").count() >= 3  # points, UCL, LCL
    width = desk.evaluate("document.documentElement.scrollWidth")
    assert width <= DESK["width"], width
    shoot(desk, "p-chart-3-series-1366x768")
