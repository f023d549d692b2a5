"""Floor service rules: route order, holds, missing readings, qualification and
calibration dates, corrections, attribute counts, PIN lock-out, idle timeout, and the two
races that real PostgreSQL must settle (retried reading, double sign-off).

Outside facts: an attribute check "0 defects allowed" passes at 0 and fails at 1
(IPC-9252 for electrical test opens/shorts, from memory; the window's source says so);
tolerance limits are inclusive (common practice).
"""

from __future__ import annotations

import datetime as dt
import threading

import pytest
import time_machine
from django.conf import settings
from django.core.management import call_command
from django.db import connection
from django.test import Client
from django.utils import timezone

from shopfloor.audit.models import AuditEntry
from shopfloor.errors import Conflict, NotAllowed
from shopfloor.floor import services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant import people
from shopfloor.plant.models import Equipment, Person, Qualification
from tests import factories, helpers
from tests.factories import PIN

pytestmark = pytest.mark.django_db


def reading(step, quantity, value, sample=1, unit=None, **kw):
    m = next(m for m in step.plan if m["quantity"] == quantity)
    # these tests are about what happens to a recorded value; the typo guard has its own
    kw.setdefault("confirm_out_of_window", True)
    return services.ReadingInput(
        quantity=quantity, value=value, unit=unit or m["unit"], sample_index=sample, **kw
    )


def test_lot_moves_only_along_its_routing(floor, operator):
    steps = list(floor.lot.steps.order_by("position"))
    with pytest.raises(Conflict, match="not the lot's current step"):
        services.start_step(person=operator, lot_step_id=steps[1].pk)
    helpers.finish_step(operator, steps[0])
    assert LotStep.objects.current_for(floor.lot).pk == steps[1].pk
    steps[1].refresh_from_db()
    assert steps[1].arrived_at is not None
    with pytest.raises(Conflict, match="not the lot's current step"):
        services.start_step(person=operator, lot_step_id=steps[0].pk)  # no going back
    with pytest.raises(Conflict, match="not the lot's current step"):
        services.start_step(person=operator, lot_step_id=steps[2].pk)  # no skipping ahead


def test_held_lot_cannot_be_worked(floor, operator, parked_outbox):
    step = helpers.advance_to(floor.lot, helpers.measured())
    services.start_step(person=operator, lot_step_id=step.pk)
    floor.lot.on_hold = True
    floor.lot.save()
    with pytest.raises(Conflict, match="is on hold"):
        services.record_reading(
            person=operator, lot_step_id=step.pk, data=reading(step, "surface_copper", 40)
        )
    with pytest.raises(Conflict, match="is on hold"):
        services.complete_step(person=operator, lot_step_id=step.pk, pin=PIN)
    assert not Reading.objects.filter(lot_step=step).exists()


def test_step_cannot_complete_with_readings_missing(floor, operator):
    step = helpers.advance_to(floor.lot, helpers.measured())
    services.start_step(person=operator, lot_step_id=step.pk)
    for s in range(1, 5):  # 4 of 5 samples
        services.record_reading(
            person=operator, lot_step_id=step.pk, data=reading(step, "surface_copper", 40, s)
        )
    with pytest.raises(Conflict, match="surface_copper: 4 of 5 samples"):
        services.complete_step(person=operator, lot_step_id=step.pk, pin=PIN)
    step.refresh_from_db()
    assert step.status == LotStep.Status.IN_PROGRESS


def test_qualification_expires(floor):
    step = floor.lot.steps.order_by("position").first()
    person = factories.make_person(
        "operator",
        work_centers=[step.work_center],
        qualified_until=timezone.localdate() + dt.timedelta(days=10),
    )
    with time_machine.travel(timezone.now() + dt.timedelta(days=11)):
        with pytest.raises(NotAllowed, match="expired on"):
            services.start_step(person=person, lot_step_id=step.pk)
    with time_machine.travel(timezone.now() + dt.timedelta(days=9)):
        services.start_step(person=person, lot_step_id=step.pk)
    assert Qualification.objects.filter(person=person).count() == 1


def test_equipment_past_calibration_refused(floor, operator, gauge_at):
    step = helpers.advance_to(floor.lot, helpers.measured())
    old = gauge_at(step.work_center, due_in_days=-1, code="GA-PAST")
    today = gauge_at(step.work_center, due_in_days=0, code="GA-TODAY")
    with pytest.raises(NotAllowed, match="past its calibration due date"):
        services.start_step(person=operator, lot_step_id=step.pk, equipment_id=old.pk)
    services.start_step(person=operator, lot_step_id=step.pk, equipment_id=today.pk)
    with pytest.raises(NotAllowed, match="GA-PAST is past its calibration"):
        services.record_reading(
            person=operator,
            lot_step_id=step.pk,
            data=reading(step, "surface_copper", 40, equipment_id=old.pk),
        )
    # Due today is still in calibration (the due date is the last good day).
    services.record_reading(
        person=operator,
        lot_step_id=step.pk,
        data=reading(step, "surface_copper", 40, equipment_id=today.pk),
    )
    assert Reading.objects.filter(lot_step=step).count() == 1
    assert Equipment.objects.get(pk=old.pk).calibration_current() is False


def test_correction_supersedes_and_both_stay(floor, operator):
    step = helpers.advance_to(floor.lot, helpers.measured())
    services.start_step(person=operator, lot_step_id=step.pk)
    first = services.record_reading(
        person=operator, lot_step_id=step.pk, data=reading(step, "surface_copper", 20)
    )
    assert first.in_window is False
    new = services.correct_reading(
        person=operator, reading_id=first.pk, value="40", unit="um", reason="typed the wrong panel"
    )
    first.refresh_from_db()
    assert first.superseded_by_id == new.pk and first.correction_reason == "typed the wrong panel"
    assert new.in_window is True
    assert Reading.objects.filter(lot_step=step, sample_index=1).count() == 2
    assert AuditEntry.objects.filter(action="reading.superseded", object_id=str(first.pk)).exists()


def test_attribute_count_with_max_zero(floor, operator):
    step = helpers.advance_to(floor.lot, helpers.measured(attribute=True))
    services.start_step(person=operator, lot_step_id=step.pk)
    quantity = next(m["quantity"] for m in step.plan if m.get("attribute"))
    zero = services.record_reading(
        person=operator, lot_step_id=step.pk, data=reading(step, quantity, "0", unit="count")
    )
    assert zero.in_window is True
    one = services.correct_reading(
        person=operator,
        reading_id=zero.pk,
        value="1",
        unit="count",
        reason="recount found one open",
    )
    assert one.in_window is False
    with pytest.raises(services.InvalidInput, match="not a whole number"):
        services.correct_reading(
            person=operator, reading_id=one.pk, value="0.5", unit="count", reason="half a defect"
        )


def test_five_wrong_pins_lock_the_badge(floor, operator):
    for n in range(1, settings.PIN_MAX_FAILURES):
        with pytest.raises(NotAllowed, match=f"{settings.PIN_MAX_FAILURES - n} more wrong"):
            people.verify_pin(operator, "0000")
    with pytest.raises(NotAllowed, match="now locked"):
        people.verify_pin(operator, "0000")
    operator.refresh_from_db()
    assert operator.is_locked
    entry = AuditEntry.objects.get(action="person.locked", object_id=str(operator.pk))
    assert entry.after["failures"] == settings.PIN_MAX_FAILURES
    with pytest.raises(NotAllowed, match="is locked"):
        people.badge_login(operator.badge_number, PIN)  # the right PIN no longer helps


def test_idle_session_times_out(floor, operator):
    client = Client()
    client.post("/floor/login/", {"badge": operator.badge_number, "pin": PIN})
    assert client.get("/floor/").status_code == 200
    with time_machine.travel(
        timezone.now() + dt.timedelta(seconds=settings.SESSION_IDLE_TIMEOUT_SECONDS - 30)
    ):
        assert client.get("/floor/").status_code == 200  # activity renews the clock
    with time_machine.travel(
        timezone.now() + dt.timedelta(seconds=2 * settings.SESSION_IDLE_TIMEOUT_SECONDS)
    ):
        r = client.get("/floor/")
        assert r.status_code == 302
        assert r["Location"].startswith("/floor/login/?idle=1")
        page = client.get(r["Location"])
        assert "logged out after a quiet spell" in page.content.decode()
        assert client.get("/floor/").status_code == 302
        hx = client.get("/floor/", HTTP_HX_REQUEST="true")
        assert hx.status_code == 302  # logged out now: plain login redirect


# --- races on real PostgreSQL -----------------------------------------------------------


def _run_threads(n: int, target) -> list:
    barrier = threading.Barrier(n)
    results: list = [None] * n

    def worker(i: int) -> None:
        try:
            barrier.wait(timeout=10)
            results[i] = target(i)
        except Exception as exc:  # collected and asserted by the test
            results[i] = exc
        finally:
            connection.close()

    threads = [threading.Thread(target=worker, args=(i,)) for i in range(n)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    return results


@pytest.mark.django_db(transaction=True)
def test_same_reading_retried_concurrently_records_once(parked_outbox):
    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL row locks and advisory locks")
    floor = factories.make_floor()
    operator = floor.personas["operator"]
    step = helpers.advance_to(floor.lot, helpers.measured())
    services.start_step(person=operator, lot_step_id=step.pk)
    data = {
        "quantity": "surface_copper",
        "sample_index": 1,
        "value": "40",
        "unit": "um",
        "captured_at": timezone.now().isoformat(),
        "idempotency_key": "tablet-retry-1",
    }

    def post(i: int):
        c = Client()
        c.force_login(operator.user)
        return c.post(f"/floor/steps/{step.pk}/readings/", data, HTTP_HX_REQUEST="true")

    results = _run_threads(5, post)
    statuses = sorted(r.status_code for r in results)
    assert Reading.objects.filter(lot_step=step).count() == 1
    assert statuses.count(201) >= 1
    assert set(statuses) <= {201, 409}  # 409 = "still being processed, retry"
    # A later retry (after the first finished) gets the stored outcome, not a new row.
    again = post(0)
    assert again.status_code == 201
    assert Reading.objects.filter(lot_step=step).count() == 1


@pytest.mark.django_db(transaction=True)
def test_two_operators_sign_the_same_step_at_once(parked_outbox):
    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL row locks")
    floor = factories.make_floor()
    operator, supervisor = floor.personas["operator"], floor.personas["supervisor"]
    step = floor.lot.steps.order_by("position").first()
    assert not step.plan
    services.start_step(person=operator, lot_step_id=step.pk)
    people = [Person.objects.get(pk=operator.pk), Person.objects.get(pk=supervisor.pk)]

    def sign(i: int):
        return services.complete_step(person=people[i], lot_step_id=step.pk, pin=PIN)

    results = _run_threads(2, sign)
    done = [r for r in results if isinstance(r, LotStep)]
    refused = [r for r in results if isinstance(r, Exception)]
    assert len(done) == 1 and len(refused) == 1, results
    assert isinstance(refused[0], Conflict)
    assert "already signed off by someone else" in refused[0].detail
    step.refresh_from_db()
    assert step.status == LotStep.Status.DONE and step.signature_id is not None
    assert AuditEntry.objects.filter(action="step.completed", object_id=str(step.pk)).count() == 1
    call_command("audit", "verify")  # the chain stayed single under the race
