"""The wall board (/board/wall/): busy centers only, a capped lot list with "+N more",
page length from the site settings or the URL, the desk's filters (alerts included),
clear refusals for bad URL parameters, and the same fixed query count as the desk."""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from shopfloor.plant.models import SiteSettings, WorkCenter
from shopfloor.quality.models import Alert
from tests.board.test_board_queries import BOARD_QUERIES
from tests.factories import bulk_lots

pytestmark = pytest.mark.django_db


def _wall(client, floor, **params):
    client.force_login(floor.personas["supervisor"].user)
    return client.get("/board/wall/", params)


def test_only_busy_centers_and_a_capped_list(floor, client):
    drilling = WorkCenter.objects.get(code="drilling")
    lots = bulk_lots(floor.routing, floor.job, 9, [drilling], prefix="WALL")
    html = _wall(client, floor).content.decode()
    busy = {s.work_center.code for s in [floor.lot.steps.order_by("position").first()]}
    busy.add("drilling")
    shown = {wc.code for wc in WorkCenter.objects.all() if f'id="wall-{wc.code}"' in html}
    assert shown == busy  # idle centers are left out by default
    idle = WorkCenter.objects.count() - len(busy)
    assert f"{idle} work centers idle" in html
    section = html.split('id="wall-drilling"')[1].split("</section>")[0]
    # the site's default: 6 lots per center, the other 3 as "+3 more"
    assert section.count('<tr class="lot') == 6 and "+3 more" in section
    assert sum(lot.code in section for lot in lots) == 6
    assert (
        "<button" not in html
        and "<select" not in html
        and "<input" not in html.split('id="wall"')[1]
    )  # no controls on the wall
    assert 'data-seconds="20"' in html  # the site's default page length

    everything = _wall(client, floor, empty="1", lots="20", seconds="45").content.decode()
    assert all(f'id="wall-{wc.code}"' in everything for wc in WorkCenter.objects.all())
    section = everything.split('id="wall-drilling"')[1].split("</section>")[0]
    assert section.count('<tr class="lot') == 9 and "more" not in section
    assert 'data-seconds="45"' in everything


def test_site_settings_size_the_wall(floor, client):
    SiteSettings.objects.update_or_create(
        pk=1, defaults={"wall_page_seconds": 12, "wall_lots_per_center": 2}
    )
    drilling = WorkCenter.objects.get(code="drilling")
    bulk_lots(floor.routing, floor.job, 5, [drilling], prefix="SS")
    html = _wall(client, floor).content.decode()
    section = html.split('id="wall-drilling"')[1].split("</section>")[0]
    assert section.count('<tr class="lot') == 2 and "+3 more" in section
    assert 'data-seconds="12"' in html


@pytest.mark.parametrize(
    ("params", "says"),
    [
        ({"seconds": "2"}, "from 5 to 600"),
        ({"seconds": "ten"}, "from 5 to 600"),
        ({"lots": "0"}, "from 1 to 40"),
        ({"empty": "maybe"}, "empty=1"),
        ({"due_from": "31.12.2030"}, "YYYY-MM-DD"),
    ],
)
def test_bad_url_parameters_say_what_is_allowed(floor, client, params, says):
    response = _wall(client, floor, **params)
    assert response.status_code == 400
    assert says in response.content.decode()


def test_alerts_and_filters_as_on_the_desk(floor, client):
    Alert.objects.create(
        kind=Alert.Kind.OUT_OF_WINDOW,
        severity=Alert.Severity.CRITICAL,
        dedupe_key="w1",
        lot=floor.lot,
        message="thin copper",
    )
    assert "1 open alert" in _wall(client, floor).content.decode()
    other = _wall(client, floor, customer="NOBODY").content.decode()
    assert "open alert" not in other and "No lots in process for this selection" in other


def test_wall_costs_the_desks_queries(floor, client):
    bulk_lots(floor.routing, floor.job, 60, list(WorkCenter.objects.order_by("code")[:4]))
    client.force_login(floor.personas["supervisor"].user)
    client.get("/board/wall/")  # warm the session
    with CaptureQueriesContext(connection) as ctx:
        assert client.get("/board/wall/body/").status_code == 200
    assert len(ctx.captured_queries) <= BOARD_QUERIES
