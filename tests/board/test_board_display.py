"""Board filters and display: alerts follow the filters, dates in the site's format,
the projected-finish column."""

from __future__ import annotations

import pytest

from shopfloor.plant.models import Customer, Part, PartRevision, SiteSettings, WorkCenter
from shopfloor.quality.models import Alert
from tests import factories
from tests.factories import bulk_lots

pytestmark = pytest.mark.django_db


def _alert(key: str, message: str, **kw) -> Alert:
    return Alert.objects.create(
        kind=Alert.Kind.OUT_OF_WINDOW,
        severity=Alert.Severity.CRITICAL,
        dedupe_key=key,
        message=message,
        **kw,
    )


def _other_customers_lot(floor, center):
    other = Customer.objects.create(code="OTH", name="Other Customer")
    part = Part.objects.create(customer=other, number="OT-0001")
    pr = PartRevision.objects.create(
        part=part, revision="A", build_spec=floor.job.part_revision.build_spec
    )
    job = factories.make_job(pr, floor.routing)
    return bulk_lots(floor.routing, job, 1, [center], prefix="OTH")[0]


def test_alerts_obey_the_filters(floor, client):
    drilling = WorkCenter.objects.get(code="drilling")
    plating = WorkCenter.objects.exclude(pk=drilling.pk).order_by("code").first()
    mine = bulk_lots(floor.routing, floor.job, 1, [drilling], prefix="MINE")[0]
    theirs = _other_customers_lot(floor, plating)
    _alert("a-mine", "alert on the TST lot", lot=mine, work_center=drilling)
    _alert("a-theirs", "alert on the other customer's lot", lot=theirs, work_center=plating)
    _alert("a-bath-drill", "bath at drilling", work_center=drilling)
    _alert("a-bath-plating", "bath at the other center", work_center=plating)
    client.force_login(floor.personas["supervisor"].user)

    everything = client.get("/board/").content.decode()
    for text in ("TST lot", "other customer", "bath at drilling", "bath at the other"):
        assert text in everything
    assert "5 open alerts" not in everything and "4 open alerts" in everything

    only_oth = client.get("/board/", {"customer": "OTH"}).content.decode()
    assert "alert on the other customer&#x27;s lot" in only_oth
    assert "bath at the other center" in only_oth  # a lot of theirs is there now
    assert "TST lot" not in only_oth and "bath at drilling" not in only_oth
    assert "2 open alerts" in only_oth
    assert "for the lots and work centers shown" in only_oth

    at_drilling = client.get("/board/", {"work_center": "drilling"}).content.decode()
    assert "TST lot" in at_drilling and "bath at drilling" in at_drilling
    assert "other customer" not in at_drilling and "bath at the other" not in at_drilling

    # the polled fragment filters the same way
    body = client.get("/board/body/", {"customer": "OTH"}).content.decode()
    assert "TST lot" not in body and "other customer" in body


def test_dates_follow_the_site_format(floor, client):
    client.force_login(floor.personas["supervisor"].user)
    due = floor.job.due_date
    iso = client.get("/board/", {"due_from": due.isoformat()}).content.decode()
    assert f'value="{due.isoformat()}"' in iso and 'placeholder="YYYY-MM-DD"' in iso
    assert 'type="date"' not in iso  # a browser's picker shows its own mm/dd/yyyy
    SiteSettings.objects.update_or_create(pk=1, defaults={"date_format": "dmy_slash"})
    written = due.strftime("%d/%m/%Y")
    page = client.get("/board/", {"due_from": written, "due_to": written}).content.decode()
    assert page.count(f'value="{written}"') == 2  # the filter shows the site's format
    assert floor.lot.code in page  # and the lot due that day is found
    assert f"due {written}" in page or f"{written} ·" in page  # the rows too
    bad = client.get("/board/", {"due_from": "2030-31-01"})
    assert bad.status_code == 400
    assert "DD/MM/YYYY (for example 31/01/2030)" in bad.content.decode()
    client.force_login(floor.personas["planner"].user)
    jobs = client.get("/jobs/", {"due_before": "31/12/2099"}).content.decode()
    assert floor.job.number in jobs and written in jobs  # read and written the site's way
    refused = client.get("/jobs/", {"due_before": "12/31/2099"}).content.decode()
    assert "DD/MM/YYYY" in refused and floor.job.number not in refused


def test_projected_finish_is_its_own_column(floor, client):
    from shopfloor.planning import services

    assert services.run_forecast("command", replications=20, seed=3) is not None
    client.force_login(floor.personas["supervisor"].user)
    html = client.get("/board/").content.decode()
    assert "<th>Projected finish</th>" in html
    row = html.split(f'data-lot="{floor.lot.code}"')[1].split("</tr>")[0]
    cell = row.split('<td class="forecast">')[1].split("</td>")[0]
    assert cell.startswith("<span>P50 ") and "<span>P90 " in cell
