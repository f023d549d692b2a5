"""A quality engineer dispositions an NCR as rework on an office screen (1280x800); the
operator's tablet page then no longer shows the hold banner and the rework step is in
the route. Use as is / rework / scrap are the standard material-review dispositions
(common practice)."""

from __future__ import annotations

import pytest

from shopfloor.floor.models import LotStep
from shopfloor.quality.models import Nonconformance
from shopfloor.quality.services import alerts
from tests import helpers
from tests.factories import PIN

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

OFFICE = {"width": 1280, "height": 800}


def test_quality_engineer_dispositions_rework_and_hold_banner_goes(persona_page, floor, shoot):
    step = helpers.start_at(floor, floor.lot)
    reading = helpers.record(floor, step, "surface_copper", 70.0)  # window 33.75-57.5 um
    alerts.handle_event(helpers.event_for(reading).pk)
    ncr = Nonconformance.objects.get(lot=floor.lot)

    tablet = persona_page("operator")
    tablet.goto(f"/floor/lots/{floor.lot.code}/")
    assert tablet.locator(".hold-banner").is_visible()
    shoot(tablet, "ncr-tablet-held")

    office = persona_page("quality_engineer", viewport=OFFICE)
    office.goto("/quality/")
    office.click(f"a:has-text('{ncr.number}')")
    office.wait_for_selector("#disposition-form")
    assert "Dispositioned by Quinn Quality" in office.inner_text(".sign-meaning")
    shoot(office, "ncr-open-1280x800")

    office.click("button[data-set-all=rework]")  # every panel: rework (the page's script)
    assert office.locator("input[type=radio][value=rework]:checked").count() == 2
    # the rework route defaults to the process library's: plate again at this step
    assert office.locator("select[name=rework_route]").first.input_value() == step.code
    office.select_option("#root_cause", "process_drift")
    office.fill("#corrective_action", "Rectifier current checked at each shift start")
    office.fill("#note", "Surface copper 70 um: plate again to the window")
    office.fill("#pin", "0000")  # a wrong PIN first: refused in place, nothing saved
    office.click("#disposition-form button[type=submit]")
    office.wait_for_selector("#disposition-error")
    assert "Wrong PIN" in office.inner_text("#disposition-error")
    assert office.input_value("#note").startswith("Surface copper 70 um")
    assert office.locator("input[type=radio][value=rework]:checked").count() == 2  # kept
    shoot(office, "ncr-wrong-pin-1280x800")

    office.fill("#pin", PIN)
    office.click("#disposition-form button[type=submit]")
    office.wait_for_selector("#decision")
    decision = office.inner_text("#decision")
    assert "Disposition: Rework" in decision and "Quinn Quality" in decision
    assert step.name in decision and "Process drift" in decision
    shoot(office, "ncr-dispositioned-1280x800")

    tablet.reload()
    tablet.wait_for_selector("h1")
    assert tablet.locator(".hold-banner").count() == 0
    shoot(tablet, "ncr-tablet-released")
    rework = LotStep.objects.get(lot=floor.lot, is_rework=True)
    assert rework.name == step.name and rework.position > step.position
    # the route marks the added step, with the NCR it came from
    route_rework = tablet.locator(".route-step:has(.rework-tag)")
    assert route_rework.count() == 1
    assert f"REWORK for {ncr.number}" in route_rework.inner_text()
