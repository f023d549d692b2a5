"""Supervisor board: where lots are, risk words, filters, sort, reorder, fragment, access."""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor.access import scope_for
from shopfloor.audit.models import AuditEntry
from shopfloor.errors import InvalidInput, NotAllowed
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Customer, Job, WorkCenter
from shopfloor.quality.models import Alert
from shopfloor.quality.read import board
from shopfloor.quality.services import queue as queue_moves
from tests import factories
from tests.factories import bulk_lots

pytestmark = pytest.mark.django_db


def _get(client, person, path="/board/", **params):
    client.force_login(person.user)
    return client.get(path, params)


def test_lot_shows_at_work_center_of_first_open_step(floor, client):
    first = floor.lot.steps.order_by("position").first()
    html = _get(client, floor.personas["supervisor"]).content.decode()
    section = html.split(f'id="wc-{first.work_center.code}"')[1].split("</section>")[0]
    assert floor.lot.code in section
    assert "QUEUED" in section
    # after the first step is done the lot is at the next open step's work center
    LotStep.objects.filter(pk=first.pk).update(status=LotStep.Status.DONE)
    nxt = floor.lot.steps.filter(status="waiting").order_by("position").first()
    b = board.build_board(scope_for(floor.personas["supervisor"].user), board.BoardFilters())
    where = {lot.lot_code: col.work_center.code for col in b.columns for lot in col.rows}
    assert where[floor.lot.code] == nxt.work_center.code


def test_queue_time_warning_and_exceeded(floor):
    # Warn at 80 % of the limit (shop practice, shopfloor.core.schedule); exceeded past 100 %.
    wc = list(WorkCenter.objects.order_by("code")[:1])
    warn = bulk_lots(floor.routing, floor.job, 1, wc, prefix="W", arrived_minutes_ago=55)[0]
    over = bulk_lots(floor.routing, floor.job, 1, wc, prefix="X", arrived_minutes_ago=75)[0]
    calm = bulk_lots(floor.routing, floor.job, 1, wc, prefix="C", arrived_minutes_ago=10)[0]
    b = board.build_board(scope_for(floor.personas["supervisor"].user), board.BoardFilters())
    words = {lot.lot_code: lot.queue_word for col in b.columns for lot in col.rows}
    assert words[warn.code] == "QUEUE TIME WARNING"
    assert words[over.code] == "QUEUE TIME EXCEEDED"
    assert words[calm.code] == ""


def test_due_words_late_at_risk_on_time(floor, client):
    pr = floor.job.part_revision
    late = factories.make_job(pr, floor.routing, due_in_days=-1)
    soon = factories.make_job(pr, floor.routing, due_in_days=0)
    wc = list(WorkCenter.objects.order_by("code")[:1])
    l_late = bulk_lots(floor.routing, late, 1, wc, prefix="LATE")[0]
    l_soon = bulk_lots(floor.routing, soon, 1, wc, prefix="SOON")[0]
    # 60 remaining standard minutes x3 flow factor = 3 h: at risk only if < 3 h to midnight
    b = board.build_board(
        scope_for(floor.personas["supervisor"].user), board.BoardFilters(), now=timezone.now()
    )
    words = {lot.lot_code: lot.due_word for col in b.columns for lot in col.rows}
    assert words[l_late.code] == "LATE"  # due date passed: late by definition
    assert words[floor.lot.code] == "on time"
    end = dt.datetime.combine(timezone.localdate(), dt.time(23, 59, 59), tzinfo=dt.UTC)
    expected = "AT RISK" if end - timezone.now() < dt.timedelta(hours=3) else "on time"
    assert words[l_soon.code] == expected
    html = _get(client, floor.personas["supervisor"]).content.decode()
    assert "LATE" in html


def test_filters_customer_ipc_finish_work_center_due(floor, client):
    other = Customer.objects.create(code="OTH", name="Other Boards")
    pr = factories.make_part_revision()
    pr.part.customer = other
    pr.part.save()
    job = Job.objects.create(
        number="J-OTHER",
        part_revision=pr,
        quantity=5,
        ipc_class=3,
        due_date=timezone.localdate() + dt.timedelta(days=40),
        routing_revision=floor.routing,
    )
    wc = WorkCenter.objects.get(code="drilling")
    lot = bulk_lots(floor.routing, job, 1, [wc], prefix="OTH")[0]
    sup = floor.personas["supervisor"]
    body = _get(client, sup, customer="OTH").content.decode()
    assert lot.code in body and floor.lot.code not in body
    body = _get(client, sup, ipc_class="3").content.decode()
    assert lot.code in body and floor.lot.code not in body
    body = _get(client, sup, work_center="drilling").content.decode()
    assert lot.code in body and floor.lot.code not in body and 'id="wc-cam"' not in body
    body = _get(client, sup, finish="enig").content.decode()
    assert lot.code in body and floor.lot.code in body
    body = _get(client, sup, finish="hasl").content.decode()
    assert lot.code not in body
    far = (timezone.localdate() + dt.timedelta(days=30)).isoformat()
    body = _get(client, sup, due_from=far).content.decode()
    assert lot.code in body and floor.lot.code not in body


def test_bad_filters_give_clear_400(floor, client):
    sup = floor.personas["supervisor"]
    r = _get(client, sup, due_from="2030-02-01", due_to="2030-01-01")
    assert r.status_code == 400 and b"ends before it starts" in r.content
    r = _get(client, sup, due_from="yesterday")
    assert r.status_code == 400 and b"YYYY-MM-DD" in r.content
    r = _get(client, sup, ipc_class="4")
    assert r.status_code == 400 and b"not 1, 2 or 3" in r.content
    r = _get(client, sup, sort="colour")
    assert r.status_code == 400 and b"allowed" in r.content


def test_sort_by_due_puts_earliest_first(floor):
    wc = list(WorkCenter.objects.filter(code="drilling"))
    pr = floor.job.part_revision
    later = bulk_lots(
        floor.routing, factories.make_job(pr, floor.routing, due_in_days=30), 1, wc, prefix="LTR"
    )[0]
    sooner = bulk_lots(
        floor.routing, factories.make_job(pr, floor.routing, due_in_days=3), 1, wc, prefix="SNR"
    )[0]
    scope = scope_for(floor.personas["supervisor"].user)
    b = board.build_board(scope, board.parse_filters({"sort": "due", "work_center": "drilling"}))
    assert [lot.lot_code for lot in b.columns[0].queued] == [sooner.code, later.code]
    b = board.build_board(scope, board.parse_filters({"sort": "lot", "work_center": "drilling"}))
    assert [lot.lot_code for lot in b.columns[0].queued] == sorted([sooner.code, later.code])


def test_reorder_is_audited_and_only_for_supervisors(floor, client):
    wc = WorkCenter.objects.get(code="drilling")
    lots = bulk_lots(floor.routing, floor.job, 3, [wc], prefix="Q")
    scope = scope_for(floor.personas["supervisor"].user)
    queue = [
        x.step_id
        for x in board.build_board(scope, board.parse_filters({"work_center": "drilling"}))
        .columns[0]
        .queued
    ]
    assert len(queue) == 3
    client.force_login(floor.personas["supervisor"].user)
    r = client.post(f"/board/queue/{wc.pk}/move/", {"lot_step": queue[2], "move": "top"})
    assert r.status_code == 302
    after = [
        x.lot_code
        for x in board.build_board(scope, board.parse_filters({"work_center": "drilling"}))
        .columns[0]
        .queued
    ]
    assert after[0] == LotStep.objects.get(pk=queue[2]).lot.code
    entry = AuditEntry.objects.filter(action="queue.reordered").latest("seq")
    assert entry.object_id == str(wc.pk) and entry.after["order"] == after
    assert entry.actor_id == floor.personas["supervisor"].user.pk
    # operator may not reorder: 403 with the reason, nothing written
    client.force_login(floor.personas["operator"].user)
    r = client.post(f"/board/queue/{wc.pk}/move/", {"lot_step": queue[0], "move": "down"})
    assert r.status_code == 403 and b"supervisor" in r.content
    assert AuditEntry.objects.filter(action="queue.reordered").count() == 1
    with pytest.raises(NotAllowed):
        queue_moves.reorder_queue(floor.personas["operator"], wc.pk, queue)
    with pytest.raises(InvalidInput):
        queue_moves.reorder_queue(floor.personas["supervisor"], wc.pk, [queue[0], queue[0]])
    with pytest.raises(InvalidInput, match="not waiting"):
        queue_moves.reorder_queue(floor.personas["supervisor"], wc.pk, [floor.lot.steps.first().pk])
    r = client.post(f"/board/queue/{wc.pk}/move/", {"lot_step": "x", "move": "up"})
    assert r.status_code == 400
    client.force_login(floor.personas["supervisor"].user)
    r = client.post(f"/board/queue/{wc.pk}/move/", {"lot_step": queue[0], "move": "sideways"})
    assert r.status_code == 400 and b"allowed" in r.content
    assert lots


def test_fragment_is_body_only_and_keeps_filters(floor, client):
    r = _get(client, floor.personas["supervisor"], "/board/body/", work_center="cam")
    html = r.content.decode()
    assert r.status_code == 200
    assert "<html" not in html and 'id="board-filters"' not in html
    assert floor.lot.code in html and 'id="wc-drilling"' not in html
    page = _get(client, floor.personas["supervisor"], work_center="cam").content.decode()
    assert 'hx-get="/board/body/"' in page and 'hx-include="#board-filters"' in page
    assert 'hx-trigger="every 10s"' in page


def test_open_alerts_listed(floor, client):
    Alert.objects.create(
        kind=Alert.Kind.OUT_OF_WINDOW,
        severity=Alert.Severity.CRITICAL,
        dedupe_key="t1",
        lot=floor.lot,
        message="Copper thin on test lot",
    )
    Alert.objects.create(
        kind=Alert.Kind.LATE,
        severity=Alert.Severity.WARNING,
        dedupe_key="t2",
        message="closed one",
        closed_at=timezone.now(),
    )
    html = _get(client, floor.personas["supervisor"]).content.decode()
    assert "Copper thin on test lot" in html and "closed one" not in html
    assert "ALERT: Reading out of window" in html


def test_release_queue_warning_calls_quality_service(floor, client):
    wc = WorkCenter.objects.get(code="drilling")
    lot = bulk_lots(floor.routing, floor.job, 1, [wc], prefix="RQ", arrived_minutes_ago=55)[0]
    step = lot.steps.get(position=20)
    client.force_login(floor.personas["supervisor"].user)
    r = client.post(f"/board/steps/{step.pk}/release-queue-warning/", {"reason": ""})
    assert r.status_code == 400
    r = client.post(
        f"/board/steps/{step.pk}/release-queue-warning/", {"reason": "Oven slot booked in 20 min"}
    )
    assert r.status_code == 302
    step.refresh_from_db()
    assert step.queue_warning_released_reason == "Oven slot booked in 20 min"


def test_operator_sees_own_work_centers_only(floor, client):
    wc = WorkCenter.objects.get(code="drilling")
    op = factories.make_person("operator", "2001", "Dee Driller", work_centers=[wc])
    lot = bulk_lots(floor.routing, floor.job, 1, [wc], prefix="OP")[0]
    html = _get(client, op).content.decode()
    assert lot.code in html and floor.lot.code not in html and 'id="wc-cam"' not in html


def test_outsider_403_and_anonymous_login(floor, client):
    r = _get(client, floor.personas["outsider"])
    assert r.status_code == 403 and b"no shop-floor role" in r.content
    client.logout()
    r = client.get("/board/")
    assert r.status_code == 302 and "/floor/login/" in r["Location"]
