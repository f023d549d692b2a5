"""The reading POST's round trips to PostgreSQL, counted (issue 13: at most 6, BEGIN and
COMMIT included).

Counted the way the database sees them: every statement Django executes (savepoints
included: Django sends SAVEPOINT and RELEASE through the same cursor, so the execute hook
sees them) plus, for each transaction, the BEGIN that psycopg sends before its first
statement and the COMMIT or ROLLBACK that ends it (neither passes the execute hook, so
they are counted from Django's commit and rollback calls). Real transactions, so the
test database is not wrapped in one (transaction=True).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import pytest
from django.db import connection
from rest_framework.test import APIClient

from shopfloor.audit.models import AuditEntry
from shopfloor.floor import services
from shopfloor.floor.models import IdempotencyRecord, Reading
from shopfloor.quality.models import OutboxEvent
from tests.helpers import advance_to, gauge_at, issue_token

pytestmark = [
    pytest.mark.django_db(transaction=True),
    pytest.mark.skipif(connection.vendor != "postgresql", reason="the lean path is PostgreSQL's"),
]

LIMIT = 6  # issue 13


@dataclass
class Trips:
    statements: list[str] = field(default_factory=list)
    ends: list[str] = field(default_factory=list)

    @property
    def total(self) -> int:
        # each transaction: BEGIN before its first statement, COMMIT/ROLLBACK at its end
        return len(self.statements) + 2 * len(self.ends)

    def show(self) -> str:
        return "\n".join([*(s[:120] for s in self.statements), *self.ends])


@contextmanager
def counted() -> Iterator[Trips]:
    trips = Trips()

    def hook(execute: Any, sql: str, params: Any, many: bool, context: Any) -> Any:
        trips.statements.append(sql)
        return execute(sql, params, many, context)

    commit, rollback = connection.commit, connection.rollback

    def counting_commit() -> None:
        trips.ends.append("COMMIT")
        commit()

    def counting_rollback() -> None:
        trips.ends.append("ROLLBACK")
        rollback()

    connection.commit = counting_commit  # type: ignore[method-assign]
    connection.rollback = counting_rollback  # type: ignore[method-assign]
    try:
        with connection.execute_wrapper(hook):
            yield trips
    finally:
        connection.commit = commit  # type: ignore[method-assign]
        connection.rollback = rollback  # type: ignore[method-assign]


@pytest.fixture
def plating(floor):
    return advance_to(floor.lot, "pattern_plate_copper", by=floor.personas["operator"], start=True)


@pytest.fixture
def instrument(plating):
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION=f"Token {issue_token('xrf-1', plating.work_center.code)}")
    return client


def post(client: APIClient, lot: str, sample: int, key: str | None = None, **extra: Any):
    body = {
        "lot": lot,
        "quantity": "hole_wall_copper",
        "value": 24.5,
        "unit": "um",
        "sample_index": sample,
        **extra,
    }
    headers = {"HTTP_IDEMPOTENCY_KEY": key} if key else {}
    return client.post("/api/v1/readings/", body, format="json", **headers)


def test_instrument_reading_post_takes_at_most_six_round_trips(floor, plating, instrument):
    post(instrument, floor.lot.code, 1, key="warm-up")  # URL resolver, first connection
    before_events = OutboxEvent.objects.count()
    before_audit = AuditEntry.objects.count()
    with counted() as trips:
        reply = post(instrument, floor.lot.code, 2, key="count-me")
    assert reply.status_code == 201, reply.content
    assert trips.total <= LIMIT, trips.show()
    assert trips.ends == ["COMMIT"], trips.show()
    # everything the slow path wrote is written: the reading, one audit entry, one
    # outbox event, the stored reply
    reading = Reading.objects.get(pk=reply.json()["id"])
    assert (reading.sample_index, reading.via, reading.lot_step_id) == (2, "instrument", plating.pk)
    assert OutboxEvent.objects.count() == before_events + 1
    event = OutboxEvent.objects.latest("pk")
    assert event.payload["reading"] == reading.pk and event.payload["lot_step"] == plating.pk
    assert AuditEntry.objects.count() == before_audit + 1
    assert AuditEntry.objects.latest("pk").object_id == str(reading.pk)
    stored = IdempotencyRecord.objects.get(key="count-me")
    assert stored.body["id"] == reading.pk and stored.status_code == 201


def test_replay_and_gauge_and_set_completion_stay_within_the_limit(floor, plating, instrument):
    gauge = gauge_at(plating)
    post(instrument, floor.lot.code, 1, key="first", equipment=gauge.pk)
    with counted() as trips:
        again = post(instrument, floor.lot.code, 1, key="first", equipment=gauge.pk)
    assert again.status_code == 201 and again["Idempotent-Replay"] == "true"
    assert trips.total <= LIMIT, trips.show()
    # the rest of the set, the last one completing it (the set is judged in Python on the
    # set read in the same statement as everything else)
    for sample in (2, 3, 4):
        assert post(instrument, floor.lot.code, sample, equipment=gauge.pk).status_code == 201
    with counted() as trips:
        last = post(instrument, floor.lot.code, 5, key="last", equipment=gauge.pk)
    assert last.status_code == 201, last.content
    assert last.json()["set_verdict"]["in_window"] is True
    assert trips.total <= LIMIT, trips.show()
    event = OutboxEvent.objects.latest("pk")
    assert sorted(event.payload["set"]["readings"]) == sorted(
        Reading.objects.filter(lot_step=plating).values_list("pk", flat=True)
    )


def test_a_refusal_writes_nothing_and_rolls_back(floor, plating, instrument):
    post(instrument, floor.lot.code, 1, key="one")
    readings_before = Reading.objects.count()
    with counted() as trips:
        taken = post(instrument, floor.lot.code, 1, key="two")  # sample 1 is taken
    assert taken.status_code == 409 and "already has a reading" in taken.json()["detail"]
    assert trips.ends == ["ROLLBACK"], trips.show()
    assert trips.total <= LIMIT
    assert Reading.objects.count() == readings_before
    assert not IdempotencyRecord.objects.filter(key="two").exists()


def test_the_service_alone_is_begin_three_statements_commit(floor, plating):
    person = floor.personas["operator"]
    person = type(person).objects.select_related("user").get(pk=person.pk)
    data = services.ReadingInput(quantity="hole_wall_copper", value="24.5", unit="um")
    with counted() as trips:
        reading = services.record_reading(person=person, lot_step_id=plating.pk, data=data)
    assert reading.pk is not None
    assert trips.total <= 5, trips.show()  # the tablet's share: lock, read, write
