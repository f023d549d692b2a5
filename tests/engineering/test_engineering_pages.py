"""Engineering pages: list, preview (htmx panel), draft, release with PIN, diff, access.

Trade facts: ENIG windows come from IPC-4552A (from memory) and the page must show each
window's source beside it; a released routing is signed "Released by" (common practice
for controlled documents).
"""

from __future__ import annotations

import json

import pytest
from django.test import Client

from routing.models import RoutingRevision, RoutingStep
from shopfloor.plant.models import PartRevision
from tests.factories import PIN, SPEC_4L_ENIG

pytestmark = pytest.mark.django_db


def client_for(person) -> Client:
    client = Client()
    client.force_login(person.user)
    return client


def test_index_lists_part_revisions_and_routings(floor, personas):
    page = client_for(personas["process_engineer"]).get("/engineering/")
    assert page.status_code == 200
    text = page.content.decode()
    assert str(floor.routing.part_revision) in text
    assert f"r{floor.routing.number}" in text and "Create draft" in text


def test_operator_can_look_but_not_draft(floor, personas):
    operator = client_for(personas["operator"])
    page = operator.get("/engineering/")
    assert page.status_code == 200 and "Create draft" not in page.content.decode()
    before = RoutingRevision.objects.count()
    reply = operator.post(
        f"/engineering/part-revisions/{floor.routing.part_revision_id}/draft/", {"reason": "try"}
    )
    assert reply.status_code == 403
    assert "process engineer" in reply.content.decode()
    assert RoutingRevision.objects.count() == before


def test_outsider_gets_403_with_reason_and_anonymous_goes_to_login(floor, personas):
    reply = client_for(personas["outsider"]).get("/engineering/")
    assert reply.status_code == 403 and "shop role" in reply.content.decode()
    assert Client().get("/engineering/").status_code == 302


def test_preview_htmx_panel_shows_windows_sources_and_hazards(floor, personas):
    client = client_for(personas["process_engineer"])
    assert client.get("/engineering/preview/").status_code == 200
    before = (RoutingRevision.objects.count(), RoutingStep.objects.count())
    reply = client.post(
        "/engineering/preview/", {"spec": json.dumps(SPEC_4L_ENIG)}, HTTP_HX_REQUEST="true"
    )
    assert reply.status_code == 200
    text = reply.content.decode()
    assert text.lstrip().startswith('<section id="preview-panel"')  # only the panel
    assert "nickel_thickness" in text and "IPC-4552A" in text
    assert "Caution:" in text and "safety data sheets" in text
    assert (RoutingRevision.objects.count(), RoutingStep.objects.count()) == before


def test_preview_lists_every_problem_with_allowed_values(floor, personas):
    client = client_for(personas["process_engineer"])
    bad = {**SPEC_4L_ENIG, "layers": 3, "finish": "gold"}
    reply = client.post("/engineering/preview/", {"spec": json.dumps(bad)}, HTTP_HX_REQUEST="true")
    text = reply.content.decode()
    assert "<code>layers</code>" in text and "<code>finish</code>" in text
    assert "enig, enepig" in text and "gold" in text
    broken = client.post("/engineering/preview/", {"spec": "{oops"})
    assert broken.status_code == 400 and "not valid JSON" in broken.content.decode()


def test_draft_release_with_pin_and_diff(floor, personas):
    engineer = client_for(personas["process_engineer"])
    part_revision = PartRevision.objects.get(pk=floor.routing.part_revision_id)
    # A class 3 build spec (new part revision data) changes the hole copper window.
    PartRevision.objects.filter(pk=part_revision.pk).update(
        build_spec={**SPEC_4L_ENIG, "ipc_class": 3}
    )
    reply = engineer.post(
        f"/engineering/part-revisions/{part_revision.pk}/draft/",
        {"reason": "customer moved to class 3"},
    )
    assert reply.status_code == 302
    draft = RoutingRevision.objects.get(part_revision=part_revision, number=2)
    page = engineer.get(f"/engineering/revisions/{draft.pk}/").content.decode()
    assert "Draft" in page and "Release with my signature" in page
    # IPC-6012 class 3 hole copper is 25 µm average against 20 µm for class 2 (from memory).
    assert "hole_wall_copper" in draft.diff and "20 -> 25" in draft.diff
    assert "hole_wall_copper" in page

    wrong = engineer.post(f"/engineering/revisions/{draft.pk}/release/", {"pin": "0000"})
    assert wrong.status_code == 403 and "Wrong PIN" in wrong.content.decode()
    draft.refresh_from_db()
    assert draft.status == "draft"

    assert (
        engineer.post(f"/engineering/revisions/{draft.pk}/release/", {"pin": PIN}).status_code
        == 302
    )
    draft.refresh_from_db()
    assert draft.status == "released" and draft.release_signature is not None
    page = engineer.get(f"/engineering/revisions/{draft.pk}/").content.decode()
    assert "Released by Pat Engineer" in page
    again = engineer.post(f"/engineering/revisions/{draft.pk}/release/", {"pin": PIN})
    assert again.status_code == 409


def test_draft_without_reason_is_refused(floor, personas):
    engineer = client_for(personas["process_engineer"])
    before = RoutingRevision.objects.count()
    reply = engineer.post(
        f"/engineering/part-revisions/{floor.routing.part_revision_id}/draft/", {"reason": ""}
    )
    assert reply.status_code == 400 and "reason" in reply.content.decode()
    assert RoutingRevision.objects.count() == before
