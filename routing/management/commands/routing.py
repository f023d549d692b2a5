"""`manage.py routing preview SPEC.json`: the routing a build spec would get, nothing saved.
`manage.py routing import-design FILE.xml`: the draft build spec an IPC-2581 file gives.

Exit codes: 0 preview (or import) printed; 2 the spec or the file has problems, listed on
stderr (as JSON with --format json), never a traceback.
"""

from __future__ import annotations

import json
import sys
from typing import Any

from django.core.management.base import BaseCommand, CommandParser

from routing import services
from routing.api import split_preview_body
from routing.builder import build as builder
from routing.builder import overrides as overrides_core
from routing.builder import render
from routing.builder import spec as spec_core
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

        design = sub.add_parser(
            "import-design",
            help="Read an IPC-2581 design file (revision B, B1 or C) into a draft build spec",
        )
        design.add_argument("file", help="Path to the IPC-2581 XML file")
        design.add_argument(
            "--format",
            choices=["json", "text"],
            default="text",
            help='json: {"spec", "to_fill", "warnings", "source"}; text: a summary for people',
        )

    def handle(self, *args: Any, **options: Any) -> None:
        fmt = options["format"]
        if options["action"] == "import-design":
            self._import_design(options["file"], fmt)
            return
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

    def _import_design(self, where: str, fmt: str) -> None:
        """Print the draft spec of a design file; nothing is saved."""
        try:
            with open(where, "rb") as handle:
                result = services.import_design(handle, name=where)
        except OSError as exc:
            self._fail(BadInput(f"Cannot read {where}: {exc.strerror or exc}"), fmt)
            return
        except DomainError as exc:
            self._fail(BadInput(exc.detail, exc.problems), fmt)
            return
        if fmt == "json":
            self.stdout.write(json.dumps(result.as_dict(), indent=2))
        else:
            self.stdout.write(_import_text(result), ending="")

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


def _import_text(result: Any) -> str:
    """A design import for people: the spec, what came from the file, what to fill in."""
    src = result.source
    exporter = src.get("exporter") or "not stated"
    lines = [
        f"IPC-2581 revision {src['revision']}, units {src['units']}, exporter: {exporter}",
        "",
        "Build spec (from the file):",
    ]
    for key, value in result.spec.items():
        if key == "stackup":
            continue
        lines.append(f"  {key}: {json.dumps(value)}")
    basis = src.get("thickness_basis")
    if basis:
        lines.append(f"  board thickness is measured {basis}")
    if "stackup" in result.spec:
        lines.append("Stack-up, top to bottom:")
        for row in result.spec["stackup"]:
            material = f" ({row['material']})" if row.get("material") else ""
            lines.append(f"  {row['kind']:<8} {row['thickness_um']:>8g} um{material}")
    if result.vias:
        lines.append("Vias:")
        for v in result.vias:
            lines.append(
                f"  L{v.from_layer}-L{v.to_layer} {v.kind} {v.drill}: {v.holes} holes, "
                f"smallest {v.min_hole_mm} mm; {v.reason} [{v.source}]"
            )
        lines.append(f"  microvia rule: {src.get('microvia_rule', '')}")
    panel = src.get("panel")
    if panel:
        lines.append(
            f"Panel {panel['step']}: {panel['width_mm']} x {panel['height_mm']} mm, "
            f"{panel['boards']} boards"
        )
    lines.append("To fill in: " + (", ".join(result.to_fill) or "nothing"))
    for w in result.warnings:
        lines.append(f"Warning: {w}")
    return "\n".join(lines) + "\n"


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not allowed in a build spec; give a finite number")


def _text(spec: Any, overrides: list[dict[str, Any]]) -> str:
    """The text table from the pure core (the spec was already validated by preview)."""

    _, library = services.current_library()
    routing = builder.build_routing(spec_core.parse_spec(spec), library)
    if overrides:
        routing = overrides_core.apply_overrides(
            routing, [services.parse_override(o) for o in overrides]
        )
    return render.routing_to_text(routing)
