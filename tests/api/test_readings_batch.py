"""POST /api/v1/readings/batch/: up to 1,000 readings, one transaction per lot step,
a result per item (created, duplicate, refused with the reason), idempotent as a whole
(Idempotency-Key) and per item (sample key), and the worker's batched event path.

Unit facts used: 1 mil = 25.4 µm exactly (the inch is 25.4 mm by definition; NIST SP 811,
appendix B). The plating step's windows (surface copper 33.75-57.5 µm, hole wall copper
at least 20 µm) are the ones the routing builder gives this class 2 routing.
"""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from rest_framework.test import APIClient

from shopfloor.audit import services as audit
from shopfloor.audit.models import AuditEntry
from shopfloor.floor.models import Reading
from shopfloor.quality import outbox
from shopfloor.quality.models import Alert, OutboxEvent
from shopfloor.quality.services import alerts
from tests import factories, helpers
from tests.helpers import issue_token

pytestmark = pytest.mark.django_db

URL = "/api/v1/readings/batch/"


@pytest.fixture
def plating(floor):
    return helpers.start_at(floor, floor.lot)


@pytest.fixture
def client(floor):
    c = APIClient()
    c.force_login(floor.personas["operator"].user)
    return c


def item(lot, key, quantity="surface_copper", value=45.0, unit="um", sample=1, **over):
    data = {
        "lot": lot.code,
        "sample_key": key,
        "quantity": quantity,
        "value": value,
        "unit": unit,
        "sample_index": sample,
    }
    data.update(over)
    return data


def samples_of(step, quantity):
    return next(int(m.get("samples") or 1) for m in step.plan if m["quantity"] == quantity)


def test_sample_set_of_one_step_is_recorded_with_a_result_per_item(floor, plating, client):
    n = samples_of(plating, "surface_copper")
    items = [item(floor.lot, f"G1-{i}", sample=i, value=40 + i) for i in range(1, n + 1)]
    items.append(item(floor.lot, "G1-hole", quantity="hole_wall_copper", value=0.9, unit="mil"))
    reply = client.post(URL, {"items": items}, format="json")
    assert reply.status_code == 200, reply.content
    data = reply.json()
    assert (data["created"], data["duplicate"], data["refused"]) == (n + 1, 0, 0)
    assert [r["index"] for r in data["items"]] == list(range(n + 1))
    hole = data["items"][-1]["reading"]
    assert hole["value"] == pytest.approx(0.9 * 25.4)  # 1 mil = 25.4 µm exactly
    assert hole["in_window"] is True  # 22.86 µm >= 20 µm
    assert Reading.objects.filter(lot_step=plating).count() == n + 1
    # One audit entry and one outbox event per reading; the trail seals and verifies.
    assert AuditEntry.objects.filter(action="reading.recorded").count() == n + 1
    assert OutboxEvent.objects.filter(kind="reading.recorded").count() == n + 1
    audit.seal()
    assert audit.verify_chain().ok


def test_refused_items_never_block_another_lot_step(floor, plating, client):
    held = factories.new_lot(floor)
    helpers.start_at(floor, held)
    held.on_hold = True
    held.save(update_fields=["on_hold"])
    items = [
        item(floor.lot, "A-1"),
        item(held, "B-1"),
        item(floor.lot, "A-2", value="abc", sample=2),
        item(floor.lot, "A-3", quantity="nickel_thickness", sample=1),
        {
            "lot": "NO-SUCH-LOT",
            "sample_key": "C-1",
            "quantity": "surface_copper",
            "value": 1,
            "unit": "um",
        },
        item(floor.lot, "A-4", unit="furlong", sample=2),
        {"lot": floor.lot.code, "quantity": "surface_copper", "value": 1, "unit": "um"},
    ]
    reply = client.post(URL, {"items": items}, format="json")
    assert reply.status_code == 200, reply.content
    results = reply.json()["items"]
    assert [r["status"] for r in results] == ["created"] + ["refused"] * 6
    assert "on hold" in results[1]["reason"]
    assert results[2]["problems"][0]["field"] == "value"
    assert "not measured at" in results[3]["reason"]
    assert "No lot" in results[4]["reason"]
    assert "furlong" in results[5]["reason"] or results[5]["problems"]
    assert results[6]["problems"][0]["field"] == "sample_key"
    assert Reading.objects.count() == 1


def test_sample_keys_make_repeats_duplicates(floor, plating, client):
    first = client.post(URL, {"items": [item(floor.lot, "K-1")]}, format="json").json()
    stored = first["items"][0]["reading"]["id"]
    again = client.post(
        URL,
        {
            "items": [
                item(floor.lot, "K-1"),  # the same measurement sent again
                item(floor.lot, "K-1", value=50.0),  # the same key for another value
                item(floor.lot, "K-2", sample=2),
                item(floor.lot, "K-2", sample=2),  # repeated inside this batch
            ]
        },
        format="json",
    ).json()
    statuses = [r["status"] for r in again["items"]]
    assert statuses == ["duplicate", "refused", "created", "duplicate"]
    assert again["items"][0]["reading"]["id"] == stored
    assert "already used" in again["items"][1]["reason"]
    assert again["items"][3]["reading"]["id"] == again["items"][2]["reading"]["id"]
    assert Reading.objects.count() == 2


def test_idempotency_key_replays_the_whole_batch(floor, plating, client):
    body = {"items": [item(floor.lot, "I-1"), item(floor.lot, "I-2", sample=2)]}
    first = client.post(URL, body, format="json", HTTP_IDEMPOTENCY_KEY="batch-1")
    second = client.post(URL, body, format="json", HTTP_IDEMPOTENCY_KEY="batch-1")
    assert first.status_code == second.status_code == 200
    assert second["Idempotent-Replay"] == "true" and second.json() == first.json()
    assert Reading.objects.count() == 2
    other = {"items": [item(floor.lot, "I-3", sample=3)]}
    assert client.post(URL, other, format="json", HTTP_IDEMPOTENCY_KEY="batch-1").status_code == 422


def test_envelope_limits(floor, plating, client):
    too_many = {"items": [item(floor.lot, f"X-{i}") for i in range(1001)]}
    reply = client.post(URL, too_many, format="json")
    assert reply.status_code == 400 and "1000" in reply.content.decode()
    assert client.post(URL, {"items": []}, format="json").status_code == 400
    assert client.post(URL, [1, 2], format="json").status_code == 400
    assert Reading.objects.count() == 0


def test_instrument_token_only_posts_at_its_work_center(floor, plating):
    other_center = next(
        wc for wc in type(plating.work_center).objects.exclude(pk=plating.work_center_id)
    )
    api = APIClient()
    api.credentials(HTTP_AUTHORIZATION=f"Token {issue_token('gauge', other_center.code)}")
    reply = api.post(URL, {"items": [item(floor.lot, "T-1")]}, format="json")
    assert reply.status_code == 200
    assert reply.json()["items"][0]["status"] == "refused"
    assert "belongs to" in reply.json()["items"][0]["reason"]
    own = APIClient()
    own.credentials(HTTP_AUTHORIZATION=f"Token {issue_token('gauge2', plating.work_center.code)}")
    reply = own.post(URL, {"items": [item(floor.lot, "T-2")]}, format="json")
    assert reply.json()["items"][0]["status"] == "created"
    assert Reading.objects.get().via == "instrument"


def test_statements_per_lot_step_do_not_grow_with_the_items(floor, plating, client):
    """A lot step costs a fixed number of statements whatever its item count: the items
    are checked in memory and written with one multi-row INSERT per table."""
    made = iter(range(100))

    def count(lots: int, per_lot: int) -> int:
        items = []
        for _ in range(lots):
            lot = factories.new_lot(floor)
            helpers.start_at(floor, lot)
            for quantity in ["surface_copper", "hole_wall_copper"][:per_lot]:
                items.append(item(lot, f"Q-{next(made)}", quantity=quantity, value=45))
        with CaptureQueriesContext(connection) as queries:
            reply = client.post(URL, {"items": items}, format="json")
        assert reply.json()["created"] == lots * per_lot, reply.content
        return len(queries.captured_queries)

    one = count(1, 1)
    assert count(1, 2) == one  # twice the items on one lot step: the same statements
    per_step = count(2, 1) - one
    assert count(3, 2) == one + 2 * per_step  # linear in lot steps only
    assert per_step <= 12, per_step


def test_out_of_window_items_go_to_the_worker_at_once(floor, plating, client, monkeypatch):
    sent: list[tuple[str, list[int]]] = []
    monkeypatch.setattr(outbox, "publish", lambda event_id: sent.append(("one", [event_id])))
    monkeypatch.setattr(outbox, "publish_batch", lambda ids: sent.append(("batch", ids)))
    body = {
        "items": [
            # below 33.75 µm: out of window, confirmed as entered (the typo guard)
            item(floor.lot, "O-1", value=10.0, confirm_out_of_window=True),
            item(floor.lot, "O-2", sample=2, value=45.0),
        ]
    }
    from django.test import TestCase

    with TestCase.captureOnCommitCallbacks(execute=True):
        assert client.post(URL, body, format="json").status_code == 200
    out_event = OutboxEvent.objects.get(payload__in_window=False)
    in_event = OutboxEvent.objects.get(payload__in_window=True)
    assert sent == [("one", [out_event.pk]), ("batch", [in_event.pk])]
    # The worker: the urgent event alerts exactly once; the batch path marks the other.
    alerts.handle_event(out_event.pk)
    alerts.handle_event(out_event.pk)
    assert alerts.handle_events([in_event.pk, in_event.pk]) == {
        "claimed": 1,
        "processed": 1,
        "failed": 0,
    }
    assert Alert.objects.filter(event=out_event).count() == 1
    assert not OutboxEvent.objects.filter(processed_at__isnull=True).exists()


def test_unconfirmed_out_of_window_item_is_refused_with_what_to_confirm(floor, plating, client):
    body = {"items": [item(floor.lot, "G-1", value=10.0)]}
    reply = client.post(URL, body, format="json").json()
    (result,) = reply["items"]
    assert result["status"] == "refused"
    assert "10 µm is below 33.8 µm" in result["reason"]
    assert '"confirm_out_of_window": true' in result["reason"]


def test_a_failing_event_does_not_block_its_batch(floor, plating, client, monkeypatch):
    body = {"items": [item(floor.lot, f"F-{i}", sample=i, value=45.0) for i in (1, 2, 3)]}
    client.post(URL, body, format="json")
    events = list(OutboxEvent.objects.order_by("pk"))
    from shopfloor.quality import event_batch

    real = event_batch._point

    def flaky(event, reading):
        if event.pk == events[1].pk:
            raise RuntimeError("broken reading")
        return real(event, reading)

    monkeypatch.setattr(event_batch, "_point", flaky)
    outcome = alerts.handle_events([e.pk for e in events])
    assert outcome == {"claimed": 3, "processed": 2, "failed": 1}
    failed = OutboxEvent.objects.get(pk=events[1].pk)
    assert failed.processed_at is None and "broken reading" in failed.last_error
    assert OutboxEvent.objects.filter(processed_at__isnull=False).count() == 2
