"""Factories for tests: invented people, parts, jobs and lots (no real names)."""

from __future__ import annotations

import datetime as dt
import itertools
from dataclasses import dataclass, field
from typing import Any

from django.contrib.auth.models import Group, User
from django.utils import timezone

from routing import services as routing_services
from routing.models import RoutingRevision
from shopfloor.plant import services as plant_services
from shopfloor.plant.models import (
    Customer,
    Equipment,
    Job,
    Lot,
    Part,
    PartRevision,
    Person,
    Qualification,
    Role,
    WorkCenter,
)

PIN = "4321"
_seq = itertools.count(1)

SPEC_4L_ENIG: dict[str, Any] = {
    "layers": 4,
    "ipc_class": 2,
    "board_thickness_mm": 1.6,
    "outer_copper_base_um": 17.5,
    "inner_copper_um": 35,
    "finish": "enig",
    "hard_gold_fingers": False,
    "solder_mask": {"sides": "both", "colour": "green"},
    "legend": {"sides": "both"},
    "profile": "route",
    "electrical_test": "flying_probe",
    "min_hole_mm": 0.3,
    "vias": [],
}


def make_person(
    role: str | None,
    badge: str | None = None,
    name: str | None = None,
    pin: str = PIN,
    work_centers: list[WorkCenter] | None = None,
    qualified_until: dt.date | None = None,
) -> Person:
    n = next(_seq)
    badge = badge or f"9{n:04d}"
    user = User.objects.create_user(username=f"user{badge}", password=f"pw-{badge}-long")
    if role:
        group, _ = Group.objects.get_or_create(name=role)
        user.groups.add(group)
    person = Person(user=user, badge_number=badge, printed_name=name or f"Tester {badge}")
    person.set_pin(pin)
    person.save()
    for wc in work_centers or []:
        person.work_centers.add(wc)
        Qualification.objects.create(
            person=person,
            work_center=wc,
            valid_until=qualified_until or (timezone.localdate() + dt.timedelta(days=365)),
        )
    return person


def make_part_revision(
    spec: dict[str, Any] | None = None, number: str | None = None
) -> PartRevision:
    n = next(_seq)
    customer, _ = Customer.objects.get_or_create(code="TST", defaults={"name": "Test Customer"})
    part = Part.objects.create(customer=customer, number=number or f"TP-{n:04d}")
    return PartRevision.objects.create(part=part, revision="A", build_spec=spec or SPEC_4L_ENIG)


def release_routing(
    part_revision: PartRevision, engineer: Person, overrides: list[dict[str, Any]] | None = None
) -> RoutingRevision:
    draft = routing_services.create_draft(
        person=engineer, part_revision_id=part_revision.pk, reason="test", overrides=overrides
    )
    return routing_services.release(person=engineer, revision_id=draft.pk, pin=PIN)


def make_job(
    part_revision: PartRevision,
    routing: RoutingRevision | None = None,
    due_in_days: int = 10,
    quantity: int = 100,
) -> Job:
    n = next(_seq)
    return Job.objects.create(
        number=f"J{n:05d}",
        part_revision=part_revision,
        quantity=quantity,
        due_date=timezone.localdate() + dt.timedelta(days=due_in_days),
        ipc_class=part_revision.build_spec.get("ipc_class", 2),
        routing_revision=routing,
    )


def make_lot(routing: RoutingRevision, job: Job, panels: int = 2, code: str | None = None) -> Lot:
    n = next(_seq)
    return plant_services.create_lot(
        actor=None,
        code=code or f"L{n:05d}",
        routing_revision=routing,
        images=[(job, 4)],
        panels=panels,
    )


@dataclass
class Floor:
    personas: dict[str, Person]
    routing: RoutingRevision
    job: Job
    lot: Lot
    work_centers: dict[str, WorkCenter] = field(default_factory=dict)
    gauge: Equipment | None = None


def make_floor() -> Floor:
    from shopfloor.floor.site_lists import ensure_site_lists

    ensure_site_lists()  # a transactional test's flush empties what the migrations seeded
    routing_services.ensure_library()
    centers = {wc.code: wc for wc in WorkCenter.objects.all()}
    everywhere = list(centers.values())
    personas = {
        "operator": make_person(Role.OPERATOR, "1001", "Olu Operator", work_centers=everywhere),
        "supervisor": make_person(
            Role.SUPERVISOR, "1002", "Sam Supervisor", work_centers=everywhere
        ),
        "process_engineer": make_person(Role.PROCESS_ENGINEER, "1003", "Pat Engineer"),
        "quality_engineer": make_person(Role.QUALITY_ENGINEER, "1004", "Quinn Quality"),
        "outsider": make_person(None, "1005", "Otto Outsider"),
        "planner": make_person(Role.PLANNER, "1019", "Pia Planner"),
    }
    part_revision = make_part_revision()
    routing = release_routing(part_revision, personas["process_engineer"])
    job = make_job(part_revision, routing)
    lot = make_lot(routing, job)
    first_wc = lot.steps.order_by("position").first().work_center
    gauge = Equipment.objects.create(
        work_center=first_wc,
        code=f"G-{first_wc.code}",
        name="Test gauge",
        is_gauge=True,
        calibration_due=timezone.localdate() + dt.timedelta(days=90),
    )
    return Floor(
        personas=personas, routing=routing, job=job, lot=lot, work_centers=centers, gauge=gauge
    )


def release_routing_from(
    part_revision: PartRevision, engineer: Person, overrides: list[dict[str, Any]] | None = None
) -> RoutingRevision:
    """A new released revision for a part revision that already has one."""
    draft = routing_services.create_draft(
        person=engineer,
        part_revision_id=part_revision.pk,
        reason="test change",
        overrides=overrides,
    )
    return routing_services.release(person=engineer, revision_id=draft.pk, pin=PIN)
