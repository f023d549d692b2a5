"""`manage.py audit verify|seal`: check the sealed trail (every break named) or seal it."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from shopfloor.audit.models import AuditCheckpoint
from shopfloor.audit.services import seal, verify_chain


class Command(BaseCommand):
    help = (
        "Audit trail tools. 'verify' checks the chain of entries and checkpoints and lists "
        "every break (exit 1 if any); 'seal' chains the entries committed since the last "
        "sealing pass (the beat task does this every few seconds)."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("action", choices=["verify", "seal"])
        parser.add_argument(
            "--anchor",
            metavar="NUMBER:HASH",
            help="a checkpoint hash kept outside the database; verify fails unless the "
            "stored checkpoint NUMBER still has exactly this hash",
        )
        parser.add_argument(
            "--max-unsealed-age",
            type=int,
            metavar="SECONDS",
            help="report entries unsealed for longer than this (default: the "
            "AUDIT_SEAL_MAX_DELAY_SECONDS setting)",
        )

    def handle(self, *args: Any, **options: Any) -> None:
        if options["action"] == "seal":
            sealed = seal()
            self.stdout.write(
                f"sealed {sealed.sealed} entries in {sealed.checkpoints} checkpoints"
                + (
                    f"; latest checkpoint hash {sealed.last_checkpoint_hash}"
                    if sealed.last_checkpoint_hash
                    else ""
                )
            )
            return
        age = options.get("max_unsealed_age")
        report = verify_chain(max_unsealed_age=timedelta(seconds=age) if age is not None else None)
        anchor_problem = self._check_anchor(options.get("anchor"))
        if report.ok and not anchor_problem:
            latest = (
                f"; latest checkpoint {report.last_checkpoint[0]} hash {report.last_checkpoint[1]}"
                if report.last_checkpoint
                else ""
            )
            self.stdout.write(f"audit trail intact: {report.summary()}{latest}")
            return
        lines = []
        if not report.ok:
            where = (
                f"entry #{report.first_broken_seq}"
                if report.first_broken_seq is not None
                else "the sealing"
            )
            lines.append(
                f"audit trail BROKEN at {where}: {report.problem} ({report.summary()}; "
                f"{report.checked} sealed entries read)"
            )
            lines += [f"  - {p.message}" for p in report.problems]
            listed = len(report.problems)
            total = sum(report.counts.values())
            if total > listed:
                lines.append(f"  ... and {total - listed} more")
        if anchor_problem:
            lines.append(f"audit trail BROKEN at the anchor: {anchor_problem}")
        self.stderr.write("\n".join(lines))
        raise SystemExit(1)

    @staticmethod
    def _check_anchor(anchor: str | None) -> str:
        if not anchor:
            return ""
        number, _, digest = anchor.partition(":")
        if not number.isdigit() or len(digest) != 64:
            raise CommandError("--anchor takes NUMBER:HASH, e.g. 12:<64 hex digits>")

        stored = (
            AuditCheckpoint.objects.filter(number=int(number))
            .values_list("hash", flat=True)
            .first()
        )
        if stored is None:
            return f"checkpoint {number} no longer exists"
        if stored != digest.lower():
            return f"checkpoint {number} was rewritten (its hash is not the one kept outside)"
        return ""
