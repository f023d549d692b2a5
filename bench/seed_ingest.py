"""Seed the ingest benchmark: one bench work center, an instrument token, N lots whose
only step is in progress there with a hole-wall copper plan of many samples.

Run through Django: `python bench/seed_ingest.py NLOTS` (prints the raw token).
"""

from __future__ import annotations

import os
import secrets
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")

import django

django.setup()

from django.contrib.auth.models import User  # noqa: E402
from django.db import connection, transaction  # noqa: E402
from django.utils import timezone  # noqa: E402

from routing.models import RoutingRevision  # noqa: E402
from shopfloor.floor.api_auth import hash_token  # noqa: E402
from shopfloor.floor.models import InstrumentToken, LotStep  # noqa: E402
from shopfloor.plant.models import Lot, Person, WorkCenter  # noqa: E402

PLAN = [
    {
        "quantity": "hole_wall_copper",
        "unit": "um",
        "min": 20.0,
        "max": None,
        "target": None,
        "samples": 1000,
        "source": "benchmark plan (invented)",
        "attribute": False,
        "deviation": False,
    }
]


def main(nlots: int, batch_lots: int = 0) -> None:
    with connection.cursor() as cursor:
        cursor.execute(
            "CREATE TABLE IF NOT EXISTS bench_ping (id bigserial primary key, "
            "payload text not null, at timestamptz not null default now())"
        )
    routing = RoutingRevision.objects.filter(status="released").first()
    assert routing is not None, "load_demo first: the bench lots borrow a released routing"
    wc, _ = WorkCenter.objects.get_or_create(
        code="bench_plating", defaults={"name": "Bench plating line"}
    )
    raw = secrets.token_urlsafe(32)
    with transaction.atomic():
        user, _ = User.objects.get_or_create(username="instrument-bench")
        person, _ = Person.objects.get_or_create(
            user=user,
            defaults={"badge_number": "INST-BENCH", "printed_name": "Bench gauge", "pin_hash": "!"},
        )
        person.work_centers.add(wc)
        InstrumentToken.objects.filter(user=user).delete()
        InstrumentToken.objects.create(
            name="bench gauge", work_center=wc, user=user, key_hash=hash_token(raw)
        )
        now = timezone.now()
        codes = [f"BENCH-{k:04d}" for k in range(nlots)]
        codes += [f"BATCH-{k:04d}" for k in range(batch_lots)]  # the batch-post phase's
        for code in codes:
            if Lot.objects.filter(code=code).exists():
                continue
            lot = Lot.objects.create(
                code=code, routing_revision=routing, status=Lot.Status.IN_PROCESS, started_at=now
            )
            LotStep.objects.create(
                lot=lot,
                position=10,
                code="bench_plate",
                name="Bench plate",
                work_center=wc,
                plan=PLAN,
                status=LotStep.Status.IN_PROGRESS,
                arrived_at=now,
                started_at=now,
                started_by=person,
            )
    print(raw)


if __name__ == "__main__":
    main(
        int(sys.argv[1]) if len(sys.argv) > 1 else 400,
        int(sys.argv[2]) if len(sys.argv) > 2 else 0,
    )
