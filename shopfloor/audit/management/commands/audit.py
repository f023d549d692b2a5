"""`manage.py audit verify`: check the hash chain and name the first broken entry."""

from __future__ import annotations

from typing import Any

from django.core.management.base import BaseCommand, CommandParser

from shopfloor.audit.services import verify_chain


class Command(BaseCommand):
    help = "Audit trail tools. 'verify' checks the hash chain (exit 1 if broken)."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("action", choices=["verify"])

    def handle(self, *args: Any, **options: Any) -> None:
        report = verify_chain()
        if report.ok:
            self.stdout.write(f"audit trail intact: {report.checked} entries checked")
            return
        self.stderr.write(
            f"audit trail BROKEN at entry #{report.first_broken_seq}: {report.problem} "
            f"({report.checked} entries verified before it)"
        )
        raise SystemExit(1)
