"""Reading entry in a real browser: units per dimension, the last unit and gauge kept,
the window in the unit chosen, the phone's compact grid, and the Spanish tablet.

Outside facts: 1 mil = 25.4 µm exactly (1 in = 25.4 mm, 1959 international yard and
pound agreement); the hole-wall copper window here is the routing's own (IPC-6012 class
average and thin-area minimum, from memory, as routing/builder/windows.py cites it).
Spanish writes a decimal comma (CLDR "es").
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone
from playwright.sync_api import expect

from shopfloor.core import units
from shopfloor.floor.models import Reading
from shopfloor.plant.models import Equipment, Person
from tests import helpers
from tests.browser.conftest import PHONE, TABLET

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def _plating_step(floor):
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, "pattern_plate_copper", by=operator, walk=True)
    gauge = Equipment.objects.create(
        work_center=step.work_center,
        code="ECG-01",
        name="Eddy-current hole copper gauge",
        is_gauge=True,
        calibration_due=timezone.localdate() + dt.timedelta(days=60),
    )
    return operator, step, gauge


def _open(browser, live_url, login_as, person, viewport, lot_code):
    context = browser.new_context(viewport=viewport, base_url=live_url)
    page = context.new_page()
    login_as(page, person)
    page.goto(f"/floor/lots/{lot_code}/")
    return context, page


@pytest.mark.parametrize("language", ["en", "es"])
def test_unit_and_gauge_are_kept_and_the_window_follows_the_unit(
    browser, live_url, login_as, floor, shoot, parked_outbox, language
):
    operator, step, gauge = _plating_step(floor)
    Person.objects.filter(pk=operator.pk).update(language=language)
    context, page = _open(browser, live_url, login_as, operator, TABLET, floor.lot.code)
    start = {"en": "Start step", "es": "Iniciar paso"}[language]
    page.get_by_role("button", name=start).click()
    rid = f"r-{step.pk}-hole_wall_copper"
    unit_1 = page.locator(f"#{rid}-1 select[name=unit]")
    # hole copper offers lengths the trade reads it in only (it offered 26, inch marks, oz)
    assert unit_1.locator("option").all_inner_texts() == units.entry_units("hole_wall_copper")
    assert len(units.entry_units("hole_wall_copper")) <= 5
    window_in_mil = page.locator(
        "article[data-quantity=hole_wall_copper] .window-in[data-unit=mil]"
    )
    expect(window_in_mil).to_be_hidden()
    unit_1.select_option("mil")
    page.locator(f"#{rid}-1 select[name=equipment]").select_option(str(gauge.pk))
    # every sample still to take follows, and the window is shown in mil too
    expect(page.locator(f"#{rid}-4 select[name=unit]")).to_have_value("mil")
    expect(page.locator(f"#{rid}-4 select[name=equipment]")).to_have_value(str(gauge.pk))
    expect(window_in_mil).to_be_visible()
    expect(window_in_mil).to_contain_text("mil")
    shoot(page, f"entry-{language}-1024-mil-chosen")
    value = "1.1" if language == "en" else "1,1"  # 1.1 mil = 27.94 µm, inside the window
    page.locator(f"#{rid}-1 input[name=value]").fill(value)
    page.locator(f"#{rid}-1 input[name=value]").press("Enter")
    expect(page.locator(f"#{rid}-1 .badge.ok")).to_be_visible()
    reading = Reading.objects.get(lot_step=step, quantity="hole_wall_copper", sample_index=1)
    assert reading.entered_unit == "mil" and reading.value == pytest.approx(27.94)
    assert reading.equipment_id == gauge.pk
    # a new page (the next lot, the next shift) starts from the same unit and gauge
    page.reload()
    expect(page.locator(f"#{rid}-2 select[name=unit]")).to_have_value("mil")
    expect(page.locator(f"#{rid}-2 select[name=equipment]")).to_have_value(str(gauge.pk))
    expect(window_in_mil).to_be_visible()
    # ... and another quantity keeps its own (surface copper was never set)
    expect(page.locator(f"#r-{step.pk}-surface_copper-1 select[name=unit]")).to_have_value("µm")
    shoot(page, f"entry-{language}-1024-after-reload")
    context.close()


@pytest.mark.parametrize("language", ["en", "es"])
def test_phone_compact_grid_for_a_ten_sample_step(
    browser, live_url, login_as, floor, shoot, parked_outbox, language
):
    operator, step, _gauge = _plating_step(floor)
    Person.objects.filter(pk=operator.pk).update(language=language)
    step.status = step.Status.IN_PROGRESS
    step.started_at = timezone.now()
    step.started_by = operator
    step.save(update_fields=["status", "started_at", "started_by"])
    context, page = _open(browser, live_url, login_as, operator, PHONE, floor.lot.code)
    rows = page.locator(".measure .sample-row")
    assert rows.count() == 10  # hole wall copper x5, surface copper x5
    first, last = rows.first.bounding_box(), rows.last.bounding_box()
    span = last["y"] + last["height"] - first["y"]
    # was about 4,500 px for these 10 samples; each is now one line (the first of each
    # set asks position and gauge too)
    assert span < 1800, span
    header = page.locator(".topbar").bounding_box()
    scan = page.locator("form.scan").bounding_box()
    assert header["height"] + scan["height"] < 844 / 6, (header, scan)
    # nothing wider than the phone
    assert page.evaluate("document.documentElement.scrollWidth") <= 390
    # every control a gloved finger presses is at least 48 px high
    for selector in (".new-reading .btn", ".new-reading input[name=value]", ".topbar .btn"):
        for box in [b.bounding_box() for b in page.locator(selector).all()]:
            if box:
                assert box["height"] >= 48, (selector, box)
    shoot(page, f"entry-{language}-390-grid", full_page=False)
    shoot(page, f"entry-{language}-390-grid-full")
    rid = f"r-{step.pk}-surface_copper"
    value = "41.5" if language == "en" else "41,5"
    page.locator(f"#{rid}-3 input[name=value]").fill(value)
    page.locator(f"#{rid}-3 input[name=value]").press("Enter")
    expect(page.locator(f"#{rid}-3 .badge.ok")).to_be_visible()
    if language == "es":
        expect(page.locator(f"#{rid}-3")).to_contain_text("Dentro de ventana")
        expect(page.get_by_role("heading", name="Mediciones")).to_be_visible()
    shoot(page, f"entry-{language}-390-recorded")
    context.close()
