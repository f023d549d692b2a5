"""The one persona and factory module for tests: invented people, parts, jobs, lots,
tanks and the small floor (no real names). Walking a lot and recording readings through
the services is in tests/helpers.py."""

from __future__ import annotations

import datetime as dt
import itertools
from dataclasses import dataclass, field
from typing import Any

from django.contrib.auth.models import Group, User
from django.utils import timezone

from routing import services as routing_services
from routing.models import RoutingRevision
from shopfloor.chemistry.models import PlanParameter, Tank
from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant import services as plant_services
from shopfloor.plant.models import (
    Customer,
    Equipment,
    Job,
    Lot,
    Panel,
    PanelImage,
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


# --- many lots fast (bulk_create) and their readings, for the board and history tests

_n = itertools.count(1)


def bulk_lots(
    routing,
    job: Job,
    count: int,
    centers: list[WorkCenter],
    prefix: str = "B",
    arrived_minutes_ago: int = 30,
) -> list[Lot]:
    """`count` lots of one panel each; step 1 done, step 2 current (at centers[i % k]),
    step 3 waiting. Built with bulk_create: 4 INSERTs whatever the count."""
    now = timezone.now()
    batch = next(_n)
    lots = Lot.objects.bulk_create(
        [
            Lot(
                code=f"{prefix}{batch:02d}-{i:05d}",
                routing_revision=routing,
                status=Lot.Status.IN_PROCESS,
                panel_count=1,
                started_at=now - dt.timedelta(hours=5),
            )
            for i in range(count)
        ]
    )
    panels = Panel.objects.bulk_create([Panel(serial=f"{lot.code}-P01", lot=lot) for lot in lots])
    PanelImage.objects.bulk_create([PanelImage(panel=p, job=job, count=4) for p in panels])
    steps = []
    for i, lot in enumerate(lots):
        wc = centers[i % len(centers)]
        steps += [
            LotStep(
                lot=lot,
                position=10,
                code="first",
                name="First step",
                work_center=wc,
                status=LotStep.Status.DONE,
                arrived_at=now - dt.timedelta(hours=5),
                completed_at=now - dt.timedelta(hours=1),
            ),
            LotStep(
                lot=lot,
                position=20,
                code="second",
                name="Second step",
                work_center=wc,
                status=LotStep.Status.WAITING,
                standard_minutes=40,
                queue_time_limit_minutes=60,
                arrived_at=now - dt.timedelta(minutes=arrived_minutes_ago),
            ),
            LotStep(
                lot=lot,
                position=30,
                code="third",
                name="Third step",
                work_center=centers[(i + 1) % len(centers)],
                standard_minutes=20,
            ),
        ]
    LotStep.objects.bulk_create(steps)
    return lots


def bulk_readings(
    step: LotStep,
    operator,
    count: int,
    quantity: str = "copper_thickness",
    low: float = 20.0,
    high: float = 30.0,
) -> None:
    now = timezone.now()
    window = {
        "quantity": quantity,
        "unit": "um",
        "min": low,
        "max": high,
        "target": 25.0,
        "source": "IPC-6012 (test window)",
        "samples": count,
    }
    Reading.objects.bulk_create(
        [
            Reading(
                lot_step=step,
                quantity=quantity,
                entered_value=str(25 + (i % 7) * 0.5),
                entered_unit="um",
                value=25 + (i % 7) * 0.5,
                unit="um",
                sample_index=1,
                operator=operator,
                captured_at=now - dt.timedelta(seconds=count - i),
                window=window,
                in_window=True,
            )
            for i in range(count)
        ]
    )


# --- bath chemistry: a lab technician and an acid copper tank


def lab_tech() -> Any:
    return make_person(Role.LAB_TECHNICIAN, "1010", "Lia Lab")


def copper_tank(**extra: Any) -> Tank:
    """4000 L acid copper at the plating line with a copper sulfate and a chloride row.
    Windows: common practice (a supplier sheet's typical range), as in the demo."""
    tank = Tank.objects.create(
        work_center=WorkCenter.objects.get(code="plating"),
        code="T-CU",
        name="Acid copper",
        kind="acid_copper",
        volume_l=4000,
        max_volume_l=4200,
        step_codes=["pattern_plate_copper", "panel_plate"],
        **extra,
    )
    PlanParameter.objects.create(
        tank=tank, code="copper_sulfate", name="Copper sulfate", measure="mass_concentration",
        unit="g/L", low=60, target=75, high=90, source="common practice", frequency="daily",
        method="EDTA titration", stock_strength=300, stock_name="copper sulfate solution",
    )  # fmt: skip
    PlanParameter.objects.create(
        tank=tank, code="chloride", name="Chloride", measure="mass_concentration", unit="mg/L",
        low=0.040, target=0.060, high=0.080, source="common practice", frequency="per_shift",
        method="silver nitrate titration", stock_strength=428, position=1,
    )  # fmt: skip
    return tank


def new_lot(floor: Any, code: str | None = None, panels: int = 2) -> Lot:
    """Another lot on the small floor's routing and job."""
    return make_lot(floor.routing, floor.job, panels=panels, code=code)
