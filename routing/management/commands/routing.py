"""`manage.py routing preview SPEC.json`: the routing a build spec would get, nothing saved.

Exit codes: 0 preview printed; 2 the spec (or the file) has problems, listed on stderr
(as JSON with --format json), never a traceback.
"""

from __future__ import annotations

import json
import sys
from typing import Any

from django.core.management.base import BaseCommand, CommandParser

from routing import services
from routing.api import split_preview_body
from routing.builder import render
from shopfloor.errors import DomainError

EXIT_BAD_INPUT = 2


class BadInput(Exception):
    def __init__(self, detail: str, problems: list[dict[str, Any]] | None = None) -> None:
        super().__init__(detail)
        self.detail = detail
        self.problems = problems or []


class Command(BaseCommand):
    help = "Work with routings. 'preview SPEC.json' prints the routing a build spec would get."

    def add_arguments(self, parser: CommandParser) -> None:
        sub = parser.add_subparsers(dest="action", required=True)
        preview = sub.add_parser("preview", help="Build a routing from a spec without saving it")
        preview.add_argument("spec", help="Path to the build spec JSON file, or - for stdin")
        preview.add_argument(
            "--format",
            choices=["json", "text"],
            default="text",
            help="json: the preview contract; text: a table for people",
        )

    def handle(self, *args: Any, **options: Any) -> None:
        fmt = options["format"]
        try:
            spec, overrides = self._read(options["spec"])
            try:
                contract = services.preview(spec, overrides)
            except DomainError as exc:
                raise BadInput(exc.detail, exc.problems) from exc
        except BadInput as exc:
            self._fail(exc, fmt)
            return
        if fmt == "json":
            self.stdout.write(json.dumps(contract, indent=2, sort_keys=False))
        else:
            self.stdout.write(_text(spec, overrides), ending="")

    def _read(self, where: str) -> tuple[Any, list[dict[str, Any]]]:
        try:
            if where == "-":
                text = sys.stdin.read()
            else:
                with open(where, encoding="utf-8") as handle:
                    text = handle.read()
        except (OSError, UnicodeDecodeError) as exc:
            raise BadInput(f"Cannot read {where}: {exc}") from exc
        try:
            data = json.loads(text, parse_constant=_refuse_constant)
        except ValueError as exc:
            raise BadInput(f"{where} is not valid JSON: {exc}") from exc
        try:
            return split_preview_body(data)
        except DomainError as exc:
            raise BadInput(exc.detail, exc.problems) from exc

    def _fail(self, exc: BadInput, fmt: str) -> None:
        if fmt == "json":
            body: dict[str, Any] = {"error": "invalid", "detail": exc.detail}
            if exc.problems:
                body["problems"] = exc.problems
            self.stderr.write(json.dumps(body, indent=2))
        else:
            self.stderr.write(exc.detail)
            for p in exc.problems:
                allowed = p.get("allowed")
                shown = ", ".join(map(str, allowed)) if isinstance(allowed, list) else allowed
                line = f"  {p.get('field')}: {p.get('problem')} (given: {p.get('value')!r})"
                if shown not in (None, ""):
                    line += f"; allowed: {shown}"
                self.stderr.write(line)
        sys.exit(EXIT_BAD_INPUT)


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not allowed in a build spec; give a finite number")


def _text(spec: Any, overrides: list[dict[str, Any]]) -> str:
    """The text table from the pure core (the spec was already validated by preview)."""
    from routing.builder import build as builder
    from routing.builder import overrides as overrides_core
    from routing.builder import spec as spec_core

    _, library = services.current_library()
    routing = builder.build_routing(spec_core.parse_spec(spec), library)
    if overrides:
        routing = overrides_core.apply_overrides(
            routing, [overrides_core.Override.from_dict(o) for o in overrides]
        )
    return render.routing_to_text(routing)
