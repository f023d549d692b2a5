"""A typing slip on a held lot, corrected on the tablet; quality closes the NCR as a
recording error on the NCR page (signed with the PIN), at the desk (1366x768) and on a
tablet-size screen (1024x768).

IPC-6012 (table of surface and hole copper plating minimum requirements, Table 3-4 in
revision D; from memory): class 3 plated-through holes need an average of 25 um and at
least 20 um in any thin area. 1 mil = 25.4 um (exact), so 0.09 mil = 2.3 um is below the
thin-area minimum and 0.9 mil = 22.9 um is not.
"""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from shopfloor.audit.models import Signature
from shopfloor.floor import services as floor_services
from shopfloor.plant.models import Lot
from shopfloor.quality.models import Hold, Nonconformance, OutboxEvent
from shopfloor.quality.services import alerts
from tests import factories, helpers
from tests.browser.conftest import TABLET
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

DESK = {"width": 1366, "height": 768}


def _handle_all() -> None:
    """What the alert worker does with the outbox (it has its own tests)."""
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)


def _held_class3_lot(floor):
    spec = dict(factories.SPEC_4L_ENIG, ipc_class=3)
    revision = factories.make_part_revision(spec)
    routing = factories.release_routing(revision, floor.personas["process_engineer"])
    lot = factories.make_lot(routing, factories.make_job(revision, routing))
    step = helpers.start_at(floor, lot)
    values = [("1.1", "mil"), ("1050", "µin"), ("27.5", "um"), ("0.09", "mil")]
    for sample, (value, unit) in enumerate(values, start=1):
        floor_services.record_reading(
            person=floor.personas["operator"],
            lot_step_id=step.pk,
            data=floor_services.ReadingInput(
                quantity="hole_wall_copper",
                value=value,
                unit=unit,
                sample_index=sample,
                confirm_out_of_window=True,  # the slip, confirmed as the operator did
            ),
        )
    _handle_all()
    return lot, step


@pytest.mark.parametrize(("viewport", "size"), [(DESK, "1366x768"), (TABLET, "1024x768")])
def test_corrected_slip_closed_as_a_recording_error(
    persona_page, floor, shoot, viewport, size, parked_outbox
):
    lot, step = _held_class3_lot(floor)
    ncr = Nonconformance.objects.get(lot=lot)
    assert Lot.objects.get(pk=lot.pk).on_hold

    # Before any correction the page does not offer a recording error.
    office = persona_page("quality_engineer", viewport=viewport)
    office.goto(f"/quality/ncrs/{ncr.number}/")
    office.wait_for_selector("#disposition-form")
    assert office.locator("input[value=recording_error]").count() == 0

    # The operator corrects sample 4 on the held lot's tablet page.
    tablet = persona_page("operator")
    tablet.goto(f"/floor/lots/{lot.code}/")
    expect(tablet.locator(".hold-banner")).to_be_visible()
    row = tablet.locator(f"#r-{step.pk}-hole_wall_copper-4")
    row.locator("summary", has_text="Correct this reading").click()
    row.locator("input[name=value]").fill("0.9")
    row.locator("select[name=unit]").select_option("mil")
    row.locator("input[name=reason]").fill("decimal point slipped: 0.9 mil on the gauge")
    row.get_by_role("button", name="Save correction").click()
    # 22.9 um is inside the thin-area minimum but under the class average: the typo
    # guard asks, and the operator confirms.
    confirm = row.get_by_role("button", name="Confirm 0.9 mil")
    expect(confirm).to_be_visible()
    confirm.click()
    expect(tablet.locator(f"#r-{step.pk}-hole_wall_copper-4 .superseded")).to_contain_text(
        "decimal point slipped"
    )
    _handle_all()
    ncr.refresh_from_db()
    assert "back inside" in ncr.correction_note
    assert Lot.objects.get(pk=lot.pk).on_hold  # the hold stays until quality decides

    office.reload()
    office.wait_for_selector("#disposition-form")
    note = office.locator("#correction-note")
    expect(note).to_contain_text("Back in window after a correction")
    expect(note).to_contain_text(
        "Sample 4 was corrected from 0.09 mil (decimal point slipped: 0.9 mil on the gauge) "
        "to 0.9 mil"
    )
    choice = office.locator("input[name=disposition][value=recording_error]")
    expect(choice).to_be_visible()
    choice.check()
    # the per-panel parts are hidden and switched off: a recording error keeps every panel
    expect(office.locator("#per-panel-parts")).to_be_hidden()
    expect(office.locator("#panel-decisions input[type=radio]").first).to_be_disabled()
    office.locator("#correction-note").scroll_into_view_if_needed()
    shoot(office, f"ncr-recording-error-note-{size}", full_page=False)
    office.select_option("#root_cause", "operator")
    office.fill("#corrective_action", "Read the unit off the gauge before typing")
    office.fill("#note", "Decimal slip; the corrected set is back in window")
    office.fill("#pin", PIN)
    shoot(office, f"ncr-recording-error-{size}", full_page=False)
    office.locator("#decision-kind").scroll_into_view_if_needed()
    shoot(office, f"ncr-recording-error-choice-{size}", full_page=False)
    office.click("#disposition-form button[type=submit]")
    office.wait_for_selector("#decision")
    expect(office.locator("#decision")).to_contain_text("Disposition: Recording error")
    expect(office.locator("#decision")).to_contain_text("Quinn Quality")
    shoot(office, f"ncr-recording-error-closed-{size}", full_page=False)

    ncr.refresh_from_db()
    assert ncr.status == "closed" and ncr.disposition == "recording_error"
    assert Signature.objects.get(pk=ncr.disposition_signature_id).meaning == "dispositioned_by"
    assert not Lot.objects.get(pk=lot.pk).on_hold
    assert not Hold.objects.filter(lot=lot, released_at__isnull=True).exists()
    tablet.reload()
    tablet.wait_for_selector("h1")
    assert tablet.locator(".hold-banner").count() == 0
