"""The operator's night-shift flow in a real browser at tablet size (1024x768).

Outside fact: tolerance limits are inclusive, so a reading on a limit conforms (common
practice); mask registration here is "≤ 50 µm" (shop practice, the window's own source).
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from shopfloor.floor.models import LotStep, Reading
from shopfloor.quality.models import OutboxEvent
from tests import helpers
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def record(page, row_id: str, value: str) -> None:
    row = page.locator(f"#{row_id}")
    row.locator("input[name=value]").fill(value)
    row.locator("input[name=value]").press("Enter")


def test_operator_flow(page, live_url, login_as, floor, shoot, parked_outbox):
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, "mask_develop", by=operator, walk=True)
    wc = step.work_center

    login_as(page, operator)
    expect(page.get_by_role("heading", name="Pick your work center")).to_be_visible()
    shoot(page, "floor-01-work-centers")
    page.get_by_role("link", name=re.compile(wc.name)).click()
    expect(page.get_by_role("heading", name=re.compile(wc.name))).to_be_visible()
    expect(page.locator(".queue")).to_contain_text(floor.lot.code)
    shoot(page, "floor-02-queue")

    # A scanner types the code and presses Enter.
    page.locator("#lot-code").fill(floor.lot.code)
    page.locator("#lot-code").press("Enter")
    expect(page.get_by_role("heading", name=f"Lot {floor.lot.code}")).to_be_visible()
    page.get_by_role("button", name="Start step").click()
    expect(page.locator(".notice.success")).to_contain_text("Started")

    rid = f"r-{step.pk}-mask_registration"
    record(page, f"{rid}-1", "20")
    expect(page.locator(f"#{rid}-1 .badge.ok")).to_have_text("✓ In window")
    record(page, f"{rid}-2", "80")
    # out of window: the typo guard asks first; nothing is stored until confirmed
    expect(page.locator(f"#{rid}-2 .confirm-box")).to_contain_text("80 µm is above 50 µm")
    page.locator(f"#{rid}-2").get_by_role("button", name="Confirm 80").click()
    expect(page.locator(f"#{rid}-2 .badge.bad")).to_have_text("✗ OUT OF WINDOW")
    expect(page.locator(f"#{rid}-2")).to_contain_text("Quality will be alerted")
    shoot(page, "floor-03-readings")

    # Correct the out-of-window value: the old one stays, struck through.
    row = page.locator(f"#{rid}-2")
    row.locator("summary").click()
    row.locator("input[name=value]").fill("30")
    row.locator("input[name=reason]").fill("read the wrong pad")
    row.get_by_role("button", name="Save correction").click()
    expect(page.locator(f"#{rid}-2 s")).to_have_text(re.compile("80"))
    expect(page.locator(f"#{rid}-2 .badge.ok")).to_be_visible()
    for sample in (3, 4, 5):
        record(page, f"{rid}-{sample}", "50")  # on the limit: inside
        expect(page.locator(f"#{rid}-{sample} .badge.ok")).to_be_visible()

    assert Reading.objects.filter(lot_step=step).count() == 6
    out = [
        e
        for e in OutboxEvent.objects.filter(kind="reading.recorded")
        if e.payload.get("lot_step") == step.pk and not e.payload["in_window"]
    ]
    assert len(out) == 1  # the quality worker will turn it into an alert and a hold

    page.locator("#sign-pin").fill(PIN)
    expect(page.locator(".meaning")).to_contain_text("Performed by")
    page.get_by_role("button", name="Sign off step").click()
    expect(page.locator(".notice.success")).to_contain_text("signed off. Performed by")
    shoot(page, "floor-04-signed")
    step.refresh_from_db()
    assert step.status == LotStep.Status.DONE
    assert step.signature.meaning == "performed_by"


def test_wrong_pin_and_held_lot_refuse(page, login_as, floor, shoot, live_url):
    operator = floor.personas["operator"]
    login_as(page, operator)
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    page.get_by_role("button", name="Start step").click()
    page.locator("#sign-pin").fill("0000")
    page.get_by_role("button", name="Sign off step").click()
    expect(page.locator("#refusal")).to_contain_text("Wrong PIN. 4 more wrong attempt(s)")

    floor.lot.on_hold = True
    floor.lot.save(update_fields=["on_hold"])
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    expect(page.locator(".hold-banner")).to_contain_text("ON HOLD")
    page.get_by_role("button", name="Pause step").click()
    page.locator("#sign-pin").fill(PIN)
    page.get_by_role("button", name="Sign off step").click()
    expect(page.locator("#refusal")).to_contain_text("is on hold")
    shoot(page, "floor-05-held")

    page.locator("#lot-code").fill("NO-SUCH-LOT")
    page.locator("#lot-code").press("Enter")
    expect(page.locator("[role=alert]")).to_contain_text("No lot with code 'NO-SUCH-LOT'")


def test_lot_page_on_a_phone(persona_page, floor, shoot, parked_outbox):
    from tests.browser.conftest import PHONE

    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, helpers.measured())
    page = persona_page("operator", viewport=PHONE)
    page.goto(f"/floor/lots/{floor.lot.code}/")
    page.get_by_role("button", name="Start step").click()
    record(page, f"r-{step.pk}-surface_copper-1", "40")
    expect(page.locator(f"#r-{step.pk}-surface_copper-1 .badge.ok")).to_be_visible()
    # Nothing wider than the screen.
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= PHONE["width"], width
    shoot(page, "floor-06-phone-lot")
    page.evaluate("window.scrollTo(0, 0)")
    shoot(page, "floor-07-phone-top", full_page=False)
    page.locator(f"#r-{step.pk}-surface_copper-2").scroll_into_view_if_needed()
    shoot(page, "floor-08-phone-readings", full_page=False)
    assert operator.pk
