"""The walk from the issue: hole-wall copper sample sets of a class 3 lot, end to end.

IPC-6012 (table of surface and hole copper plating minimum requirements, Table 3-4 in
revision D; from memory): class 3 plated-through holes need an average of 25 um over the
hole-wall measurements and at least 20 um in any thin area. Unit factors are exact:
1 mil = 25.4 um, 1 uin = 0.0254 um (the inch is 25.4 mm by definition).
"""

from __future__ import annotations

import pytest

from shopfloor.audit.models import Signature
from shopfloor.errors import Conflict
from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Lot
from shopfloor.quality.models import Alert, Hold, Nonconformance, OutboxEvent
from shopfloor.quality.services import alerts, dispositions
from tests import factories, helpers
from tests.factories import PIN

pytestmark = pytest.mark.django_db

CAUSE = {"root_cause": "measurement", "corrective_action": "re-read the gauge display"}
WALK = [("1.1", "mil"), ("1050", "µin"), ("27.5", "um"), ("0.9", "mil"), ("26", "um")]


@pytest.fixture
def class3_step(floor):
    spec = dict(factories.SPEC_4L_ENIG, ipc_class=3)
    revision = factories.make_part_revision(spec)
    routing = factories.release_routing(revision, floor.personas["process_engineer"])
    lot = factories.make_lot(routing, factories.make_job(revision, routing))
    step = helpers.start_at(floor, lot)
    return floor, lot, step


def _record(floor, step, sample, value, unit, *, confirm=False, quantity="hole_wall_copper"):
    return floor_services.record_reading(
        person=floor.personas["operator"],
        lot_step_id=step.pk,
        data=floor_services.ReadingInput(
            quantity=quantity,
            value=value,
            unit=unit,
            sample_index=sample,
            confirm_out_of_window=confirm,
        ),
    )


def _handle_all():
    for event in OutboxEvent.objects.filter(processed_at__isnull=True).order_by("pk"):
        alerts.handle_event(event.pk)


def _surface_copper(floor, step):
    for sample in range(1, 6):
        _record(floor, step, sample, "41.5", "um", quantity="surface_copper")


def test_the_walk_stays_in_window_and_signs_off(class3_step):
    floor, lot, step = class3_step
    for sample, (value, unit) in enumerate(WALK, start=1):
        if (value, unit) == ("0.9", "mil"):
            # 0.9 mil = 22.86 um is below the 25 um average: the guard asks first
            with pytest.raises(floor_services.ConfirmationNeeded, match=r"22\.9 µm is below 25"):
                _record(floor, step, sample, value, unit)
            reading = _record(floor, step, sample, value, unit, confirm=True)
            assert reading.confirmation.startswith("0.9 mil = 22.9 µm")
            assert reading.in_window  # above the 20 um thin-area minimum
        else:
            assert _record(floor, step, sample, value, unit).in_window
    _surface_copper(floor, step)
    _handle_all()
    last = Reading.objects.get(lot_step=step, quantity="hole_wall_copper", sample_index=5)
    # mean of 27.94, 26.67, 27.5, 22.86, 26 = 26.194 um >= 25 um
    assert last.set_verdict["in_window"] is True
    assert last.set_verdict["figures"][0]["figure"] == pytest.approx(26.194)
    assert Alert.objects.count() == 0 and not Lot.objects.get(pk=lot.pk).on_hold
    done = floor_services.complete_step(
        person=floor.personas["operator"], lot_step_id=step.pk, pin=PIN
    )
    assert done.status == LotStep.Status.DONE


def test_one_thin_sample_raises_exactly_one_alert_citing_the_set(class3_step):
    floor, lot, step = class3_step
    walk = [*WALK[:3], ("19", "um"), WALK[4]]
    for sample, (value, unit) in enumerate(walk[:4], start=1):
        _record(floor, step, sample, value, unit, confirm=True)
    _handle_all()
    # 19 um is below the 20 um thin-area minimum: judged at once, the lot is held
    assert Lot.objects.get(pk=lot.pk).on_hold
    alert = Alert.objects.get()
    assert "sample 4" in alert.message and "below 20 µm" in alert.message
    assert "1: 27.9 µm, 2: 26.7 µm, 3: 27.5 µm, 4: 19 µm" in alert.message
    # the rest of the set is still recorded at the held step, and joins the NCR
    _record(floor, step, 5, *walk[4])
    _handle_all()
    assert Alert.objects.count() == 1 and Hold.objects.count() == 1
    ncr = Nonconformance.objects.get()
    assert sorted(ncr.readings.values_list("sample_index", flat=True)) == [1, 2, 3, 4, 5]
    with pytest.raises(Conflict, match="on hold"):
        floor_services.complete_step(
            person=floor.personas["operator"], lot_step_id=step.pk, pin=PIN
        )


def test_a_mean_below_the_class_average_raises_one_alert_when_the_set_completes(class3_step):
    floor, lot, step = class3_step
    values = ["24", "23", "26", "24.5", "24"]  # mean 24.3 um < 25; each >= 20 um
    for sample, value in enumerate(values, start=1):
        _record(floor, step, sample, value, "um", confirm=True)
        _handle_all()
        if sample < 5:
            assert Alert.objects.count() == 0  # the set is judged once it is complete
    alert = Alert.objects.get()
    assert "average of 5 samples 24.3 µm is below 25 µm" in alert.message
    assert Nonconformance.objects.get().readings.count() == 5
    assert Lot.objects.get(pk=lot.pk).on_hold


def test_correction_back_inside_lets_quality_close_it_as_a_recording_error(class3_step):
    floor, lot, step = class3_step
    for sample, (value, unit) in enumerate(WALK[:3], start=1):
        _record(floor, step, sample, value, unit)
    slip = _record(floor, step, 4, "0.09", "mil", confirm=True)  # 2.3 um: a typing slip
    _handle_all()
    ncr = Nonconformance.objects.get()
    qe = floor.personas["quality_engineer"]
    with pytest.raises(Conflict, match="no correction has brought its set back inside"):
        dispositions.disposition_ncr(qe, ncr.pk, "recording_error", "typing slip", PIN, **CAUSE)
    # the held lot still accepts the correction (superseding, with a reason, audited)
    floor_services.correct_reading(
        person=floor.personas["operator"],
        reading_id=slip.pk,
        value="0.9",
        unit="mil",
        reason="decimal point slipped",
        confirm_out_of_window=True,
    )
    _handle_all()
    ncr.refresh_from_db()
    assert "brought the hole wall copper" in ncr.correction_note
    assert "Sample 4 was corrected from 0.09 mil (decimal point slipped) to 0.9 mil" in (
        ncr.correction_note
    )
    assert ncr.readings.count() == 5  # 4 samples plus the correction
    assert Lot.objects.get(pk=lot.pk).on_hold  # the hold stays until a disposition
    dispositions.disposition_ncr(
        qe, ncr.pk, "recording_error", "decimal slip corrected", PIN, **CAUSE
    )
    ncr.refresh_from_db()
    assert ncr.disposition == "recording_error" and ncr.status == "closed"
    assert Signature.objects.get(pk=ncr.disposition_signature_id).meaning == "dispositioned_by"
    assert not Lot.objects.get(pk=lot.pk).on_hold


def test_correcting_a_reading_of_another_lot_is_refused(class3_step, floor):
    _, _, step = class3_step
    reading = _record(floor, step, 1, "27", "um")
    with pytest.raises(Conflict, match="belongs to lot"):
        floor_services.correct_reading(
            person=floor.personas["operator"],
            reading_id=reading.pk,
            value="28",
            unit="um",
            reason="wrong lot",
            lot_code=floor.lot.code,
        )
    with pytest.raises(Exception, match="No reading"):
        floor_services.correct_reading(
            person=floor.personas["operator"],
            reading_id=999_999_999,
            value="28",
            unit="um",
            reason="missing",
        )
    assert Reading.objects.count() == 1
