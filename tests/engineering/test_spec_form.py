"""The build spec authoring form: pre-filled from a spec dict, live preview, save,
one-click draft, overrides (tighter free, looser needs the PIN), every problem shown."""

from __future__ import annotations

import pytest
from django.test import Client

from routing import spec_form
from routing.builder.examples import EXAMPLE_SPECS
from routing.models import RoutingRevision
from shopfloor.plant.models import PartRevision
from tests.factories import PIN, SPEC_4L_ENIG, make_part_revision

pytestmark = pytest.mark.django_db


def _post_for(spec, overrides=(), **extra):
    state = spec_form.form_values(spec, overrides)
    post = dict(state.values)
    post["hard_gold_fingers"] = "on" if state.values["hard_gold_fingers"] else ""
    for prefix, rows in (("stackup", state.stackup), ("vias", state.vias), ("ov", state.overrides)):
        for i, row in enumerate(rows):
            for k, v in row.items():
                post[f"{prefix}-{i}-{k}"] = v
    post.update(extra)
    return post


@pytest.mark.parametrize("name", sorted(EXAMPLE_SPECS))
def test_form_round_trip_keeps_every_key(name):
    spec = EXAMPLE_SPECS[name]
    again = spec_form.spec_from_form(_post_for(spec))
    from routing.builder.spec import normalise_spec

    assert normalise_spec(again) == normalise_spec(
        {
            **spec,
            "hard_gold_fingers": spec.get("hard_gold_fingers", False),
            "vias": spec.get("vias", []),
        }
        | (
            {"solder_mask": {"sides": "both", "colour": "green"}}
            if "solder_mask" not in spec
            else {}
        )
        | ({"legend": {"sides": "both"}} if "legend" not in spec else {})
    )


def test_imported_fields_are_marked(floor):
    state = spec_form.form_values(
        SPEC_4L_ENIG, imported=["finish", "stackup", "solder_mask.colour"]
    )
    assert state.imported == {"finish", "stackup", "solder_mask_colour"}
    pr = PartRevision.objects.get(pk=floor.routing.part_revision_id)
    client = Client()
    client.force_login(floor.personas["process_engineer"].user)
    page = client.get(f"/engineering/part-revisions/{pr.pk}/spec/").content.decode()
    assert 'name="finish"' in page and "Live preview" in page and "The spec is valid" in page


def test_live_preview_lists_problems_and_saves_nothing(floor):
    client = Client()
    client.force_login(floor.personas["operator"].user)  # anyone with a role may try
    post = _post_for({**SPEC_4L_ENIG, "layers": 3}, finish="gold")
    reply = client.post("/engineering/spec-form/preview/", post)
    page = reply.content.decode()
    assert reply.status_code == 200 and "layers" in page and "finish" in page
    assert "not one of the allowed values" in page


def test_save_and_one_click_draft_with_stackup_and_overrides(floor):
    engineer = floor.personas["process_engineer"]
    pr = make_part_revision()
    PartRevision.objects.filter(pk=pr.pk).update(build_spec={})  # entered with a job: no spec
    pr.refresh_from_db()
    client = Client()
    client.force_login(engineer.user)
    spec = {
        **EXAMPLE_SPECS["twenty_four_layer_hdi"],
        "finish": "ENEPIG",
        "outer_copper_base_um": "0.5 oz",
    }
    bad = client.post(
        f"/engineering/part-revisions/{pr.pk}/spec/",
        _post_for({**spec, "layers": 22}, action="save"),
    )
    assert bad.status_code == 400 and "field-error" in bad.content.decode()
    pr.refresh_from_db()
    assert pr.build_spec == {}
    # A tighter override is free; one click makes the preview a draft revision.
    tighter = [{"quantity": "hole_wall_copper", "min": 30, "reason": "customer drawing note 7"}]
    reply = client.post(
        f"/engineering/part-revisions/{pr.pk}/spec/",
        _post_for(spec, tighter, action="draft", reason="first authored"),
    )
    assert reply.status_code == 302, reply.content.decode()[:3000]
    pr.refresh_from_db()
    assert pr.build_spec["finish"] == "enepig" and pr.build_spec["outer_copper_base_um"] == 17.39
    assert len(pr.build_spec["stackup"]) == len(spec["stackup"])
    draft = RoutingRevision.objects.get(part_revision=pr, number=1)
    assert draft.status == "draft" and draft.overrides[0]["min"] == 30
    # A looser one needs the PIN (the deviation signature) ...
    looser = [{"quantity": "hole_wall_copper", "min": 5, "reason": "customer accepts thin copper"}]
    refused = client.post(
        f"/engineering/part-revisions/{pr.pk}/spec/",
        _post_for(spec, looser, action="draft", reason="loosen"),
    )
    assert (
        refused.status_code in (400, 403)
        and RoutingRevision.objects.filter(part_revision=pr).count() == 1
    )
    ok = client.post(
        f"/engineering/part-revisions/{pr.pk}/spec/",
        _post_for(spec, looser, action="draft", reason="loosen", pin=PIN),
    )
    assert ok.status_code == 302
    second = RoutingRevision.objects.get(part_revision=pr, number=2)
    assert any(m.get("deviation") for s in second.built["steps"] for m in s["measurements"])


def test_operator_may_not_save(floor):
    client = Client()
    client.force_login(floor.personas["operator"].user)
    reply = client.post(
        f"/engineering/part-revisions/{floor.routing.part_revision_id}/spec/",
        _post_for(SPEC_4L_ENIG, action="save"),
    )
    assert reply.status_code == 403
