"""The board costs the same number of SQL queries at 20 lots as at 2,000.

Query budget (the brief's limit is 15): session, user, person, roles (4, the sign-in and
read scope); work centers, current steps, jobs on those lots, open holds, open alerts,
finishes, customers, jobs short of their order (8); the idle-timeout middleware's
session write (3: savepoint, update, release).
"""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from shopfloor.plant.models import WorkCenter
from shopfloor.quality.read.board import OVERVIEW_ROWS_PER_CENTER
from tests.factories import bulk_lots

BOARD_QUERIES = 15


def _count(client) -> tuple[int, bytes]:
    with CaptureQueriesContext(connection) as ctx:
        response = client.get("/board/")
    assert response.status_code == 200
    return len(ctx.captured_queries), response.content


@pytest.mark.django_db
@pytest.mark.parametrize("size", [20, 2000])
def test_board_query_count_is_fixed(floor, client, size):
    centers = list(WorkCenter.objects.order_by("code")[:6])
    lots = bulk_lots(floor.routing, floor.job, size - 1, centers)
    client.force_login(floor.personas["supervisor"].user)
    n, body = _count(client)
    assert n == BOARD_QUERIES
    assert n <= 15
    # every lot is counted; the overview shows the head of each center's queue
    assert f"{size} lots in process".encode() in body
    per_center: dict[int, int] = {}
    for i in range(size - 1):
        per_center[centers[i % len(centers)].pk] = (
            per_center.get(centers[i % len(centers)].pk, 0) + 1
        )
    own = floor.lot.steps.order_by("position").first().work_center_id
    per_center[own] = per_center.get(own, 0) + 1
    rows = body.count(b'class="lot state-')
    assert rows == sum(min(n, OVERVIEW_ROWS_PER_CENTER) for n in per_center.values())
    # one work center's own view lists its whole queue, at the same query cost
    busiest = centers[0]
    with CaptureQueriesContext(connection) as ctx:
        response = client.get("/board/", {"work_center": busiest.code})
    assert len(ctx.captured_queries) == BOARD_QUERIES
    assert response.content.count(b'class="lot state-') == per_center[busiest.pk]
    if size > 20:
        assert (
            lots[-1].code.encode()
            in client.get(
                "/board/", {"work_center": centers[(size - 2) % len(centers)].code}
            ).content
        )


@pytest.mark.django_db
def test_fragment_query_count_matches_page(floor, client, django_assert_num_queries):
    bulk_lots(floor.routing, floor.job, 40, list(WorkCenter.objects.all()[:3]))
    client.force_login(floor.personas["supervisor"].user)
    with django_assert_num_queries(BOARD_QUERIES):
        response = client.get("/board/body/", {"sort": "due"})
    assert response.status_code == 200
