"""`manage.py issue_instrument_token NAME WORK_CENTER`: a credential for a gauge or tester.

The instrument gets its own user and Person (badge "INST-<name>", no usable PIN, so it can
never sign a step), which is who its readings are recorded by. The raw token is printed
once; only its SHA-256 is stored, so a lost token is replaced, not recovered.
"""

from __future__ import annotations

import re
import secrets
from typing import Any

from django.contrib.auth.hashers import make_password
from django.contrib.auth.models import User
from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.db import transaction

from shopfloor.audit import services as audit
from shopfloor.floor.api_auth import hash_token
from shopfloor.floor.models import InstrumentToken
from shopfloor.plant.models import Person, WorkCenter

NAME_PATTERN = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,59}$")


class Command(BaseCommand):
    help = "Issue an API token for an instrument at one work center (shown once)."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("name", help="Instrument name, e.g. xrf-2 (letters, digits, - _ .)")
        parser.add_argument("work_center", help="Work center code, e.g. plating")

    def handle(self, *args: Any, **options: Any) -> None:
        name: str = options["name"].strip()
        if not NAME_PATTERN.match(name):
            raise CommandError(
                f"Instrument name {name!r} is not allowed: use 1-60 letters, digits, '-', '_' "
                "or '.', starting with a letter or digit."
            )
        center = WorkCenter.objects.filter(code=options["work_center"]).first()
        if center is None:
            codes = ", ".join(WorkCenter.objects.values_list("code", flat=True)) or "none yet"
            raise CommandError(
                f"No work center {options['work_center']!r}. Known work centers: {codes}."
            )
        badge = f"INST-{name}"[:20]
        username = f"instrument-{name}"
        if (
            User.objects.filter(username=username).exists()
            or Person.objects.filter(badge_number=badge).exists()
        ):
            raise CommandError(
                f"An instrument named {name!r} already exists. Withdraw its token in the admin "
                "(untick active) and issue one under a new name."
            )
        raw = secrets.token_urlsafe(32)
        with transaction.atomic():
            user = User.objects.create_user(username=username)
            user.set_unusable_password()
            user.save()
            # '!' prefix: Django's unusable-password marker, so no PIN ever matches.
            person = Person.objects.create(
                user=user, badge_number=badge, printed_name=name, pin_hash=make_password(None)
            )
            person.work_centers.add(center)
            token = InstrumentToken.objects.create(
                name=name, work_center=center, user=user, key_hash=hash_token(raw)
            )
            audit.record(
                actor=None,
                action="instrument_token.issued",
                object_type="instrument_token",
                object_id=token.pk,
                after={"name": name, "work_center": center.code, "badge": badge},
            )
        self.stdout.write(f"Instrument {name} at {center.code} (badge {badge}).")
        self.stdout.write("Token (shown once; store it in the instrument's configuration):")
        self.stdout.write(raw)
