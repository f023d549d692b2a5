"""One validator everywhere: any-case enums, copper with units, no-mask colour, the
README's example, the admin refusing an invalid spec, the drill size, identical releases
refused and the diff as a table."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from django.conf import settings
from django.test import Client

from routing import services
from routing.builder import render
from routing.builder.build import build_routing, drill_size
from routing.builder.default_library import DEFAULT_PLATING_ALLOWANCE_MM
from routing.builder.examples import EXAMPLE_SPECS
from routing.builder.spec import SpecInvalid, normalise_spec, parse_spec
from routing.models import RoutingRevision
from shopfloor.errors import Conflict, InvalidInput
from shopfloor.plant.models import PartRevision
from tests.factories import PIN, SPEC_4L_ENIG, make_part_revision, make_person

pytestmark = pytest.mark.django_db


def readme_spec() -> dict:
    """The first JSON block under README's "## Build spec" heading."""
    text = (Path(settings.BASE_DIR) / "README.md").read_text(encoding="utf-8")
    section = text.split("## Build spec", 1)[1]
    block = re.search(r"```json\n(.*?)```", section, re.S)
    assert block, "README has no JSON example under '## Build spec'"
    return json.loads(block.group(1))


def test_readme_example_previews_cleanly():
    spec = readme_spec()
    preview = services.preview(spec)
    assert preview["steps"], preview
    stored = services.validate_spec(spec)
    assert stored["finish"] == "enig"
    # 1 oz/ft² = 34.79 um: the factor of shopfloor/core/units.py (common practice, 1.37 mil)
    assert stored["inner_copper_um"] == pytest.approx(34.79)


@pytest.mark.parametrize(
    ("given", "stored"),
    [
        ("ENIG", "enig"),
        ("Immersion Silver", "immersion_silver"),
        ("HASL-lead-free", "hasl_lead_free"),
    ],
)
def test_enums_in_any_case(given, stored):
    spec = normalise_spec({**SPEC_4L_ENIG, "finish": given, "profile": "ROUTE"})
    assert spec["finish"] == stored and spec["profile"] == "route"


@pytest.mark.parametrize(
    ("text", "um"),
    [
        ("1 oz", 34.79),  # shopfloor.core.units: 1 oz/ft² = 34.79 um (1.37 mil, common practice)
        ("0.5oz", 17.39),  # half of it, rounded to 0.01 um
        ("35 um", 35.0),
        ("1.4 mil", 35.56),  # 1 mil = 25.4 um exactly (inch = 25.4 mm by definition)
    ],
)
def test_copper_with_units(text, um):
    spec = normalise_spec({**SPEC_4L_ENIG, "inner_copper_um": text})
    assert spec["inner_copper_um"] == pytest.approx(um, abs=0.01)


def test_copper_refusals_name_what_is_allowed():
    with pytest.raises(SpecInvalid) as exc:
        parse_spec(
            {
                **SPEC_4L_ENIG,
                "inner_copper_um": "two ounces",
                "outer_copper_base_um": "1 furlong",
                "stackup": [{"kind": "core", "thickness_um": "1 oz"}],
            }
        )
    fields = {e.field: e for e in exc.value.errors}
    assert "inner_copper_um" in fields and "'1 oz'" in str(fields["inner_copper_um"].allowed)
    assert "unknown unit" in fields["outer_copper_base_um"].problem
    assert "only for copper" in fields["stackup[0].thickness_um"].problem


def test_mask_colour_optional_without_mask():
    for mask in (
        {"sides": "none"},
        {"sides": "NONE", "colour": "none"},
        {"sides": "none", "colour": None},
    ):
        spec = normalise_spec({**SPEC_4L_ENIG, "solder_mask": mask})
        assert spec["solder_mask"] == {"sides": "none", "colour": "none"}
    with pytest.raises(SpecInvalid) as exc:
        parse_spec({**SPEC_4L_ENIG, "solder_mask": {"sides": "none", "colour": "red"}})
    assert exc.value.errors[0].field == "solder_mask.colour"
    with pytest.raises(SpecInvalid):
        parse_spec({**SPEC_4L_ENIG, "solder_mask": {"sides": "top", "colour": "none"}})


def test_normalising_a_stored_spec_changes_nothing():
    for spec in EXAMPLE_SPECS.values():
        assert normalise_spec(spec) == spec
    assert normalise_spec(SPEC_4L_ENIG) == SPEC_4L_ENIG


def test_drill_diameter_is_finished_hole_plus_plating_allowance():
    routing = build_routing(parse_spec(EXAMPLE_SPECS["two_layer"]))
    drill = next(s for s in routing.steps if s.code.startswith("drill_mechanical"))
    # finished 0.30 mm + 0.10 mm allowance (shop practice, process library) = 0.40 mm
    assert drill.parameters["finished_hole_mm"] == 0.3
    assert drill.parameters["plating_allowance_mm"] == DEFAULT_PLATING_ALLOWANCE_MM == 0.1
    assert drill.parameters["drill_diameter_mm"] == 0.4
    assert "min_hole_mm" not in drill.parameters
    assert drill_size({"finished_hole_mm": 0.3, "plated": False})["drill_diameter_mm"] == 0.3
    assert drill_size({"finished_hole_mm": 0.25, "plating_allowance_mm": 0.15}) == {
        "plating_allowance_mm": 0.15,
        "drill_diameter_mm": 0.4,
    }


def test_model_refuses_invalid_spec_on_every_save():
    pr = make_part_revision({**SPEC_4L_ENIG, "finish": "ENIG", "inner_copper_um": "1 oz"})
    pr.refresh_from_db()
    assert pr.build_spec["finish"] == "enig" and pr.build_spec["inner_copper_um"] == 34.79
    pr.build_spec = {**SPEC_4L_ENIG, "layers": 3}
    with pytest.raises(SpecInvalid):
        pr.save()


def test_admin_refuses_invalid_spec_and_saves_nothing(floor):
    admin_user = make_person("admin", "1099", "Ada Admin").user
    admin_user.is_staff = admin_user.is_superuser = True
    admin_user.save()
    client = Client()
    client.force_login(admin_user)
    pr = PartRevision.objects.get(pk=floor.routing.part_revision_id)
    before = dict(pr.build_spec)
    url = f"/admin/plant/partrevision/{pr.pk}/change/"
    bad = {**SPEC_4L_ENIG, "layers": 3, "finish": "gold plate"}
    reply = client.post(
        url,
        {
            "part": pr.part_id,
            "revision": pr.revision,
            "build_spec": json.dumps(bad),
            "created_at_0": "2026-01-01",
            "created_at_1": "00:00:00",
        },
    )
    assert reply.status_code == 200
    page = reply.content.decode()
    assert "errorlist" in page and "finish: not one of the allowed values" in page
    pr.refresh_from_db()
    assert pr.build_spec == before


def test_validate_spec_lists_every_problem():
    with pytest.raises(InvalidInput) as exc:
        services.validate_spec({**SPEC_4L_ENIG, "layers": 3, "finish": "gold"})
    assert {p["field"] for p in exc.value.problems} >= {"layers", "finish"}


def test_identical_revision_release_refused_and_diff_table(floor):
    engineer = floor.personas["process_engineer"]
    pr_id = floor.routing.part_revision_id
    same = services.create_draft(person=engineer, part_revision_id=pr_id, reason="no change")
    with pytest.raises(Conflict) as exc:
        services.release(person=engineer, revision_id=same.pk, pin=PIN)
    assert "no differences from released r1" in exc.value.detail
    same.refresh_from_db()
    assert same.status == RoutingRevision.Status.DRAFT
    services.set_spec(
        person=engineer,
        part_revision_id=pr_id,
        spec={**SPEC_4L_ENIG, "ipc_class": 3, "min_hole_mm": 0.25},
    )
    changed = services.create_draft(person=engineer, part_revision_id=pr_id, reason="class 3")
    rows = render.diff_table(floor.routing.built, changed.built)
    drill = [r for r in rows if r["what"] == "drill diameter mm"]
    assert drill and drill[0]["old"] == "0.4 mm" and drill[0]["new"] == "0.35 mm"
    # IPC-6012 class 3 average hole copper 25 um against 20 um for class 2 (from memory)
    # (the average is the "mean" entry; the thin area, each reading, goes 18 -> 20 um)
    hole = [r for r in rows if r["what"] == "hole_wall_copper (mean) min"]
    assert hole and hole[0]["change"] == "window changed"
    assert hole[0]["old"] == "20 um" and hole[0]["new"] == "25 um"
    thin = [r for r in rows if r["what"] == "hole_wall_copper min"]
    assert thin and thin[0]["old"] == "18 um" and thin[0]["new"] == "20 um"
    services.release(person=engineer, revision_id=changed.pk, pin=PIN)
    client = Client()
    client.force_login(engineer.user)
    page = client.get(f"/engineering/revisions/{changed.pk}/").content.decode()
    assert '<table class="diff-table">' in page and "drill diameter mm" in page
