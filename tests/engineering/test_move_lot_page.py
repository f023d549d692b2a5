"""Moving a lot in process onto a newer released revision from the revision page."""

from __future__ import annotations

import pytest

from shopfloor.floor.models import LotStep
from tests import factories

pytestmark = pytest.mark.django_db


def _newer(floor):
    overrides = [{"quantity": "mask_registration", "max": 40.0, "reason": "drawing rev B"}]
    return factories.release_routing_from(
        floor.job.part_revision, floor.personas["process_engineer"], overrides
    )


def test_engineer_moves_a_lot_with_a_reason(client, floor):
    new = _newer(floor)
    client.force_login(floor.personas["process_engineer"].user)
    page = client.get(f"/engineering/revisions/{new.pk}/")
    assert floor.lot.code in page.content.decode()  # offered for the move
    refused = client.post(f"/engineering/revisions/{new.pk}/move-lot/", {"lot": floor.lot.pk})
    assert refused.status_code == 400 and "reason" in refused.content.decode()
    floor.lot.refresh_from_db()
    assert floor.lot.routing_revision_id == floor.routing.pk  # nothing moved
    done = client.post(
        f"/engineering/revisions/{new.pk}/move-lot/",
        {"lot": floor.lot.pk, "reason": "customer tightened registration"},
    )
    assert done.status_code == 302
    floor.lot.refresh_from_db()
    assert floor.lot.routing_revision_id == new.pk
    mask = floor.lot.steps.exclude(status=LotStep.Status.SKIPPED).get(code="mask_develop")
    assert mask.plan[0]["max"] == 40.0


def test_only_process_engineers_move_lots(client, floor):
    new = _newer(floor)
    client.force_login(floor.personas["supervisor"].user)
    reply = client.post(
        f"/engineering/revisions/{new.pk}/move-lot/", {"lot": floor.lot.pk, "reason": "try"}
    )
    assert reply.status_code == 403
    assert "process engineer" in reply.content.decode()
    floor.lot.refresh_from_db()
    assert floor.lot.routing_revision_id == floor.routing.pk
