"""Routing revisions on the database: release is signed and final, lots keep their snapshot,
changes make a new revision with a reason and a diff, deviations need a signed approval."""

from __future__ import annotations

import pytest

from routing import services
from routing.models import ReleasedRevisionError, RoutingRevision, RoutingStep
from shopfloor.audit.models import Signature
from shopfloor.audit.services import signature_valid
from shopfloor.errors import Conflict, InvalidInput, NotAllowed
from shopfloor.floor.models import LotStep
from tests import factories

pytestmark = pytest.mark.django_db


def test_released_revision_refuses_changes(floor):
    revision = floor.routing
    assert revision.is_released
    revision.reason = "sneaky edit"
    with pytest.raises(ReleasedRevisionError):
        revision.save()
    step = revision.steps.first()
    step.name = "changed"
    with pytest.raises(ReleasedRevisionError):
        step.save()
    with pytest.raises(ReleasedRevisionError):
        revision.delete()
    assert RoutingStep.objects.get(pk=step.pk).name != "changed"


def test_release_is_an_e_signature_bound_to_the_revision(floor):
    revision = floor.routing
    sig = revision.release_signature
    assert sig.meaning == Signature.Meaning.RELEASED
    assert sig.printed_name == floor.personas["process_engineer"].printed_name
    content = services.revision_content(revision)
    assert signature_valid(
        sig, record_type="routing_revision", record_id=revision.pk, content=content
    )
    # the same signature does not validate for another revision
    assert not signature_valid(
        sig, record_type="routing_revision", record_id=revision.pk + 1, content=content
    )


def test_only_process_engineers_draft_and_release(floor):
    operator = floor.personas["operator"]
    with pytest.raises(NotAllowed):
        services.create_draft(
            person=operator, part_revision_id=floor.job.part_revision_id, reason="x"
        )
    engineer = floor.personas["process_engineer"]
    draft = services.create_draft(
        person=engineer,
        part_revision_id=floor.job.part_revision_id,
        reason="tighten mask registration",
    )
    with pytest.raises(NotAllowed):
        services.release(person=operator, revision_id=draft.pk, pin=factories.PIN)
    with pytest.raises(NotAllowed):  # wrong PIN
        services.release(person=engineer, revision_id=draft.pk, pin="0000")
    assert RoutingRevision.objects.get(pk=draft.pk).status == "draft"


def test_new_revision_needs_reason_and_carries_a_diff(floor):
    engineer = floor.personas["process_engineer"]
    part_revision = floor.job.part_revision
    with pytest.raises(InvalidInput, match="reason"):
        services.create_draft(person=engineer, part_revision_id=part_revision.pk, reason="")
    overrides = [
        {"quantity": "mask_registration", "max": 40.0, "reason": "customer drawing note 7"}
    ]
    draft = services.create_draft(
        person=engineer,
        part_revision_id=part_revision.pk,
        reason="customer tightened registration",
        overrides=overrides,
    )
    assert draft.number == floor.routing.number + 1
    assert draft.previous_id == floor.routing.pk
    assert "mask_registration" in draft.diff and "40" in draft.diff
    # tighter is free: no deviation, source says it is the customer's
    window = next(
        m
        for s in draft.built["steps"]
        for m in s["measurements"]
        if m["quantity"] == "mask_registration"
    )
    assert window["max"] == 40.0 and not window["deviation"]
    assert window["source"].startswith("customer spec")


def test_looser_override_needs_signed_approval_and_is_marked(floor):
    engineer = floor.personas["process_engineer"]
    part_revision = floor.job.part_revision
    looser = [{"quantity": "mask_registration", "max": 75.0, "reason": "customer waiver 12"}]
    before = RoutingRevision.objects.count()
    with pytest.raises(InvalidInput, match="approval"):
        services.create_draft(
            person=engineer, part_revision_id=part_revision.pk, reason="waiver", overrides=looser
        )
    assert RoutingRevision.objects.count() == before  # nothing saved
    draft = services.create_draft(
        person=engineer,
        part_revision_id=part_revision.pk,
        reason="waiver",
        overrides=looser,
        deviation_pin=factories.PIN,
    )
    window = next(
        m
        for s in draft.built["steps"]
        for m in s["measurements"]
        if m["quantity"] == "mask_registration"
    )
    assert window["deviation"] is True and window["max"] == 75.0
    assert "deviation approved by" in window["source"]
    assert (
        Signature.objects.filter(
            record_type="routing_revision", record_id=str(draft.pk), meaning="deviation_approved_by"
        ).count()
        == 1
    )


def test_lot_keeps_its_snapshot_and_moves_only_open_steps(floor):
    engineer = floor.personas["process_engineer"]
    lot = floor.lot
    first = lot.steps.order_by("position").first()
    from shopfloor.floor import services as floor_services

    floor_services.start_step(person=floor.personas["operator"], lot_step_id=first.pk)
    floor_services.complete_step(
        person=floor.personas["operator"], lot_step_id=first.pk, pin=factories.PIN
    )
    overrides = [{"quantity": "mask_registration", "max": 40.0, "reason": "drawing rev B"}]
    new = factories.release_routing_from(floor.job.part_revision, engineer, overrides)
    # the lot still runs on the old snapshot
    mask = lot.steps.get(code="mask_develop")
    # shop practice default: mask registration within 50 um (common practice)
    assert mask.plan[0]["max"] == 50.0
    with pytest.raises(InvalidInput):
        services.move_lot(person=engineer, lot_id=lot.pk, revision_id=new.pk, reason="")
    services.move_lot(
        person=engineer, lot_id=lot.pk, revision_id=new.pk, reason="customer tightened registration"
    )
    lot.refresh_from_db()
    assert lot.routing_revision_id == new.pk
    done = lot.steps.filter(status=LotStep.Status.DONE)
    assert list(done.values_list("pk", flat=True)) == [first.pk]  # history untouched
    active_mask = lot.steps.exclude(status=LotStep.Status.SKIPPED).get(code="mask_develop")
    assert active_mask.plan[0]["max"] == 40.0
    # the done step is not repeated on the new route
    assert lot.steps.filter(code=first.code).count() == 1
    with pytest.raises(Conflict):
        services.move_lot(
            person=engineer,
            lot_id=lot.pk,
            revision_id=services.create_draft(
                person=engineer, part_revision_id=floor.job.part_revision_id, reason="draft"
            ).pk,
            reason="to a draft",
        )
