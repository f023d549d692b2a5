"""The tablet through a Wi-Fi drop (issue 15 item 1), with Playwright's offline emulation.

Every wait is on the page's own state (the offline panel writes data-waiting,
data-replayed and each item's data-state), never on the clock, so the replay test is
deterministic; CI runs it 20 times in a row (test_offline_replay_repeated, marked
`repeat`).

Outside fact: mask registration "≤ 50 µm" is shop practice (the window's own source);
20 µm is inside it.
"""

from __future__ import annotations

import os

import pytest
from playwright.sync_api import expect

from shopfloor.floor.models import IdempotencyRecord, LotStep, Reading
from tests import helpers
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

QUANTITY = "mask_registration"
#: Bound (ms) for waits that span server round trips: the worker's install (the static
#: files), a replay (one POST per item, then the page fetched again). Still a wait on the
#: page's state, never a sleep; it is generous because a loaded CI machine is slow, and
#: Playwright's 5 s default made one run in 20 fail on a machine at load 11.
SLOW = 30_000


def panel(page):
    return page.locator("#offline-panel")


def ready_for_offline(page) -> None:
    """The panel has loaded, the service worker controls the page and has kept a copy."""
    expect(panel(page)).to_have_attribute("data-ready", "yes")
    expect(panel(page)).to_have_attribute("data-worker-ready", "yes", timeout=SLOW)
    expect(panel(page)).to_have_attribute("data-page-saved", "yes", timeout=SLOW)


def record(page, row_id: str, value: str) -> None:
    field = page.locator(f"#{row_id} input[name=value]")
    field.fill(value)
    field.press("Enter")


def offline_walk(page, live_url, lot, step: LotStep, shoot=None) -> None:
    """Start and 5 readings made offline, a reload offline, then back online."""
    context = page.context
    page.goto(f"{live_url}/floor/lots/{lot.code}/")
    ready_for_offline(page)

    context.set_offline(True)
    expect(panel(page)).to_have_attribute("data-online", "no")
    expect(panel(page).locator(".offline-summary")).to_contain_text("offline: nothing waiting")
    page.get_by_role("button", name="Start step").click()
    expect(panel(page).locator(".offline-summary")).to_contain_text("offline: 1 start waiting")
    rid = f"r-{step.pk}-{QUANTITY}"
    for sample in range(1, 6):
        record(page, f"{rid}-{sample}", "20")
        expect(page.locator(f"#{rid}-{sample} .queued-note")).to_contain_text("waiting to send")
        # focus moves on to the next sample, ready for the next reading
        if sample < 5:
            expect(page.locator(f"#{rid}-{sample + 1} input[name=value]")).to_be_focused()
    summary = panel(page).locator(".offline-summary")
    expect(summary).to_contain_text("offline: 5 readings, 1 start waiting")
    expect(panel(page)).to_have_attribute("data-waiting", "6")
    assert Reading.objects.filter(lot_step=step).count() == 0

    # A reload while offline shows the kept copy of the lot, with the kept readings on it.
    page.reload()
    expect(page.get_by_role("heading", name=f"Lot {lot.code}")).to_be_visible()
    expect(panel(page)).to_have_attribute("data-ready", "yes")
    expect(summary).to_contain_text("offline: 5 readings, 1 start waiting")
    expect(page.locator(".sample-row .queued-note")).to_have_count(5)
    if shoot:
        shoot(page, "offline-01-waiting")

    # Signing off needs the network, and says so.
    page.locator("#sign-pin").fill(PIN)
    page.get_by_role("button", name="Sign off step").click()
    expect(page.locator(".sign-form .needs-network")).to_contain_text(
        "Signing off needs the network"
    )

    context.set_offline(False)
    expect(panel(page)).to_have_attribute("data-replayed", "yes", timeout=SLOW)
    expect(panel(page)).to_have_attribute("data-waiting", "0", timeout=SLOW)
    expect(panel(page).locator(".offline-item[data-state=sent]")).to_have_count(6, timeout=SLOW)
    # the page shows the server's truth: each sample stored and in window
    expect(page.locator(f"[id^={rid}-] .badge.ok")).to_have_count(5, timeout=SLOW)
    expect(summary).to_contain_text("online: nothing waiting · 6 sent")


def check_stored_once(floor, step: LotStep, keys_before: int = 0) -> None:
    readings = list(Reading.objects.filter(lot_step=step).order_by("sample_index"))
    assert [r.sample_index for r in readings] == [1, 2, 3, 4, 5]
    assert all(r.in_window for r in readings)
    # the capture time is the tablet's, made before the reading reached the server
    assert all(r.captured_at <= r.recorded_at for r in readings)
    step.refresh_from_db()
    assert step.status == LotStep.Status.IN_PROGRESS
    user = floor.personas["operator"].user
    # one stored reply per action made offline (a start and 5 readings), none twice
    assert IdempotencyRecord.objects.filter(user=user).count() - keys_before == 6


def test_offline_readings_replay_once(page, live_url, login_as, floor, shoot, parked_outbox):
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, "mask_develop", by=operator, walk=True)
    login_as(page, operator)
    offline_walk(page, live_url, floor.lot, step, shoot)
    shoot(page, "offline-02-sent")
    check_stored_once(floor, step)

    # Another drop and return sends nothing again: exactly 5 readings, once.
    page.context.set_offline(True)
    expect(panel(page)).to_have_attribute("data-online", "no")
    page.context.set_offline(False)
    expect(panel(page)).to_have_attribute("data-online", "yes")
    page.reload()
    expect(panel(page)).to_have_attribute("data-ready", "yes")
    expect(panel(page)).to_have_attribute("data-waiting", "0", timeout=SLOW)
    check_stored_once(floor, step)


def test_refused_replay_shows_its_reason(page, live_url, login_as, floor, shoot, parked_outbox):
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, "mask_develop", by=operator, walk=True)
    login_as(page, operator)
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    page.get_by_role("button", name="Start step").click()
    expect(page.locator(".notice.success")).to_contain_text("Started")
    ready_for_offline(page)

    page.context.set_offline(True)
    rid = f"r-{step.pk}-{QUANTITY}"
    record(page, f"{rid}-1", "20")
    record(page, f"{rid}-2", "21")
    expect(panel(page)).to_have_attribute("data-waiting", "2")
    # Meanwhile quality holds the lot.
    floor.lot.on_hold = True
    floor.lot.save(update_fields=["on_hold"])

    page.context.set_offline(False)
    expect(panel(page)).to_have_attribute("data-replayed", "yes", timeout=SLOW)
    refused = panel(page).locator(".offline-item[data-state=refused]")
    expect(refused).to_have_count(2)
    expect(refused.first).to_contain_text("is on hold")
    expect(panel(page).locator(".offline-summary")).to_contain_text("2 need your attention")
    expect(page.locator(f"#{rid}-1 .queued-note")).to_contain_text("is on hold")
    # the page was fetched again after the refusals: it shows the hold too
    expect(page.locator(".hold-banner")).to_contain_text("ON HOLD")
    shoot(page, "offline-03-refused")
    assert Reading.objects.filter(lot_step=step).count() == 0

    # Never sent again on its own: another drop and return, and a reload, leave it refused.
    page.context.set_offline(True)
    expect(panel(page)).to_have_attribute("data-online", "no")
    page.context.set_offline(False)
    page.reload()
    expect(panel(page)).to_have_attribute("data-ready", "yes")
    expect(panel(page).locator(".offline-item[data-state=refused]")).to_have_count(2, timeout=SLOW)
    assert Reading.objects.filter(lot_step=step).count() == 0
    # The operator removes them from the tablet.
    panel(page).get_by_role("button", name="Remove from this tablet").first.click()
    expect(panel(page).locator(".offline-item[data-state=refused]")).to_have_count(1, timeout=SLOW)


def test_out_of_window_reading_kept_offline_asks_to_confirm(
    page, live_url, login_as, floor, parked_outbox
):
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, "mask_develop", by=operator, walk=True)
    login_as(page, operator)
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    page.get_by_role("button", name="Start step").click()
    ready_for_offline(page)
    page.context.set_offline(True)
    rid = f"r-{step.pk}-{QUANTITY}"
    record(page, f"{rid}-1", "80")
    expect(panel(page)).to_have_attribute("data-waiting", "1")
    page.context.set_offline(False)
    item = panel(page).locator(".offline-item[data-state=confirm]")
    expect(item).to_contain_text("80 µm is above 50 µm", timeout=SLOW)
    assert Reading.objects.filter(lot_step=step).count() == 0
    item.get_by_role("button", name="Confirm and send").click()
    expect(panel(page).locator(".offline-item[data-state=sent]")).to_have_count(1, timeout=SLOW)
    reading = Reading.objects.get(lot_step=step)
    assert not reading.in_window and reading.confirmation


def test_scan_while_offline_opens_the_kept_lot(page, live_url, login_as, floor, shoot):
    operator = floor.personas["operator"]
    login_as(page, operator)
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    ready_for_offline(page)
    page.goto(f"{live_url}/floor/")
    expect(panel(page)).to_have_attribute("data-worker-ready", "yes", timeout=SLOW)
    page.context.set_offline(True)
    page.locator("#lot-code").fill(floor.lot.code.lower())
    page.locator("#lot-code").press("Enter")
    expect(page.get_by_role("heading", name=f"Lot {floor.lot.code}")).to_be_visible()
    # a lot never opened on this tablet: the offline page, listing what is kept
    page.goto(f"{live_url}/floor/lots/NOT-KEPT-1/")
    expect(page.get_by_role("heading", name="The network is down")).to_be_visible()
    expect(page.locator("#kept-lots")).to_contain_text(floor.lot.code)
    shoot(page, "offline-04-not-kept")
    page.context.set_offline(False)


REPEATS = 20


def _skip_to(lot, code: str) -> LotStep:
    """Set-up shortcut: the steps before `code` marked done directly (no services)."""
    step = lot.steps.get(code=code)
    lot.steps.filter(position__lt=step.position).update(status=LotStep.Status.DONE)
    return step


@pytest.mark.repeat
@pytest.mark.skipif(
    os.environ.get("CI", "").lower() != "true" and not os.environ.get("OFFLINE_REPEAT"),
    reason="the 20-times replay run is for CI (or OFFLINE_REPEAT=1)",
)
def test_offline_replay_20_times_in_a_row(browser, live_url, login_as, floor, parked_outbox):
    """The issue's bar: the offline replay passes 20 times in a row with no flake. Each
    run is a new lot and a new browser context (its own service worker and IndexedDB)."""
    from tests.browser.conftest import TABLET
    from tests.factories import make_lot

    operator = floor.personas["operator"]
    for run in range(1, REPEATS + 1):
        lot = make_lot(floor.routing, floor.job)
        step = _skip_to(lot, "mask_develop")
        keys_before = IdempotencyRecord.objects.filter(user=operator.user).count()
        context = browser.new_context(viewport=TABLET)
        try:
            page = context.new_page()
            login_as(page, operator)
            offline_walk(page, live_url, lot, step)
            check_stored_once(floor, step, keys_before)
        except Exception as exc:
            raise AssertionError(f"offline replay failed on run {run} of {REPEATS}") from exc
        finally:
            context.close()


PHONE = {"width": 390, "height": 844}
DESK = {"width": 1366, "height": 768}


@pytest.mark.parametrize("viewport", [PHONE, DESK], ids=["phone", "desk"])
def test_offline_panel_at_other_sizes(viewport, browser, live_url, login_as, floor, shoot):
    """The issue's words on a phone and a desk screen: "offline: 3 readings waiting"."""
    operator = floor.personas["operator"]
    step = _skip_to(floor.lot, "mask_develop")
    context = browser.new_context(viewport=viewport)
    try:
        page = context.new_page()
        login_as(page, operator)
        page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
        page.get_by_role("button", name="Start step").click()
        ready_for_offline(page)
        context.set_offline(True)
        rid = f"r-{step.pk}-{QUANTITY}"
        for sample in (1, 2, 3):
            record(page, f"{rid}-{sample}", "20")
        expect(panel(page).locator(".offline-summary")).to_contain_text(
            "offline: 3 readings waiting"
        )
        assert page.evaluate("document.documentElement.scrollWidth") <= viewport["width"]
        name = "phone" if viewport["width"] < 500 else "desk"
        page.evaluate("window.scrollTo(0, 0)")
        shoot(page, f"offline-05-{name}-top", full_page=False)
        page.locator(f"#{rid}-3").scroll_into_view_if_needed()
        shoot(page, f"offline-06-{name}-rows", full_page=False)
        context.set_offline(False)
        expect(panel(page)).to_have_attribute("data-replayed", "yes", timeout=SLOW)
        expect(panel(page).locator(".offline-item[data-state=sent]")).to_have_count(3, timeout=SLOW)
        page.evaluate("window.scrollTo(0, 0)")
        shoot(page, f"offline-07-{name}-sent", full_page=False)
    finally:
        context.close()


def test_server_out_of_reach_while_online_keeps_the_reading(
    page, live_url, login_as, floor, parked_outbox
):
    """Wi-Fi up but the server out of reach: the browser says online, the request fails;
    the reading is kept, and Send now sends it once the server answers again."""
    operator = floor.personas["operator"]
    step = _skip_to(floor.lot, "mask_develop")
    login_as(page, operator)
    page.goto(f"{live_url}/floor/lots/{floor.lot.code}/")
    page.get_by_role("button", name="Start step").click()
    expect(panel(page)).to_have_attribute("data-ready", "yes")
    page.route("**/readings/", lambda route: route.abort("internetdisconnected"))
    rid = f"r-{step.pk}-{QUANTITY}"
    record(page, f"{rid}-1", "20")
    expect(page.locator(f"#{rid}-1 .queued-note")).to_contain_text("waiting to send")
    expect(panel(page).locator(".offline-summary")).to_contain_text("online: 1 reading waiting")
    assert Reading.objects.filter(lot_step=step).count() == 0
    page.unroute("**/readings/")
    panel(page).get_by_role("button", name="Send now").click()
    expect(panel(page).locator(".offline-item[data-state=sent]")).to_have_count(1, timeout=SLOW)
    expect(page.locator(f"#{rid}-1 .badge.ok")).to_be_visible()
    assert Reading.objects.filter(lot_step=step).count() == 1
