"""Material capture at a step: the kinds a step consumes, shelf life and expiry, recall.

That layup consumes cores (laminate), prepreg and copper foil, and that prepreg has a
shelf life counted from receipt, is common practice in multilayer fabrication; the
90-day figure is the seeded site value (from memory, editable in the admin).
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor import access
from shopfloor.errors import Conflict, InvalidInput
from shopfloor.floor import services
from shopfloor.floor.models import MaterialUse
from shopfloor.plant.models import MaterialLot
from shopfloor.quality.read import genealogy
from tests import helpers
from tests.factories import PIN

pytestmark = pytest.mark.django_db


def _material(code, kind, received_days_ago=5, expires=None):
    return MaterialLot.objects.create(
        code=code,
        kind=kind,
        description=f"{kind} for the test",
        received_on=timezone.localdate() - dt.timedelta(days=received_days_ago),
        expires_on=expires,
    )


@pytest.fixture
def layup(floor):
    code = floor.lot.steps.filter(code__startswith="layup").order_by("position").first().code
    return helpers.start_at(floor, floor.lot, code)


def test_layup_plan_lists_core_prepreg_and_foil(floor, layup):
    assert layup.materials == ["laminate", "prepreg", "foil"]
    imaging = floor.lot.steps.filter(code__startswith="outer_image").first()
    assert imaging.materials == ["dry_film"]
    assert floor.lot.steps.filter(code="mask_coat").first().materials == ["mask_ink"]
    assert floor.lot.steps.filter(code="legend_print").first().materials == ["legend_ink"]
    assert floor.lot.steps.get(code="press_c1").materials == []


def test_expired_prepreg_is_refused_with_the_reason(floor, layup):
    op = floor.personas["operator"]
    # received 120 days ago; the site's prepreg shelf life is 90 days
    _material("PP-OLD", "prepreg", received_days_ago=120)
    with pytest.raises(Conflict) as exc:
        services.record_material(person=op, lot_step_id=layup.pk, code="PP-OLD")
    assert "PP-OLD" in exc.value.detail and "expired on" in exc.value.detail
    assert "shelf life of 90 days" in exc.value.detail
    assert not MaterialUse.objects.exists()


def test_unknown_and_wrong_kind_are_refused(floor, layup):
    op = floor.personas["operator"]
    with pytest.raises(InvalidInput, match="No material lot 'NOPE-1' is on record"):
        services.record_material(person=op, lot_step_id=layup.pk, code="NOPE-1")
    _material("INK-1", "mask_ink")
    with pytest.raises(InvalidInput, match="does not use"):
        services.record_material(person=op, lot_step_id=layup.pk, code="INK-1")


def test_layup_cannot_be_signed_without_its_materials(floor, layup):
    op = floor.personas["operator"]
    _material("CORE-1", "laminate")
    services.record_material(person=op, lot_step_id=layup.pk, code="core-1")  # any case
    with pytest.raises(Conflict, match="Prepreg, Copper foil"):
        services.complete_step(person=op, lot_step_id=layup.pk, pin=PIN)


def test_recall_from_a_prepreg_lot_finds_lot_job_and_customer(floor, layup):
    op = floor.personas["operator"]
    for code, kind in (("CORE-2", "laminate"), ("PP-2", "prepreg"), ("CU-2", "foil")):
        _material(code, kind)
        services.record_material(person=op, lot_step_id=layup.pk, code=code)
    services.complete_step(person=op, lot_step_id=layup.pk, pin=PIN)
    scope = access.scope_for(floor.personas["quality_engineer"].user)
    recall = genealogy.material_recall(scope, "PP-2")
    (row,) = recall.rows
    assert row.lot == floor.lot
    assert [j.number for j in row.jobs] == [floor.job.number]
    assert row.jobs[0].part_revision.part.customer.code == "TST"
    assert MaterialUse.objects.get(material_lot__code="PP-2").recorded_by == op
