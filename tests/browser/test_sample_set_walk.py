"""The hole-copper walk on the tablet: a class 3 lot's sample set, the running mean, a
confirmed out-of-window value and the sign-off, at tablet (1024x768) and phone (390x844).

IPC-6012 (table of surface and hole copper plating minimum requirements, Table 3-4 in
revision D; from memory): class 3 plated-through holes need an average of 25 um and at
least 20 um in any thin area. 1 mil = 25.4 um, 1 uin = 0.0254 um (exact).
"""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from shopfloor.floor.models import LotStep, Reading
from tests import factories, helpers
from tests.browser.conftest import ARTIFACTS, PHONE, TABLET
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def _class3_lot(floor):
    spec = dict(factories.SPEC_4L_ENIG, ipc_class=3)
    revision = factories.make_part_revision(spec)
    routing = factories.release_routing(revision, floor.personas["process_engineer"])
    lot = factories.make_lot(routing, factories.make_job(revision, routing))
    step = helpers.advance_to(lot, helpers.PLATING)
    return lot, step


def _record(page, row_id: str, value: str, unit: str) -> None:
    row = page.locator(f"#{row_id}")
    row.locator("select[name=unit]").select_option(unit)
    row.locator("input[name=value]").fill(value)
    row.get_by_role("button", name="Record").click()


@pytest.mark.parametrize(("viewport", "size"), [(TABLET, "tablet"), (PHONE, "phone")])
def test_hole_copper_walk(persona_page, floor, shoot, parked_outbox, viewport, size):
    lot, step = _class3_lot(floor)
    page = persona_page("operator", viewport=viewport)
    page.goto(f"/floor/lots/{lot.code}/")
    page.get_by_role("button", name="Start step").click()
    expect(page.locator("#plan")).to_contain_text("average of 5 samples ≥ 25 µm; each ≥ 20 µm")
    rid = f"r-{step.pk}-hole_wall_copper"
    running = page.locator(f"#run-{step.pk}-hole_wall_copper")

    _record(page, f"{rid}-1", "1.1", "mil")
    expect(page.locator(f"#{rid}-1 .badge.ok")).to_be_visible()
    _record(page, f"{rid}-2", "1050", "µin")
    expect(page.locator(f"#{rid}-2 .badge.ok")).to_be_visible()
    _record(page, f"{rid}-3", "27.5", "µm")
    expect(page.locator(f"#{rid}-3 .badge.ok")).to_be_visible()
    # (27.94 + 26.67 + 27.5) / 3 = 27.37 um
    expect(running).to_contain_text("mean so far (3 of 5) 27.4 µm, needs ≥ 25 µm")

    _record(page, f"{rid}-4", "0.9", "mil")
    box = page.locator(f"#{rid}-4 .confirm-box")
    expect(box).to_contain_text("0.9 mil = 22.9 µm is below 25 µm")
    assert not Reading.objects.filter(lot_step=step, sample_index=4).exists()
    page.locator(f"#{rid}-4").scroll_into_view_if_needed()
    shoot(page, f"walk-{size}-1-confirm", full_page=False)
    page.locator(f"#{rid}-4").get_by_role("button", name="Confirm 0.9 mil").click()
    expect(page.locator(f"#{rid}-4 .badge.ok")).to_be_visible()
    expect(page.locator(f"#{rid}-4")).to_contain_text("Confirmed as entered")
    # (27.94 + 26.67 + 27.5 + 22.86) / 4 = 26.24 um
    expect(running).to_contain_text("mean so far (4 of 5) 26.2 µm, needs ≥ 25 µm")
    shoot(page, f"walk-{size}-2-running-mean", full_page=False)

    _record(page, f"{rid}-5", "26", "µm")
    expect(page.locator(f"#{rid}-5 .badge.ok")).to_be_visible()
    expect(running).to_contain_text("mean of 5 samples 26.2 µm, needs ≥ 25 µm — inside")
    ARTIFACTS.mkdir(exist_ok=True)
    page.locator("article.measure").filter(has_text="Hole Wall Copper").screenshot(
        path=str(ARTIFACTS / f"walk-{size}-2b-hole-copper-set.png")
    )

    surface = f"r-{step.pk}-surface_copper"
    for sample in range(1, 6):
        _record(page, f"{surface}-{sample}", "41.5", "µm")
        expect(page.locator(f"#{surface}-{sample} .badge.ok")).to_be_visible()
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= viewport["width"], width
    shoot(page, f"walk-{size}-3-set-complete")

    page.locator("#sign-pin").fill(PIN)
    page.get_by_role("button", name="Sign off step").click()
    expect(page.locator(".notice.success")).to_contain_text("signed off")
    step.refresh_from_db()
    assert step.status == LotStep.Status.DONE
    last = Reading.objects.get(lot_step=step, quantity="hole_wall_copper", sample_index=5)
    assert last.set_verdict["in_window"] is True
