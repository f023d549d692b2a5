"""The board costs the same number of SQL queries at 20 lots as at 2,000.

Query budget (the brief's limit is 15): session, user, person, roles (4, the sign-in and
read scope); work centers, current steps, jobs on those lots, open holds, open alerts,
finishes, customers (7); the idle-timeout middleware's session write (3: savepoint,
update, release).
"""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from shopfloor.plant.models import WorkCenter
from tests.board.kit import bulk_lots

BOARD_QUERIES = 14


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
    # every lot is on the board, not just the first page of them
    assert body.count(b'class="lot state-') == size
    assert lots[-1].code.encode() in body


@pytest.mark.django_db
def test_fragment_query_count_matches_page(floor, client, django_assert_num_queries):
    bulk_lots(floor.routing, floor.job, 40, list(WorkCenter.objects.all()[:3]))
    client.force_login(floor.personas["supervisor"].user)
    with django_assert_num_queries(BOARD_QUERIES):
        response = client.get("/board/body/", {"sort": "due"})
    assert response.status_code == 200
