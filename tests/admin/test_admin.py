"""The admin: every page opens, evidence cannot be edited there, library edits are versions.

Evidence rules checked here are common practice for electronic records in regulated
manufacturing (records and e-signatures are never altered in place; a change is a new,
attributable record; cf. the intent of 21 CFR Part 11 §11.10(e) audit trails and
§11.70 signature/record linking, from memory): released routing revisions, their steps,
readings, audit entries and signatures have no change or delete permission in the admin.
"""

from __future__ import annotations

import copy
import json
from typing import Any

import pytest
from django.contrib import admin
from django.contrib.auth.models import User
from django.forms.models import model_to_dict
from django.test import Client, RequestFactory
from django.urls import reverse

from routing.builder.default_library import DEFAULT_LIBRARY, REQUIRED_STEP_CODES
from routing.models import ProcessLibraryVersion, RoutingRevision, RoutingStep
from shopfloor.audit.models import AuditEntry, Signature
from shopfloor.floor import services
from tests.factories import make_floor
from tests.helpers import advance_to

pytestmark = pytest.mark.django_db

#: Models whose rows only services create (no add page on purpose).
NO_ADD = {
    "orders.panellayout",
    "orders.planningsettings",
    "plant.sitesettings",  # one row, made on first use: edited, never a second added
    "routing.routingrevision",
    "routing.routingstep",
    "floor.lotstep",
    "floor.reading",
    "floor.idempotencyrecord",
    "floor.instrumenttoken",
    "audit.auditentry",
    "audit.signature",
    "quality.outboxevent",
    "quality.alert",
    "quality.nonconformance",
    "quality.hold",
    "plant.lot",
    "planning.forecastrun",  # written by the forecast task only
    "floor.materialuse",
    "floor.scraprecord",
    "floor.acceptedquantity",
    "shipping.shipment",
    "shipping.certificate",
}


@pytest.fixture
def shop() -> dict[str, Any]:
    """The small floor with one reading recorded, so every evidence table has rows."""
    floor = make_floor()
    supervisor = floor.personas["supervisor"]
    step = advance_to(floor.lot, "pattern_plate_copper", by=supervisor, start=True)
    reading = services.record_reading(
        person=supervisor,
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="hole_wall_copper", value=22, unit="um"),
        via="api",
    )
    return {"floor": floor, "reading": reading}


@pytest.fixture
def superuser() -> User:
    return User.objects.create_superuser("root-admin", "root@example.invalid", "pw-root-long")


@pytest.fixture
def admin_client(superuser) -> Client:
    client = Client()
    client.force_login(superuser)
    return client


def _label(model: Any) -> str:
    return f"{model._meta.app_label}.{model._meta.model_name}"


def _url(model: Any, view: str, *args: Any) -> str:
    return reverse(f"admin:{model._meta.app_label}_{model._meta.model_name}_{view}", args=args)


def test_every_registered_model_has_working_list_add_and_change_pages(
    shop, superuser, admin_client
):
    request = RequestFactory().get("/admin/")
    request.user = superuser
    registered = dict(admin.site._registry)
    assert len(registered) >= 20
    assert NO_ADD <= {_label(m) for m in registered}
    for model, model_admin in registered.items():
        label = _label(model)
        listing = admin_client.get(_url(model, "changelist"))
        assert listing.status_code == 200, (label, listing.status_code)
        add = admin_client.get(_url(model, "add"))
        if label in NO_ADD:
            assert not model_admin.has_add_permission(request), label
            assert add.status_code == 403, (label, add.status_code)
        else:
            assert add.status_code == 200, (label, add.status_code)
        row = model.objects.first()
        if row is not None:
            page = admin_client.get(_url(model, "change", row.pk))
            assert page.status_code == 200, (label, page.status_code)


def _evidence(shop) -> list[Any]:
    routing = shop["floor"].routing
    assert routing.is_released
    return [
        routing,
        RoutingStep.objects.filter(revision=routing).first(),
        shop["reading"],
        AuditEntry.objects.order_by("seq").first(),
        Signature.objects.first(),
    ]


def _snapshot(row: Any) -> dict[str, Any]:
    return json.loads(json.dumps(model_to_dict(type(row).objects.get(pk=row.pk)), default=str))


def test_evidence_cannot_be_changed_or_deleted_in_the_admin(shop, superuser, admin_client):
    request = RequestFactory().get("/admin/")
    request.user = superuser
    rows = _evidence(shop)
    assert all(row is not None for row in rows)
    for row in rows:
        model = type(row)
        label = _label(model)
        model_admin = admin.site._registry[model]
        assert not model_admin.has_change_permission(request, row), label
        assert not model_admin.has_delete_permission(request, row), label
        before = _snapshot(row)
        form = {k: ("" if v is None else v) for k, v in before.items()}
        form.update({"reason": "edited in admin", "value": 99, "printed_name": "Someone Else"})

        change = admin_client.post(_url(model, "change", row.pk), form)
        assert change.status_code == 403, (label, change.status_code)
        delete = admin_client.post(_url(model, "delete", row.pk), {"post": "yes"})
        assert delete.status_code == 403, (label, delete.status_code)
        bulk = admin_client.post(
            _url(model, "changelist"),
            {"action": "delete_selected", "_selected_action": [row.pk], "post": "yes"},
        )
        assert bulk.status_code in {200, 302}, (label, bulk.status_code)

        assert model.objects.filter(pk=row.pk).exists(), label
        assert _snapshot(row) == before, label


def _library_form(data: Any, note: str) -> dict[str, str]:
    return {"data": json.dumps(data), "note": note}


def test_library_edit_saves_a_new_version_and_keeps_the_old(shop, superuser, admin_client):
    current = ProcessLibraryVersion.objects.order_by("-version").first()
    old_data = copy.deepcopy(current.data)
    edited = copy.deepcopy(current.data)
    step_code = sorted(edited["steps"])[0]
    edited["steps"][step_code]["standard_minutes"] = 42

    reply = admin_client.post(
        _url(ProcessLibraryVersion, "change", current.pk),
        _library_form(edited, "longer standard time"),
    )

    assert reply.status_code == 302, reply.content[:2000]
    newest = ProcessLibraryVersion.objects.order_by("-version").first()
    assert newest.pk != current.pk
    assert newest.version == current.version + 1
    assert newest.note == "longer standard time"
    assert newest.created_by == superuser
    assert newest.data["steps"][step_code]["standard_minutes"] == 42
    current.refresh_from_db()
    assert current.data == old_data  # the edited row stays as it was
    # Routing revisions keep naming the library they were built with.
    assert RoutingRevision.objects.filter(pk=shop["floor"].routing.pk).exists()


def test_library_delete_is_refused(shop, admin_client):
    current = ProcessLibraryVersion.objects.order_by("-version").first()
    reply = admin_client.post(_url(ProcessLibraryVersion, "delete", current.pk), {"post": "yes"})
    assert reply.status_code == 403
    assert ProcessLibraryVersion.objects.filter(pk=current.pk).exists()


@pytest.mark.parametrize("breakage", ["required_step_removed", "unknown_work_center", "not_json"])
def test_broken_library_edit_shows_the_problem_and_saves_nothing(shop, admin_client, breakage):
    current = ProcessLibraryVersion.objects.order_by("-version").first()
    count = ProcessLibraryVersion.objects.count()
    before = copy.deepcopy(current.data)
    data = copy.deepcopy(current.data)
    required = sorted(REQUIRED_STEP_CODES & set(data["steps"]))[0]
    if breakage == "required_step_removed":
        del data["steps"][required]
        form = _library_form(data, "drop a step")
        expected = f"steps the builder needs are missing: {required}"
    elif breakage == "unknown_work_center":
        data["steps"][required]["work_center"] = "moon_base"
        form = _library_form(data, "move a step")
        expected = "work_center &#x27;moon_base&#x27; is not in work_centers"
    else:
        form = {"data": "{not json", "note": "typo"}
        expected = "Enter a valid JSON"

    reply = admin_client.post(_url(ProcessLibraryVersion, "change", current.pk), form)

    assert reply.status_code == 200
    page = reply.content.decode()
    assert "errornote" in page or "errorlist" in page
    assert expected in page, page[:3000]
    if breakage != "not_json":
        assert "The library was not saved" in page
    assert ProcessLibraryVersion.objects.count() == count
    current.refresh_from_db()
    assert current.data == before
    assert set(REQUIRED_STEP_CODES) <= set(current.data["steps"])


def test_default_library_is_what_version_one_holds(shop):
    """Sanity for the tests above: the stored v1 is the built-in library."""
    first = ProcessLibraryVersion.objects.get(version=1)
    assert first.data == json.loads(json.dumps(DEFAULT_LIBRARY))
