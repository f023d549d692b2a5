"""Dispositioning an NCR: use as is, rework (steps inserted after the held step), scrap
all or some panels (split lot). Disposition, rework and scrap are the trade's standard
material-review outcomes (common practice; IPC-6012 leaves the decision to the MRB)."""

from __future__ import annotations

import pytest

from shopfloor.audit.models import AuditEntry, Signature
from shopfloor.audit.services import signature_valid
from shopfloor.errors import Conflict, InvalidInput, NotAllowed
from shopfloor.floor import services as floor_services
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Lot, Panel
from shopfloor.quality.models import Alert, Hold, Nonconformance
from shopfloor.quality.services import alerts, dispositions
from tests import helpers
from tests.factories import PIN

pytestmark = pytest.mark.django_db


def _held(floor, lot=None):
    lot = lot or floor.lot
    step = helpers.start_at(floor, lot)
    alerts.handle_event(helpers.event_for(helpers.record(floor, step, "surface_copper", 70.0)).pk)
    return step, Nonconformance.objects.get(lot=lot)


def test_use_as_is_releases_hold_with_signature(floor):
    step, ncr = _held(floor)
    qe = floor.personas["quality_engineer"]
    with pytest.raises(Conflict, match="on hold"):  # held: the step cannot be signed off
        floor_services.complete_step(
            person=floor.personas["operator"], lot_step_id=step.pk, pin=PIN
        )
    # ... but the rest of the set may still be recorded at the held step (quality sees
    # the whole set on the NCR)
    helpers.record(floor, step, "surface_copper", 41.0, sample=2)

    dispositions.disposition_ncr(
        qe,
        ncr.pk,
        "use_as_is",
        "Customer accepted by deviation",
        PIN,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )

    ncr.refresh_from_db()
    assert ncr.status == "closed" and ncr.disposition == "use_as_is"
    assert not Lot.objects.get(pk=floor.lot.pk).on_hold
    assert Hold.objects.get().released_at is not None
    assert Alert.objects.get().closed_at is not None
    sig = Signature.objects.get(meaning="dispositioned_by")
    assert sig.pk == ncr.disposition_signature_id and sig.signer == qe
    assert AuditEntry.objects.filter(action="ncr.dispositioned").count() == 1
    helpers.record(floor, step, "surface_copper", 41.0, sample=3)  # workable again
    with pytest.raises(Conflict):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "scrap",
            "second try",
            PIN,
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )


def test_rework_inserts_step_after_held_step(floor):
    step, ncr = _held(floor)
    nxt = (
        LotStep.objects.filter(lot=floor.lot, position__gt=step.position)
        .order_by("position")
        .first()
    )
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "rework",
        "Strip copper and replate",
        PIN,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    rework = LotStep.objects.get(is_rework=True)
    assert step.position < rework.position < nxt.position
    # The library's default after pattern plating is the plating step again (not a strip).
    assert rework.added_by_ncr_id == ncr.pk and rework.name == step.name
    assert rework.work_center_id == step.work_center_id and rework.plan == step.plan
    assert not Lot.objects.get(pk=floor.lot.pk).on_hold
    # The held step is finished first, then the rework step comes next in the route.
    for n in range(2, 6):
        helpers.record(floor, step, "surface_copper", 41.0, sample=n)
    for n in range(1, 6):
        helpers.record(floor, step, "hole_wall_copper", 25.0, sample=n)
    floor_services.complete_step(person=floor.personas["operator"], lot_step_id=step.pk, pin=PIN)
    assert LotStep.objects.current_for(floor.lot).pk == rework.pk


def test_operator_sees_the_rework_step_marked_with_its_ncr(floor, client):
    step, ncr = _held(floor)
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "rework",
        "Strip copper and replate",
        PIN,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    for n in range(2, 6):
        helpers.record(floor, step, "surface_copper", 41.0, sample=n)
    for n in range(1, 6):
        helpers.record(floor, step, "hole_wall_copper", 25.0, sample=n)
    floor_services.complete_step(person=floor.personas["operator"], lot_step_id=step.pk, pin=PIN)
    client.force_login(floor.personas["operator"].user)
    page = client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    ncr.refresh_from_db()
    now_card = page.split('id="current-step"')[1].split("</section>")[0]
    assert step.name in now_card and "REWORK" in now_card
    assert ncr.number in now_card and "Strip copper and replate" in now_card
    route = page.split('class="route"')[1]
    assert f"REWORK for {ncr.number}" in route
    assert route.count("REWORK") == 1  # only the added step is marked


def test_rework_with_more_steps_than_gap_moves_later_steps(floor):
    step, ncr = _held(floor)
    later_before = list(
        LotStep.objects.filter(lot=floor.lot, position__gt=step.position)
        .order_by("position")
        .values_list("pk", flat=True)
    )
    steps = [{"name": f"Rework pass {i}"} for i in range(1, 11)]
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "rework",
        "Ten passes",
        PIN,
        rework_steps=steps,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    order = list(
        LotStep.objects.filter(lot=floor.lot, position__gt=step.position)
        .order_by("position")
        .values_list("pk", "is_rework")
    )
    assert [r for _, r in order[:10]] == [True] * 10
    assert [pk for pk, _ in order[10:]] == later_before


def test_scrap_all(floor):
    _, ncr = _held(floor)
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "scrap",
        "Plating burnt",
        PIN,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    lot = Lot.objects.get(pk=floor.lot.pk)
    assert lot.status == "scrapped" and not lot.on_hold
    assert not Panel.objects.filter(lot=lot, scrapped=False).exists()


def test_scrap_some_panels_splits_lot(floor):
    _step, ncr = _held(floor)
    steps_before = LotStep.objects.filter(lot=floor.lot).count()
    bad = Panel.objects.filter(lot=floor.lot).order_by("serial").first()
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "scrap",
        "One panel burnt",
        PIN,
        scrap_panel_ids=[bad.pk],
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    split = Lot.objects.get(split_from=floor.lot)
    assert split.code == f"{floor.lot.code}-S1" and split.status == "scrapped"
    bad.refresh_from_db()
    assert bad.lot_id == split.pk and bad.scrapped
    lot = Lot.objects.get(pk=floor.lot.pk)
    assert lot.panel_count == 1 and split.panel_count == 1 and not lot.on_hold
    assert lot.status == "in_process"
    assert LotStep.objects.filter(lot=lot).count() == steps_before  # history kept
    ncr.refresh_from_db()
    assert ncr.scrap_lot_id == split.pk


def test_refusals_save_nothing(floor):
    _, ncr = _held(floor)
    qe = floor.personas["quality_engineer"]
    with pytest.raises(NotAllowed):
        dispositions.disposition_ncr(
            floor.personas["supervisor"],
            ncr.pk,
            "use_as_is",
            "ok",
            PIN,
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    with pytest.raises(NotAllowed):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "use_as_is",
            "looks fine",
            "0000",
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    with pytest.raises(InvalidInput, match="use_as_is, rework, scrap"):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "bin_it",
            "nope",
            PIN,
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    with pytest.raises(InvalidInput, match="note"):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "use_as_is",
            " ",
            PIN,
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    with pytest.raises(InvalidInput, match="not live panels"):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "scrap",
            "bad ids",
            PIN,
            scrap_panel_ids=[999999],
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    with pytest.raises(InvalidInput, match="problem"):
        dispositions.disposition_ncr(
            qe,
            ncr.pk,
            "rework",
            "bad",
            PIN,
            rework_steps=[{"nm": 1}],
            root_cause="process_drift",
            corrective_action="Plating controls tightened",
        )
    ncr.refresh_from_db()
    assert ncr.status == "open" and Lot.objects.get(pk=floor.lot.pk).on_hold
    assert not Lot.objects.filter(split_from=floor.lot).exists()
    assert not Signature.objects.filter(meaning="dispositioned_by").exists()


def test_signature_binds_disposition_content(floor):
    _, ncr = _held(floor)
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "use_as_is",
        "Within customer deviation",
        PIN,
        root_cause="process_drift",
        corrective_action="Plating controls tightened",
    )
    ncr.refresh_from_db()
    content = {
        "number": ncr.number,
        "lot": floor.lot.code,
        "disposition": "use_as_is",
        "note": "Within customer deviation",
        "root_cause": "process_drift",
        "corrective_action": "Plating controls tightened",
        "panels": {p.serial: "use_as_is" for p in Panel.objects.filter(lot=floor.lot)},
    }
    assert signature_valid(
        ncr.disposition_signature, record_type="ncr", record_id=ncr.pk, content=content
    )
    assert not signature_valid(
        ncr.disposition_signature,
        record_type="ncr",
        record_id=ncr.pk,
        content={**content, "disposition": "scrap"},
    )
