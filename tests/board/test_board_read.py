"""The board's fast paths give what the plain ones give.

- board_steps (window functions) finds the same current steps as current_steps
  (subqueries), also with a work-center filter or an operator's scope, where a filter
  applied too early would find a lot's later open step instead of its current one;
- BoardLinks gives what reverse() gives;
- the rows written by {% lot_rows %} escape every value;
- the one reorder form per work center still moves a lot, CSRF-checked;
- the board shows a queue in the order move_in_queue moves it in.
"""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

import pytest
from django.test import Client
from django.urls import reverse
from django.utils import timezone

from shopfloor.access import scope_for
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, WorkCenter
from shopfloor.quality.models import Hold
from shopfloor.quality.read import board, board_display
from shopfloor.quality.services import queue as queue_moves
from tests import factories
from tests.factories import bulk_lots

pytestmark = pytest.mark.django_db


def _mixed_lots(floor) -> tuple[list[Lot], list[WorkCenter]]:
    """Lots in each state the board tells apart, over three work centers. bulk_lots gives
    each lot step 20 (current, waiting) at centers[i % 3] and step 30 at the next one."""
    centers = list(WorkCenter.objects.order_by("code")[:3])
    lots = bulk_lots(floor.routing, floor.job, 9, centers, prefix="MX")
    step = LotStep.objects.filter
    step(lot=lots[0], position=20).update(status=LotStep.Status.IN_PROGRESS)
    step(lot=lots[1], position=20).update(status=LotStep.Status.PAUSED)
    Lot.objects.filter(pk=lots[2].pk).update(on_hold=True)
    Hold.objects.create(lot=lots[2], reason="Waiting for a cross-section")
    step(lot=lots[3], position=20).update(status=LotStep.Status.SKIPPED)  # now at step 30
    step(lot=lots[4], position=20).update(status=LotStep.Status.DONE)  # now at step 30
    step(lot=lots[5]).update(status=LotStep.Status.DONE)
    Lot.objects.filter(pk=lots[5].pk).update(status=Lot.Status.COMPLETE)  # off the board
    Lot.objects.filter(pk=lots[6].pk).update(status=Lot.Status.NOT_STARTED, started_at=None)
    step(lot=lots[6]).update(status=LotStep.Status.WAITING, arrived_at=None)  # at step 10
    Lot.objects.filter(pk=lots[7].pk).update(status=Lot.Status.SCRAPPED)  # off the board
    return lots, centers


def _plain(scope, work_center: str = "") -> set[tuple[int, int]]:
    qs = board.current_steps(scope)
    if work_center:
        qs = qs.filter(work_center__code=work_center)
    return set(qs.values_list("id", "remaining"))


def _fast(scope, centers, work_center: str = "") -> set[tuple[int, int]]:
    rows = board.board_steps(scope, board.BoardFilters(work_center=work_center), centers)
    at = board._STEP_COLUMNS
    return {(r[at.index("id")], r[at.index("remaining")]) for r in rows}


def test_board_steps_match_current_steps(floor):
    lots, centers = _mixed_lots(floor)
    all_centers = list(WorkCenter.objects.order_by("code"))
    supervisor = scope_for(floor.personas["supervisor"].user)
    found = _fast(supervisor, all_centers)
    assert found == _plain(supervisor)
    current = dict(found)
    # in progress, paused and held lots keep their step 20; skipped/done step 20 moves
    # the lot to step 30; the not-started lot is at step 10; finished lots are gone
    at = dict(LotStep.objects.filter(pk__in=current).values_list("lot__code", "position"))
    assert at == {
        lots[0].code: 20,
        lots[1].code: 20,
        lots[2].code: 20,
        lots[3].code: 30,
        lots[4].code: 30,
        lots[6].code: 10,
        lots[8].code: 20,
    } | {floor.lot.code: floor.lot.steps.order_by("position").first().position}
    # remaining standard minutes: the current step and every open one after it
    lot0_step = lots[0].steps.get(position=20)
    assert current[lot0_step.pk] == 40 + 20
    for wc in centers:
        # the trap: lots 0-2 have an open step 30 at the next center; they are not there
        assert _fast(supervisor, all_centers, wc.code) == _plain(supervisor, wc.code)
    assert _fast(supervisor, all_centers, "no-such-center") == set()


def test_board_steps_match_current_steps_in_an_operator_scope(floor):
    _, centers = _mixed_lots(floor)
    op = factories.make_person("operator", "2101", "Ona Ops", work_centers=[centers[1]])
    scope = scope_for(op.user)
    all_centers = list(WorkCenter.objects.order_by("code"))
    assert _fast(scope, all_centers) == _plain(scope)
    assert _fast(scope, all_centers) != set()
    assert _fast(scope, all_centers, centers[1].code) == _plain(scope, centers[1].code)
    assert _fast(scope, all_centers, centers[0].code) == set()


@pytest.mark.parametrize("code", ["L-0001", "a b&c", "x?y#z", "quote'd\"", "€uro%20", "semi;colon"])
def test_links_match_reverse(code):
    links = board_display.BoardLinks()
    assert links.lot(code) == reverse("quality:lot", args=[code])
    assert links.job(code) == reverse("quality:job", args=[code])
    assert links.release(123) == reverse("quality:queue_release", args=[123])
    assert links.move(7) == reverse("quality:queue_move", args=[7])


def test_rows_escape_every_value(floor, client):
    wc = WorkCenter.objects.get(code="drilling")
    lot = bulk_lots(floor.routing, floor.job, 1, [wc], prefix="E", arrived_minutes_ago=55)[0]
    hostile = '<b id="x">&\'"'
    Lot.objects.filter(pk=lot.pk).update(code=f"E<i>{lot.pk}", on_hold=False)
    LotStep.objects.filter(lot=lot, position=20).update(name=hostile)
    client.force_login(floor.personas["supervisor"].user)
    html = client.get("/board/", {"work_center": "drilling"}).content.decode()
    assert "<i>" not in html and hostile not in html and '<b id="x">' not in html
    assert f"E&lt;i&gt;{lot.pk}" in html
    assert "&lt;b id=&quot;x&quot;&gt;&amp;&#x27;&quot;" in html
    # the held-lot reason is escaped and shortened to 60 characters, as before
    Lot.objects.filter(pk=lot.pk).update(on_hold=True)
    Hold.objects.create(lot=lot, reason="<script>alert(1)</script>" + "x" * 80)
    html = client.get("/board/", {"work_center": "drilling"}).content.decode()
    assert "<script>alert(1)" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" + "x" * 34 + "…" in html


def _order_form(html: str, form_id: str) -> tuple[str, dict[str, str]]:
    form = re.search(rf'<form id="{form_id}"[^>]*action="([^"]+)"[^>]*>(.*?)</form>', html)
    assert form, f"no form {form_id}"
    fields = dict(re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)"', form[2]))
    return unescape(form[1]), fields


def test_one_reorder_form_per_center_moves_a_lot_with_csrf(floor):
    wc = WorkCenter.objects.get(code="drilling")
    lots = bulk_lots(floor.routing, floor.job, 3, [wc], prefix="F")
    client = Client(enforce_csrf_checks=True)
    client.force_login(floor.personas["supervisor"].user)
    html = client.get("/board/", {"sort": "lot"}).content.decode()
    section = html.split('id="wc-drilling"')[1].split("</section>")[0]
    assert section.count("<form ") == 1  # one form for the center, not one per row
    action, fields = _order_form(section, f"order-{wc.pk}")
    assert action == f"/board/queue/{wc.pk}/move/"
    assert fields["back"] == "sort=lot" and fields["csrfmiddlewaretoken"]
    # each queued row's buttons belong to that form and carry their lot
    last = lots[2].steps.get(position=20)
    button = re.search(
        rf'<button [^>]*form="order-{wc.pk}" name="move" value="top:{last.pk}"', section
    )
    assert button, section[:2000]
    # without the token the post is refused; with it the lot goes to the top
    refused = client.post(action, {"move": f"top:{last.pk}", "back": "sort=lot"})
    assert refused.status_code == 403
    moved = client.post(action, {**fields, "move": f"top:{last.pk}"})
    assert moved.status_code == 302 and moved["Location"] == "/board/?sort=lot"
    scope = scope_for(floor.personas["supervisor"].user)
    queue = board.build_board(scope, board.parse_filters({"work_center": "drilling"}))
    assert queue.columns[0].queued[0].step_id == last.pk
    # the older form of the post (lot_step beside move) still works; bad ones are a 400
    first = lots[0].steps.get(position=20)
    again = client.post(action, {**fields, "lot_step": first.pk, "move": "top"})
    assert again.status_code == 302
    assert client.post(action, {**fields, "move": "top:abc"}).status_code == 400
    assert client.post(action, {**fields, "move": f"sideways:{first.pk}"}).status_code == 400


def test_board_shows_a_queue_in_the_order_moves_act_on(floor, client):
    """Lots without an arrival time used to be ordered by start time on the board but
    by creation time when moved, so "Up" could move a lot past one it was not behind."""
    wc = WorkCenter.objects.get(code="drilling")
    older, newer = bulk_lots(floor.routing, floor.job, 2, [wc], prefix="ORD")
    now = timezone.now()
    Lot.objects.filter(pk=older.pk).update(
        created_at=now - dt.timedelta(days=2), started_at=now - dt.timedelta(hours=1)
    )
    Lot.objects.filter(pk=newer.pk).update(
        created_at=now - dt.timedelta(days=1), started_at=now - dt.timedelta(hours=9)
    )
    LotStep.objects.filter(lot__in=[older, newer], position=20).update(arrived_at=None)
    scope = scope_for(floor.personas["supervisor"].user)

    def shown() -> list[str]:
        b = board.build_board(scope, board.parse_filters({"work_center": "drilling"}))
        return [x.lot_code for x in b.columns[0].queued]

    assert (
        shown()
        == [s.lot.code for s in queue_moves.waiting_queue(wc.pk)]
        == [older.code, newer.code]
    )
    step = newer.steps.get(position=20)
    queue_moves.move_in_queue(floor.personas["supervisor"], wc.pk, step.pk, "up")
    assert shown() == [newer.code, older.code]


def test_jobs_are_read_for_the_rows_shown(floor):
    centers = list(WorkCenter.objects.order_by("code")[:1])
    bulk_lots(floor.routing, floor.job, board.OVERVIEW_ROWS_PER_CENTER + 3, centers, prefix="J")
    scope = scope_for(floor.personas["supervisor"].user)
    column = next(c for c in board.build_board(scope, board.BoardFilters()).columns if c.hidden)
    assert all(lot.job_list for lot in column.rows)
    hidden = column.queued[-1]
    assert hidden not in column.rows
    with pytest.raises(LookupError, match="not read"):
        hidden.due_state  # the property raises
    # sorting by due date needs every lot's jobs, so all are read
    column = next(
        c for c in board.build_board(scope, board.BoardFilters(sort="due")).columns if c.hidden
    )
    assert column.queued[-1].job_list[0].number == floor.job.number
    assert column.queued[-1].due_word == "on time"


def test_release_form_in_a_row_posts_with_its_csrf_token(floor):
    wc = WorkCenter.objects.get(code="drilling")
    lot = bulk_lots(floor.routing, floor.job, 1, [wc], prefix="RW", arrived_minutes_ago=55)[0]
    step = lot.steps.get(position=20)
    client = Client(enforce_csrf_checks=True)
    client.force_login(floor.personas["supervisor"].user)
    html = client.get("/board/", {"work_center": "drilling"}).content.decode()
    form = re.search(r'<form method="post" action="([^"]+)">(.*?)</form>', html)
    assert form and unescape(form[1]) == f"/board/steps/{step.pk}/release-queue-warning/"
    fields = dict(re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)"', form[2]))
    assert fields["back"] == "work_center=drilling" and fields["csrfmiddlewaretoken"]
    reply = client.post(unescape(form[1]), {**fields, "reason": "Oven slot at 14:00"})
    assert reply.status_code == 302 and reply["Location"] == "/board/?work_center=drilling"
    step.refresh_from_db()
    assert step.queue_warning_released_reason == "Oven slot at 14:00"
    # an operator sees the warning but no release form (and no order buttons)
    client.force_login(floor.personas["operator"].user)
    html = client.get("/board/", {"work_center": "drilling"}).content.decode()
    assert "QUEUE TIME" in html or "queue limit released" in html
    assert '<form method="post"' not in html and 'name="move"' not in html
