"""`manage.py spc evaluate DATA.json` (or `-` for stdin): chart a data set, print JSON.

A thin wrapper around shopfloor.core.spc.evaluate. Bad input (unreadable file, not
JSON, or data the SPC core refuses) exits with status 2 and one message on stderr;
never a traceback.
"""

from __future__ import annotations

import json
import sys
from argparse import ArgumentParser
from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError

from shopfloor.core import spc

EXIT_BAD_INPUT = 2


class Command(BaseCommand):
    help = "Statistical process control tools. 'evaluate FILE' charts a JSON data set."

    def add_arguments(self, parser: ArgumentParser) -> None:
        sub = parser.add_subparsers(dest="action", required=True, title="actions")
        evaluate = sub.add_parser(
            "evaluate",
            help="compute limits, run rules and capability for a JSON data set",
            description='Reads {"chart": ..., "values" or "subgroups": ..., "lsl", "usl", '
            '"rules", "limits"} and prints the result as JSON.',
        )
        evaluate.add_argument("data", help="path of a JSON file, or - to read standard input")
        evaluate.add_argument("--indent", type=int, default=2, help="JSON indent (default 2)")

    def handle(self, *args: Any, **options: Any) -> None:
        data = _load(options["data"])
        try:
            result = spc.evaluate(data)
        except spc.SpcInputError as exc:
            raise CommandError(f"invalid SPC input: {exc}", returncode=EXIT_BAD_INPUT) from exc
        self.stdout.write(json.dumps(result, indent=options["indent"] or None))


def _load(source: str) -> Any:
    try:
        if source == "-":
            text = sys.stdin.read()
            where = "standard input"
        else:
            text = Path(source).read_text(encoding="utf-8")
            where = source
    except (OSError, UnicodeDecodeError) as exc:
        raise CommandError(f"cannot read {source}: {exc}", returncode=EXIT_BAD_INPUT) from exc
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise CommandError(
            f"{where} is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})",
            returncode=EXIT_BAD_INPUT,
        ) from exc
