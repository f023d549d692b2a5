"""`manage.py load_demo`: load the invented demo shop (safe to run twice).

Everything goes through the same services the floor uses: routings are built from the
build specs and released with the engineer's signature, lots are advanced by recording
in-window readings and signing steps, and the lots meant to be on hold get an
out-of-window reading, so the alert, hold and NCR come from the real alert task.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import zlib
from pathlib import Path
from typing import Any

from django.conf import settings
from django.contrib.auth.models import Group, User
from django.core.management.base import BaseCommand, CommandParser
from django.db import transaction
from django.utils import timezone

from routing import services as routing_services
from routing.models import RoutingRevision
from shopfloor.chemistry import demo as baths
from shopfloor.core import judging, units
from shopfloor.floor import services as floor
from shopfloor.floor.models import LotStep
from shopfloor.floor.site_lists import ensure_site_lists
from shopfloor.orders import services as orders
from shopfloor.planning import services as planning_services
from shopfloor.plant import services as plant
from shopfloor.plant.models import (
    Customer,
    Equipment,
    Job,
    Lot,
    MaterialLot,
    Part,
    PartRevision,
    Person,
    Qualification,
    Role,
    WorkCenter,
)
from shopfloor.quality.services import deadlines
from shopfloor.shipping import services as shipping

DEFAULT_FILE = Path(settings.BASE_DIR) / "fixtures" / "demo_shop.json"


def in_window_value(window: dict[str, Any], sample: int, lot_code: str = "") -> float:
    """A plausible conforming value: centred in two-sided windows, a margin above a minimum.

    Samples of one lot spread a little (up to 3 % of the window) and each lot sits a
    little off the centre (up to 2 %), so the demo's SPC charts look like a process, not
    a flat line; deterministic, so loading twice gives the same values.
    """
    lo, hi = _tightest(window)
    target = window.get("target")
    lot_shift = (zlib.crc32(lot_code.encode()) % 5 - 2) / 100.0
    wobble = ((sample * 37) % 7 - 3) / 100.0 + lot_shift
    if window.get("quantity") in units.DEFECTIVES_QUANTITIES:
        return zlib.crc32(lot_code.encode()) % 3  # boards failed e-test: 0 to 2 per lot
    if window.get("attribute"):
        return 0
    if target is not None:
        base = float(target)
    elif lo is not None and hi is not None:
        base = (float(lo) + float(hi)) / 2
    elif lo is not None:
        base = float(lo) * 1.2 if lo else 1.0
    elif hi is not None:
        base = float(hi) * 0.6
    else:
        base = 1.0
    span = (float(hi) - float(lo)) if lo is not None and hi is not None else abs(base) * 0.2
    return round(base + wobble * span, 4)


def _tightest(window: dict[str, Any]) -> tuple[float | None, float | None]:
    """The narrowest limits over every criterion of a window (the class average for the
    mean and the thin-area minimum for each reading: a value must clear both)."""
    entries = [e for e in judging.criteria_of(window) if judging.applies_to(e) != "range"]
    lows = [float(e["min"]) for e in entries if e.get("min") is not None]
    highs = [float(e["max"]) for e in entries if e.get("max") is not None]
    return (max(lows) if lows else None), (min(highs) if highs else None)


def failing_set(group: judging.QuantityPlan) -> list[float]:
    """A real failure under the plan's own criteria: for a set with a mean criterion, a
    set whose every sample clears the each-reading minimum but whose average falls short
    (the class 3 hole-copper case); otherwise one sample outside its window."""
    mean = next((e for e in group.set_entries if judging.applies_to(e) == "mean"), None)
    each = group.each[0] if group.each else {}
    if mean is not None and mean.get("min") is not None:
        floor_ = float(each.get("min") or 0.0)
        target = float(mean["min"]) - 0.4 * (float(mean["min"]) - floor_)
        spread = [0.6, -0.3, 0.2, -0.4, 0.1, -0.2, 0.3, -0.1, 0.0, 0.0]
        return [round(target + spread[i % len(spread)], 2) for i in range(group.samples)]
    window = group.window()
    values = [in_window_value(window, i + 1) for i in range(group.samples)]
    values[0] = out_of_window_value(window)
    return values


def out_of_window_value(window: dict[str, Any]) -> float:
    lo, hi = window.get("min"), window.get("max")
    if window.get("attribute"):
        return float(hi or 0) + 2
    if lo is not None and lo > 0:
        return round(float(lo) * 0.75, 4)
    if hi is not None:
        return round(float(hi) * 1.3 + 1, 4)
    return -1.0


def _images_per_panel(j: dict[str, Any]) -> int:
    """Boards per panel so the demo's panels cover its order with an 8 % allowance; a job
    marked "short" keeps 6 per panel, so the demo shows a shortfall and make-up panels."""
    if j.get("short"):
        return 6
    return max(1, math.ceil(j["quantity"] * 1.08 / j["panels"]))


class Command(BaseCommand):
    help = "Load the invented demo shop (people, work centers, jobs, lots). Runs twice safely."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--file", default=str(DEFAULT_FILE))

    def handle(self, *args: Any, **options: Any) -> None:
        data = json.loads(Path(options["file"]).read_text(encoding="utf-8"))
        routing_services.ensure_library(note="built-in library (demo)")

        ensure_site_lists()
        people = self._people(data)
        self._plant(data)
        engineer = next(p for p in people.values() if Role.PROCESS_ENGINEER in p.roles())
        operator = people[data["people"][0]["badge"]]
        routings = self._routings(data, engineer)

        baths.ensure_tanks()  # before the lots move, so wet steps record their tanks
        created = 0
        for job_data in data["jobs"]:
            if Job.objects.filter(number=job_data["number"]).exists():
                continue
            self._job(job_data, routings, operator, data["pin"])
            created += 1
        # Beat runs these every few minutes in production; run them once so the demo's late
        # and at-risk jobs and any queue-time overruns show up straight away.
        # Capacities and a first finish forecast (beat re-runs it every few minutes), so
        # the board shows P50 / P90 and forecast-based due-date risk on first start.

        planning_services.ensure_demo_capacity()
        planning_services.run_forecast("demo")
        deadlines.check_due_dates()
        deadlines.check_queue_times()
        lab = next((p for p in people.values() if Role.LAB_TECHNICIAN in p.roles()), engineer)
        baths.history(lab, engineer, data["pin"])
        baths.after_jobs(lab, engineer, data["pin"])
        self.stdout.write(
            f"demo shop ready: {Job.objects.count()} jobs, {Lot.objects.count()} lots "
            f"({created} new this run)"
        )

    # -- people and plant -------------------------------------------------------------

    def _people(self, data: dict[str, Any]) -> dict[str, Person]:
        for role in Role.values:
            Group.objects.get_or_create(name=role)
        admin = data["admin"]
        all_centers = list(WorkCenter.objects.all())
        if not User.objects.filter(username=admin["username"]).exists():
            user = User.objects.create_superuser(admin["username"], "", admin["password"])
            user.groups.add(Group.objects.get(name=Role.ADMIN))
            # the administrator also gets a badge, so the floor, board and quality pages
            # (which sign and scope by badge) work for the admin login too
            site_admin = Person(user=user, badge_number=admin["badge"], printed_name="Site admin")
            site_admin.set_pin(data["pin"])
            site_admin.save()
            site_admin.work_centers.add(*all_centers)
        people: dict[str, Person] = {}
        for p in data["people"]:
            person = Person.objects.filter(badge_number=p["badge"]).first()
            if person is None:
                user = User.objects.create_user(
                    username=f"badge{p['badge']}",
                    password=None,
                    first_name=p["name"].split()[0],
                    last_name=p["name"].split()[-1],
                )
                user.groups.add(Group.objects.get(name=p["role"]))
                person = Person(user=user, badge_number=p["badge"], printed_name=p["name"])
                person.set_pin(data["pin"])
                person.save()
                centers = (
                    all_centers
                    if p["work_centers"] == "*"
                    else [wc for wc in all_centers if wc.code in p["work_centers"]]
                )
                person.work_centers.add(*centers)
                for wc in centers:
                    Qualification.objects.get_or_create(
                        person=person,
                        work_center=wc,
                        defaults={"valid_until": timezone.localdate() + dt.timedelta(days=365)},
                    )
            people[p["badge"]] = person
        return people

    def _plant(self, data: dict[str, Any]) -> None:
        for code, emails in data.get("notify", {}).items():
            WorkCenter.objects.filter(code=code, notify_emails="").update(notify_emails=emails)
        for e in data["equipment"]:
            wc = WorkCenter.objects.filter(code=e["work_center"]).first()
            if wc is None:
                continue
            due = (
                timezone.localdate() + dt.timedelta(days=e["cal_days"]) if e.get("gauge") else None
            )
            Equipment.objects.get_or_create(
                code=e["code"],
                defaults={
                    "work_center": wc,
                    "name": e["name"],
                    "is_gauge": e.get("gauge", False),
                    "calibration_due": due,
                },
            )
        for m in data["material_lots"]:
            MaterialLot.objects.get_or_create(
                code=m["code"],
                defaults={
                    "kind": m["kind"],
                    "description": m["description"],
                    "received_on": timezone.localdate()
                    - dt.timedelta(days=m.get("received_days", 20)),
                },
            )

    def _routings(self, data: dict[str, Any], engineer: Person) -> dict[str, RoutingRevision]:
        routings: dict[str, RoutingRevision] = {}
        for p in data["parts"]:
            customer, _ = Customer.objects.get_or_create(
                code=p["customer"], defaults={"name": p["customer"]}
            )
            for c in data["customers"]:
                Customer.objects.filter(code=c["code"]).update(name=c["name"])
            part, _ = Part.objects.get_or_create(
                customer=customer, number=p["number"], defaults={"description": p["description"]}
            )
            part_revision, _ = PartRevision.objects.get_or_create(
                part=part, revision=p["revision"], defaults={"build_spec": p["spec"]}
            )
            released = (
                RoutingRevision.objects.filter(
                    part_revision=part_revision, status=RoutingRevision.Status.RELEASED
                )
                .order_by("-number")
                .first()
            )
            if released is None:
                draft = routing_services.create_draft(
                    person=engineer, part_revision_id=part_revision.pk, reason="first routing"
                )
                released = routing_services.release(
                    person=engineer, revision_id=draft.pk, pin=data["pin"]
                )
            routings[p["number"]] = released
        return routings

    # -- jobs and lots ----------------------------------------------------------------

    def _job(
        self, j: dict[str, Any], routings: dict[str, RoutingRevision], operator: Person, pin: str
    ) -> None:
        routing = routings[j["part"]]
        if j.get("entered_only") or j.get("release_boards_per_panel"):
            self._planned_job(j, routing)
            return
        with transaction.atomic():
            job = Job.objects.create(
                number=j["number"],
                part_revision=routing.part_revision,
                quantity=j["quantity"],
                due_date=timezone.localdate() + dt.timedelta(days=j["due_days"]),
                ipc_class=routing.ipc_class,
                routing_revision=routing,
                customer_spec_notes=j.get("note", ""),
            )
            lot = plant.create_lot(
                actor=operator.user,
                code=j["lot"],
                routing_revision=routing,
                images=[(job, _images_per_panel(j))],
                panels=j["panels"],
            )
        for _ in range(j["advance"]):
            step = LotStep.objects.current_for(lot)
            if step is None:
                break
            if j.get("hold") and step.plan:
                self._hold(lot, step, operator)
                return
            floor.start_step(person=operator, lot_step_id=step.pk)
            self._materials(step, operator)
            for group in judging.group_plan(step.plan):
                window = group.window()
                for sample in range(1, group.samples + 1):
                    floor.record_reading(
                        person=operator,
                        lot_step_id=step.pk,
                        data=floor.ReadingInput(
                            quantity=group.quantity,
                            value=in_window_value(window, sample, lot.code),
                            unit=group.unit,
                            sample_index=sample,
                            position=f"coupon {sample}",
                        ),
                    )
            if floor.is_final_inspection(step):
                good = floor.lot_good_boards(lot)
                floor.record_acceptance(
                    person=operator,
                    lot_step_id=step.pk,
                    accepted={job.number: good.get(job.pk, 0)},
                )
            floor.complete_step(person=operator, lot_step_id=step.pk, pin=pin)
            lot.refresh_from_db()
        if j.get("ship"):
            shipping.ship(
                person=self._shipper(),
                job_number=job.number,
                quantity=j["ship"],
                lot_codes=[lot.code],
            )
        if j.get("hold"):
            # no measured step reached within 'advance'; find the next measured one
            step = LotStep.objects.current_for(lot)
            while step is not None and not step.plan:
                floor.start_step(person=operator, lot_step_id=step.pk)
                self._materials(step, operator)
                floor.complete_step(person=operator, lot_step_id=step.pk, pin=pin)
                step = LotStep.objects.current_for(lot)
            if step is not None:
                self._hold(lot, step, operator)

    def _planned_job(self, j: dict[str, Any], routing: RoutingRevision) -> None:
        """A job entered (and perhaps released) by the planner through the planner's
        services, as a person would on the job pages."""

        planner = Person.objects.filter(user__groups__name=Role.PLANNER).order_by("pk").first()
        part_revision = routing.part_revision
        job = orders.enter_job(
            person=planner,
            data=orders.JobInput(
                number=j["number"],
                customer=part_revision.part.customer.code,
                part_number=part_revision.part.number,
                part_revision=part_revision.revision,
                quantity=j["quantity"],
                due_date=timezone.localdate() + dt.timedelta(days=j["due_days"]),
                ipc_class=routing.ipc_class,
                customer_spec_notes=j.get("note", ""),
            ),
        )
        if j.get("release_boards_per_panel"):
            orders.release_job(
                person=planner, number=job.number, boards_per_panel=j["release_boards_per_panel"]
            )

    def _materials(self, step: LotStep, operator: Person) -> None:
        """Scan a usable material lot of every kind the step consumes (as the tablet does)."""
        for kind in step.materials or []:
            choices = floor.usable_material_lots(step).get(kind) or []
            if choices:
                floor.record_material(
                    person=operator, lot_step_id=step.pk, code=choices[0][0].code, via="demo"
                )

    def _shipper(self) -> Person:
        """Whoever ships in the demo: a planner if there is one, else the administrator."""
        person = (
            Person.objects.filter(user__groups__name=Role.PLANNER).order_by("badge_number").first()
            or Person.objects.filter(user__is_superuser=True).order_by("badge_number").first()
        )
        assert person is not None, "the demo needs a planner or an administrator badge"
        return person

    def _hold(self, lot: Lot, step: LotStep, operator: Person) -> None:
        """Record a sample set that really fails its plan (confirmed, as an operator
        would), so the alert, hold and NCR come from the real judging and alert task."""
        floor.start_step(person=operator, lot_step_id=step.pk)
        groups = [
            g
            for g in judging.group_plan(step.plan)
            if any(e.get("min") is not None or e.get("max") is not None for e in g.entries)
        ]
        group = next((g for g in groups if g.quantity == "hole_wall_copper"), groups[0])
        for sample, value in enumerate(failing_set(group), start=1):
            floor.record_reading(
                person=operator,
                lot_step_id=step.pk,
                data=floor.ReadingInput(
                    quantity=group.quantity,
                    value=value,
                    unit=group.unit,
                    sample_index=sample,
                    position=f"coupon {sample}",
                    confirm_out_of_window=True,
                ),
            )
