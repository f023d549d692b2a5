"""Routing output: the JSON contract for the API, a text table for people, and diffs.

Why a fixed dict contract: the API, the stored routing revisions and the traveller
print all read the same shape, and revision diffs compare stored dicts, so the shape
must not drift with the dataclasses.
"""

from __future__ import annotations

import json
from typing import Any

from shopfloor.core.judging import describe_criteria, describe_entry, group_plan

from .build import Routing, Step
from .windows import Window

__all__ = ["diff_routings", "routing_to_dict", "routing_to_text"]

_STEP_FIELDS = (
    "name",
    "work_center",
    "instructions",
    "parameters",
    "hazard",
    "queue_time_limit_minutes",
    "standard_minutes",
    "cycle",
)
_WINDOW_FIELDS = ("unit", "min", "max", "target", "samples", "source", "attribute", "deviation")


def _num(v: float | None) -> float | None:
    return None if v is None else float(v)


def _window_dict(w: Window) -> dict[str, Any]:
    return {
        "quantity": w.quantity,
        "unit": w.unit,
        "min": _num(w.min),
        "max": _num(w.max),
        "target": _num(w.target),
        "samples": w.samples,
        "source": w.source,
        "attribute": w.attribute,
        "deviation": w.deviation,
        "applies_to": w.applies_to,
        "in_words": describe_entry(
            {
                "quantity": w.quantity,
                "unit": w.unit,
                "min": w.min,
                "max": w.max,
                "applies_to": w.applies_to,
                "attribute": w.attribute,
            },
            w.samples,
        ),
    }


def _step_dict(s: Step) -> dict[str, Any]:
    return {
        "seq": s.seq,
        "code": s.code,
        "name": s.name,
        "work_center": s.work_center,
        "instructions": s.instructions,
        "parameters": json.loads(json.dumps(s.parameters)),  # a deep, JSON-only copy
        "hazard": s.hazard,
        "queue_time_limit_minutes": s.queue_time_limit_minutes,
        "standard_minutes": s.standard_minutes,
        "cycle": s.cycle,
        "measurements": [_window_dict(w) for w in s.measurements],
        "criteria_in_words": _criteria_words([_window_dict(w) for w in s.measurements]),
    }


def _criteria_words(entries: list[dict[str, Any]]) -> list[dict[str, str]]:
    """One line per quantity: 'average of 5 samples ≥ 25 µm; each ≥ 20 µm'."""
    return [{"quantity": g.quantity, "in_words": g.words} for g in group_plan(entries)]


def routing_to_dict(routing: Routing) -> dict[str, Any]:
    """The routing as plain JSON types, in the API contract shape."""
    return {
        "steps": [_step_dict(s) for s in routing.steps],
        "warnings": list(routing.warnings),
        "lamination_cycles": routing.lamination_cycles,
        "aspect_ratio": routing.aspect_ratio,
    }


def _fmt(v: Any) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


def routing_to_text(routing: Routing) -> str:
    """A fixed-width table for a person: one line per step, measurements beneath."""
    rows: list[str] = []
    head = f"{'seq':>3}  {'code':<28} {'step':<44} {'work center':<14} {'min':>5}"
    rows.append(head)
    rows.append("-" * len(head))
    for s in routing.steps:
        name = s.name if len(s.name) <= 44 else s.name[:41] + "..."
        rows.append(
            f"{s.seq:>3}  {s.code:<28} {name:<44} {s.work_center:<14} {s.standard_minutes:>5}"
        )
        for g in group_plan(_window_dict(w) for w in s.measurements):
            flag = "  DEVIATION" if any(e.get("deviation") for e in g.entries) else ""
            first = g.entries[0]
            samples = "every board" if first.get("samples") is None else f"{g.samples} samples"
            words = describe_criteria(g.entries)
            rows.append(f"{'':>5}  measure {g.quantity}: {words}, {samples}{flag}")
            for source in dict.fromkeys(str(e.get("source")) for e in g.entries):
                rows.append(f"{'':>5}    source: {source}")
        if s.queue_time_limit_minutes is not None:
            until = s.parameters.get("queue_time_until", "the next step")
            rows.append(f"{'':>5}  queue limit: {s.queue_time_limit_minutes} min until {until}")
        if s.hazard:
            rows.append(f"{'':>5}  caution: {s.hazard}")
    rows.append("-" * len(head))
    total = routing.standard_minutes
    rows.append(
        f"{len(routing.steps)} steps, {total} standard minutes per lot, "
        f"{routing.lamination_cycles} lamination cycle(s), aspect ratio {routing.aspect_ratio:g}:1"
    )
    for warning in routing.warnings:
        rows.append(f"warning: {warning}")
    return "\n".join(rows) + "\n"


def _show(v: Any) -> str:
    if isinstance(v, dict | list):
        return json.dumps(v, sort_keys=True)
    return _fmt(v)


def diff_routings(old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    """Readable differences between two routing dicts, matched by step code.

    Sequence numbers alone are not reported as changes (inserting a step renumbers
    everything after it); lines use the new seq for kept and added steps.
    """
    lines: list[str] = []
    old_steps = {s["code"]: s for s in old.get("steps", [])}
    new_steps = {s["code"]: s for s in new.get("steps", [])}
    for s in new.get("steps", []):
        code = s["code"]
        if code not in old_steps:
            lines.append(f"+ step {s['seq']} {code} {s['name']}")
            continue
        before = old_steps[code]
        for f in _STEP_FIELDS:
            if before.get(f) != s.get(f):
                lines.append(
                    f"~ step {s['seq']} {code} {f} {_show(before.get(f))} -> {_show(s.get(f))}"
                )
        lines += _diff_measurements(s["seq"], code, before, s)
    for s in old.get("steps", []):
        if s["code"] not in new_steps:
            lines.append(f"- step {s['seq']} {s['code']} {s['name']}")
    for key in ("lamination_cycles", "aspect_ratio"):
        if old.get(key) != new.get(key):
            lines.append(f"~ {key} {_show(old.get(key))} -> {_show(new.get(key))}")
    old_w, new_w = list(old.get("warnings", [])), list(new.get("warnings", []))
    lines += [f"+ warning {w}" for w in new_w if w not in old_w]
    lines += [f"- warning {w}" for w in old_w if w not in new_w]
    return lines


def _diff_measurements(seq: int, code: str, old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    lines: list[str] = []
    before = {_entry_key(m): m for m in old.get("measurements", [])}
    after = {_entry_key(m): m for m in new.get("measurements", [])}
    for q, m in after.items():
        if q not in before:
            lines.append(f"+ step {seq} {code} measure {q} {_dict_limits(m)}")
            continue
        for f in _WINDOW_FIELDS:
            a, b = before[q].get(f), m.get(f)
            if a != b:
                unit = f" {m.get('unit', '')}" if f in ("min", "max", "target") else ""
                lines.append(f"~ step {seq} {code} {q} {f} {_show(a)} -> {_show(b)}{unit}")
    for q, m in before.items():
        if q not in after:
            lines.append(f"- step {seq} {code} measure {q} {_dict_limits(m)}")
    return lines


def _entry_key(m: dict[str, Any]) -> str:
    """A plan entry's identity in a diff: its quantity, plus what it applies to when that
    is not every reading ('hole_wall_copper (mean)')."""
    what = m.get("applies_to") or "each_reading"
    return m["quantity"] if what == "each_reading" else f"{m['quantity']} ({what})"


def _dict_limits(m: dict[str, Any]) -> str:
    return f"min {_fmt(m.get('min'))} max {_fmt(m.get('max'))} {m.get('unit', '')}".rstrip()


_SUFFIX_UNITS = (
    ("_mm", "mm"),
    ("_um", "µm"),
    ("_c", "°C"),
    ("_minutes", "min"),
    ("_m_per_min", "m/min"),
    ("_pct", "%"),
)


def _with_unit(key: str, value: Any) -> str:
    if value is None:
        return "—"
    text = _show(value)
    for suffix, unit in _SUFFIX_UNITS:
        if key.endswith(suffix) and isinstance(value, int | float) and not isinstance(value, bool):
            return f"{text} {unit}"
    return text


def diff_table(old: dict[str, Any], new: dict[str, Any]) -> list[dict[str, str]]:
    """The differences between two routings as rows for a table a person reads.

    Each row: `change` (step added / step removed / parameter changed / window changed /
    ...), `step` (seq, code and name), `what` (the field, parameter or measured quantity)
    and `old` / `new` with units. Steps are matched by code, so a renumbering alone is
    not a change (as in `diff_routings`).
    """
    rows: list[dict[str, str]] = []

    def row(change: str, step: dict[str, Any] | None, what: str, a: str, b: str) -> None:
        label = f"{step['seq']}. {step['name']} ({step['code']})" if step else "whole routing"
        rows.append({"change": change, "step": label, "what": what, "old": a, "new": b})

    old_steps = {s["code"]: s for s in old.get("steps", [])}
    new_steps = {s["code"]: s for s in new.get("steps", [])}
    for s in new.get("steps", []):
        before = old_steps.get(s["code"])
        if before is None:
            row(
                "step added",
                s,
                s["work_center"],
                "—",
                f"{len(s.get('measurements', []))} window(s)",
            )
            continue
        for f in _STEP_FIELDS:
            if f == "parameters":
                a, b = before.get(f) or {}, s.get(f) or {}
                for key in sorted(set(a) | set(b)):
                    if a.get(key) != b.get(key):
                        change = (
                            "parameter added"
                            if key not in a
                            else "parameter removed"
                            if key not in b
                            else "parameter changed"
                        )
                        row(
                            change,
                            s,
                            key.replace("_", " "),
                            _with_unit(key, a.get(key)),
                            _with_unit(key, b.get(key)),
                        )
            elif before.get(f) != s.get(f):
                row("step changed", s, f.replace("_", " "), _show(before.get(f)), _show(s.get(f)))
        rows += _window_rows(s, before)
    for s in old.get("steps", []):
        if s["code"] not in new_steps:
            row(
                "step removed",
                s,
                s["work_center"],
                f"{len(s.get('measurements', []))} window(s)",
                "—",
            )
    for key in ("lamination_cycles", "aspect_ratio"):
        if old.get(key) != new.get(key):
            row(
                "routing changed",
                None,
                key.replace("_", " "),
                _show(old.get(key)),
                _show(new.get(key)),
            )
    old_w, new_w = list(old.get("warnings", [])), list(new.get("warnings", []))
    for w in new_w:
        if w not in old_w:
            row("warning added", None, "warning", "—", w)
    for w in old_w:
        if w not in new_w:
            row("warning removed", None, "warning", w, "—")
    return rows


def _window_rows(new: dict[str, Any], old: dict[str, Any]) -> list[dict[str, str]]:
    rows: list[dict[str, str]] = []
    label = f"{new['seq']}. {new['name']} ({new['code']})"
    before = {_entry_key(m): m for m in old.get("measurements", [])}
    after = {_entry_key(m): m for m in new.get("measurements", [])}

    def limits(m: dict[str, Any]) -> str:
        unit = m.get("unit", "")
        parts = [
            f"{k} {_fmt(m[k])} {unit}".strip()
            for k in ("min", "max", "target")
            if m.get(k) is not None
        ]
        return ", ".join(parts) or "no limits"

    for q, m in after.items():
        if q not in before:
            rows.append(
                {"change": "window added", "step": label, "what": q, "old": "—", "new": limits(m)}
            )
            continue
        for f in _WINDOW_FIELDS:
            a, b = before[q].get(f), m.get(f)
            if a == b:
                continue
            unit = f" {m.get('unit', '')}" if f in ("min", "max", "target") else ""
            rows.append(
                {
                    "change": "window changed",
                    "step": label,
                    "what": f"{q} {f}",
                    "old": "—" if a is None else f"{_show(a)}{unit}",
                    "new": "—" if b is None else f"{_show(b)}{unit}",
                }
            )
    for q, m in before.items():
        if q not in after:
            rows.append(
                {"change": "window removed", "step": label, "what": q, "old": limits(m), "new": "—"}
            )
    return rows
