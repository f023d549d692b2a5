"""Out-of-window readings become exactly one alert, one hold and one NCR.

Windows come from the routing library (pattern plate surface copper 33.75-57.5 um, hole
wall copper >= 20 um per IPC-6012 class 2, from memory). The severity rule (critical
beyond 10 % of the window's span) is the shop rule stated in shopfloor.quality.services.alerts.
"""

from __future__ import annotations

import re

import pytest
from django.core import mail
from django.db import transaction

from shopfloor.audit.models import AuditEntry
from shopfloor.floor.models import Reading
from shopfloor.plant.models import Lot
from shopfloor.quality import outbox
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent
from shopfloor.quality.services import alerts, notifications
from tests import helpers

pytestmark = pytest.mark.django_db


def test_out_of_window_reading_makes_one_alert_hold_and_ncr(floor):
    step = helpers.start_at(floor, floor.lot)
    reading = helpers.record(floor, step, "surface_copper", 58.0)  # 0.5 um above 57.5
    assert reading.in_window is False
    event = helpers.event_for(reading)

    outcome = alerts.handle_event(event.pk)

    assert outcome.acted and len(outcome.alert_ids) == 1
    alert = Alert.objects.get()
    assert alert.kind == Alert.Kind.OUT_OF_WINDOW
    assert alert.severity == Alert.Severity.WARNING  # 0.5 um < 10 % of the 23.75 um span
    assert alert.event_id == event.pk and alert.reading_id == reading.pk
    assert "source" in alert.message and floor.lot.code in alert.message
    lot = Lot.objects.get(pk=floor.lot.pk)
    assert lot.on_hold is True
    hold = Hold.objects.get()
    assert hold.lot_step_id == step.pk and hold.alert_id == alert.pk
    ncr = Nonconformance.objects.get()
    assert re.fullmatch(r"NCR-\d{6}", ncr.number)
    assert list(ncr.readings.all()) == [reading]
    assert hold.ncr_id == ncr.pk
    actions = set(AuditEntry.objects.values_list("action", flat=True))
    assert {"alert.raised", "lot.held", "ncr.opened"} <= actions
    event.refresh_from_db()
    assert event.processed_at is not None and event.attempts == 1


def test_same_event_twice_still_one_alert(floor):
    step = helpers.start_at(floor, floor.lot)
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", 70.0))
    alerts.handle_event(event.pk)
    second = alerts.handle_event(event.pk)
    assert second.acted is False
    assert Alert.objects.count() == 1 and Hold.objects.count() == 1
    assert Nonconformance.objects.count() == 1


def test_claim_lost_still_one_alert_by_unique_constraint(floor):
    """Even if the processed flag were cleared, Alert.event / dedupe_key keep one alert."""
    step = helpers.start_at(floor, floor.lot)
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", 70.0))
    alerts.handle_event(event.pk)
    OutboxEvent.objects.filter(pk=event.pk).update(processed_at=None)
    alerts.handle_event(event.pk)
    assert Alert.objects.count() == 1 and Hold.objects.count() == 1


def test_in_window_reading_no_alert_but_series_point(floor):
    from shopfloor.quality.models import SeriesState

    step = helpers.start_at(floor, floor.lot)
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", 41.5))
    alerts.handle_event(event.pk)
    assert Alert.objects.count() == 0
    assert Lot.objects.get(pk=floor.lot.pk).on_hold is False
    series = SeriesState.objects.get()
    # one series per quantity, operation, work center, equipment and window
    assert series.key.startswith(f"surface_copper|{step.code}|{step.work_center.code}|-|")
    assert series.spec_key == Reading.objects.get(pk=event.payload["reading"]).spec_key
    # The step samples surface copper several times per lot, so the series is an X-bar
    # chart and this first sample waits in the lot's open subgroup.
    samples = next(w for w in step.plan if w["quantity"] == "surface_copper")["samples"]
    assert series.chart == ("xbar_r" if samples <= 10 else "xbar_s")
    assert series.subgroup_size == samples
    assert series.points == 1 and series.baseline == []
    assert series.rule_state["open"] == [[step.pk, {"1": 41.5}]]


def test_two_bad_samples_of_one_set_make_one_alert_and_share_one_ncr(floor):
    # an out-of-window set raises exactly one alert, hold and NCR citing its samples
    step = helpers.start_at(floor, floor.lot)
    events = [
        helpers.event_for(helpers.record(floor, step, "surface_copper", 30.0, sample=n))
        for n in (1, 2)
    ]
    for e in events:
        alerts.handle_event(e.pk)
    assert Alert.objects.count() == 1 and Hold.objects.count() == 1
    ncr = Nonconformance.objects.get()
    assert ncr.readings.count() == 2


@pytest.mark.parametrize(
    ("value", "window", "expected"),
    [
        # two-sided 33.75-57.5 (span 23.75, 10 % = 2.375)
        (58.0, {"min": 33.75, "max": 57.5}, "warning"),
        (60.0, {"min": 33.75, "max": 57.5}, "critical"),
        (31.0, {"min": 33.75, "max": 57.5}, "critical"),
        # one-sided >= 20 um: 10 % of the limit = 2 um
        (19.0, {"min": 20.0, "max": None}, "warning"),
        (17.5, {"min": 20.0, "max": None}, "critical"),
        # attribute check: any defect is critical; a zero limit makes any excess critical
        (1.0, {"min": None, "max": 0.0, "attribute": True}, "critical"),
        (0.1, {"min": None, "max": 0.0}, "critical"),
    ],
)
def test_severity_rule(value, window, expected):
    assert alerts.severity_for(value, window) == expected


def test_attribute_defect_is_critical(floor):
    step = helpers.start_at(floor, floor.lot, code="inner_aoi_c1")
    event = helpers.event_for(helpers.record(floor, step, "aoi_defects", 2, unit="count"))
    alerts.handle_event(event.pk)
    assert Alert.objects.get().severity == Alert.Severity.CRITICAL


def test_rolled_back_reading_leaves_no_event(floor):
    step = helpers.start_at(floor, floor.lot)
    with pytest.raises(RuntimeError), transaction.atomic():
        helpers.record(floor, step, "surface_copper", 70.0)
        raise RuntimeError("instrument link dropped mid-transaction")
    assert OutboxEvent.objects.count() == 0


def test_failing_event_records_error_and_attempts(floor, monkeypatch):
    step = helpers.start_at(floor, floor.lot)
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", 70.0))

    def broken(_event):
        raise ValueError("simulated bug")

    monkeypatch.setattr(alerts, "_dispatch", broken)
    with pytest.raises(ValueError):
        alerts.handle_event(event.pk)
    event.refresh_from_db()
    assert event.processed_at is None and event.attempts == 1
    assert "simulated bug" in event.last_error
    assert Alert.objects.count() == 0


# --- notifications ---------------------------------------------------------------


def _alert(floor, value=70.0):
    step = helpers.start_at(floor, floor.lot)
    step.work_center.notify_emails = "plating-lead@example.test, quality@example.test"
    step.work_center.save()
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", value))
    alerts.handle_event(event.pk)
    return Alert.objects.get()


def test_notify_sends_mail_once(floor, settings):
    settings.ALERT_WEBHOOK_URL = ""
    alert = _alert(floor)
    mail.outbox.clear()
    assert notifications.notify_alert(alert.pk) is True
    assert len(mail.outbox) == 1
    assert set(mail.outbox[0].to) == {"plating-lead@example.test", "quality@example.test"}
    assert floor.lot.code in mail.outbox[0].subject
    assert notifications.notify_alert(alert.pk) is False
    assert len(mail.outbox) == 1 and Alert.objects.count() == 1
    alert.refresh_from_db()
    assert alert.notified_at is not None


def test_failing_webhook_does_not_block_or_duplicate(floor, settings):
    settings.ALERT_WEBHOOK_URL = "http://127.0.0.1:9/alerts"  # discard port: nothing listens
    settings.ALERT_WEBHOOK_SECRET = "s3cret"
    alert = _alert(floor)
    assert notifications.notify_alert(alert.pk) is True
    alert.refresh_from_db()
    assert alert.notified_at is not None
    assert Lot.objects.get(pk=floor.lot.pk).on_hold is True
    from shopfloor.quality import notify

    with pytest.raises(notify.WebhookFailed):
        notifications.deliver_webhook(alert.pk)
    assert Alert.objects.count() == 1


# --- relay -----------------------------------------------------------------------


def test_relay_publishes_unpublished_and_skips_processed(floor, monkeypatch):
    from shopfloor.quality import tasks

    sent = []
    monkeypatch.setattr(tasks.process_event, "apply_async", lambda args, **kw: sent.append(args[0]))
    monkeypatch.setattr(tasks.notify_alert, "apply_async", lambda args, **kw: None)
    step = helpers.start_at(floor, floor.lot)
    pending = helpers.event_for(helpers.record(floor, step, "surface_copper", 41.0, sample=1))
    done = helpers.event_for(helpers.record(floor, step, "surface_copper", 42.0, sample=2))
    alerts.handle_event(done.pk)

    result = notifications.relay_outbox()

    assert sent == [pending.pk] and result["published"] == 1
    pending.refresh_from_db()
    assert pending.published_at is not None
    assert notifications.relay_outbox()["published"] == 0  # published just now: not again


def test_publish_with_broker_down_leaves_event_for_relay(floor, monkeypatch):
    from shopfloor.quality import tasks

    def down(*a, **kw):
        raise ConnectionRefusedError("broker down")

    monkeypatch.setattr(tasks.process_event, "apply_async", down)
    step = helpers.start_at(floor, floor.lot)
    event = helpers.event_for(helpers.record(floor, step, "surface_copper", 70.0))
    assert outbox.publish(event.pk) is False
    event.refresh_from_db()
    assert event.published_at is None
    assert notifications.relay_outbox()["published"] == 0
