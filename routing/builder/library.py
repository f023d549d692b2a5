"""The process library: what each step is, where it runs, how long it takes.

Why it is data and not code: the process engineer owns it. The Django side stores it
versioned in the database and lets the engineer edit it in the admin; the builder only
decides which steps a board needs and in what order. `ProcessLibrary.from_dict`
checks an edited library completely (every problem at once) so that a bad edit is
refused at save time instead of breaking routings for every new job.

The built-in library a new site starts from is data, in `default_library.py`; this
module is the code that checks a library and answers questions about it.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from typing import Any, Final

from shopfloor.core.units import canonical_unit

from .default_library import (
    DEFAULT_LIBRARY,
    MATERIAL_KINDS,
    REQUIRED_STEP_CODES,
    REWORK_ONLY_STEP_CODES,
)
from .windows import QUANTITIES

__all__ = [
    "DEFAULT_LIBRARY",
    "REQUIRED_STEP_CODES",
    "REWORK_ONLY_STEP_CODES",
    "LibraryInvalid",
    "ProcessLibrary",
    "StepDefinition",
    "WindowOverride",
    "base_code",
]


_STEP_KEYS: Final = frozenset(
    {
        "name",
        "work_center",
        "instructions",
        "parameters",
        "standard_minutes",
        "hazard",
        "queue_time_limit_minutes",
        "queue_time_until",
        "measurements",
        "materials",
        "rework",
    }
)
_WINDOW_KEYS: Final = frozenset({"min", "max", "target", "samples", "source", "unit", "applies_to"})
#: What a library window's limits may apply to (see `shopfloor.core.judging`).
_APPLIES_TO: Final = ("each_reading", "mean", "minimum", "maximum", "range")


class LibraryInvalid(ValueError):
    """A process library that the builder cannot use; `errors` lists every problem."""

    def __init__(self, errors: list[str]) -> None:
        self.errors = list(errors)
        super().__init__("process library is invalid: " + "; ".join(self.errors))


@dataclass(frozen=True)
class WindowOverride:
    """A library-level change to a default window (the shop's own limit or sample count)."""

    min: float | None = None
    max: float | None = None
    target: float | None = None
    samples: int | None = None
    source: str | None = None
    applies_to: str | None = None

    @property
    def sets_limits(self) -> bool:
        return any(v is not None for v in (self.min, self.max, self.target))


@dataclass(frozen=True)
class StepDefinition:
    code: str
    name: str
    work_center: str
    instructions: str
    parameters: Mapping[str, Any]
    standard_minutes: int
    hazard: str | None
    queue_time_limit_minutes: int | None
    queue_time_until: str | None
    measurements: Mapping[str, WindowOverride]
    #: Material kinds the step consumes (None: the built-in library's list for the code).
    materials: tuple[str, ...] | None = None
    #: Library step codes a rework after this step runs (None: the built-in default).
    rework: tuple[str, ...] | None = None


@dataclass(frozen=True)
class ProcessLibrary:
    version: int
    work_centers: Mapping[str, str]
    steps: Mapping[str, StepDefinition]

    @classmethod
    def default(cls) -> ProcessLibrary:
        """The built-in library (validated once and cached: it never changes)."""
        return _default_library()

    @classmethod
    def from_dict(cls, d: object) -> ProcessLibrary:
        """Validate an (edited) library dict; raise `LibraryInvalid` with every problem."""
        errors: list[str] = []
        if not isinstance(d, Mapping):
            raise LibraryInvalid(["the library must be a JSON object"])
        for key in d:
            if key not in {"version", "work_centers", "steps"}:
                errors.append(
                    f"unknown top-level key {key!r}; allowed: version, work_centers, steps"
                )
        version = d.get("version")
        if isinstance(version, bool) or not isinstance(version, int) or version < 1:
            errors.append(f"version must be a whole number >= 1, got {version!r}")
            version = 0
        centers_raw = d.get("work_centers")
        centers: dict[str, str] = {}
        if not isinstance(centers_raw, Mapping) or not centers_raw:
            errors.append("work_centers must be a non-empty object of code -> name")
        else:
            for code, name in centers_raw.items():
                if (
                    not isinstance(code, str)
                    or not code
                    or not isinstance(name, str)
                    or not name.strip()
                ):
                    errors.append(f"work center {code!r}: code and name must be non-empty text")
                else:
                    centers[code] = name
        steps_raw = d.get("steps")
        steps: dict[str, StepDefinition] = {}
        if not isinstance(steps_raw, Mapping):
            errors.append("steps must be an object of step code -> definition")
        else:
            missing = sorted(REQUIRED_STEP_CODES - set(steps_raw))
            if missing:
                errors.append(
                    "steps the builder needs are missing: "
                    + ", ".join(missing)
                    + " (disable a step by editing it, not by deleting it)"
                )
            for code, raw in steps_raw.items():
                step = _parse_step(code, raw, centers, errors)
                if step is not None:
                    steps[code] = step
            known = set(steps) | REWORK_ONLY_STEP_CODES
            for step in steps.values():
                for code in step.rework or ():
                    if code not in known:
                        errors.append(f"step {step.code}: rework step {code!r} is not a step code")
                until = step.queue_time_until
                if until not in (None, "next_plating") and until not in steps:
                    errors.append(
                        f"step {step.code}: queue_time_until {until!r} is not a step code"
                    )
        if errors:
            raise LibraryInvalid(errors)
        return cls(version=int(version), work_centers=centers, steps=steps)

    def step(self, code: str) -> StepDefinition:
        return self.steps[code]

    def definition(self, code: str) -> StepDefinition:
        """A step of this library, or the built-in one (rework-only steps an older stored
        library lacks)."""
        if code in self.steps:
            return self.steps[code]
        return _default_library().steps[code]

    def materials_for(self, code: str, *, layers: int | None = None) -> tuple[str, ...]:
        """The material kinds a step consumes (this library's list, else the built-in).

        `code` may carry a lamination-cycle suffix (``layup_c2``). A one- or two-layer
        board has no layup: its copper-clad laminate is first cut for drilling, so the
        drill step records the laminate lot.
        """
        code = base_code(code)
        if code == "drill_mechanical" and layers is not None and layers <= 2:
            return ("laminate",)
        d = self.steps.get(code)
        if d is not None and d.materials is not None:
            return d.materials
        builtin = _default_library().steps.get(code)
        return builtin.materials or () if builtin is not None else ()

    def rework_for(self, code: str) -> tuple[str, ...]:
        """Default rework route after a nonconformance at step `code`: what a fab does
        there (AOI defects: repair and verify; mask: strip and recoat; finish: strip and
        re-finish); a step without one is simply done again (re-measured)."""
        d = self.steps.get(code)
        if d is not None and d.rework is not None:
            return d.rework or (code,)
        builtin = _default_library().steps.get(code)
        if builtin is not None and builtin.rework:
            return builtin.rework
        return (code,)


def base_code(code: str) -> str:
    """A routing step code without its lamination-cycle suffix (``layup_c2`` -> ``layup``)."""
    head, sep, tail = code.rpartition("_c")
    return head if sep and tail.isdigit() else code


def _is_number(v: Any) -> bool:
    return not isinstance(v, bool) and isinstance(v, int | float) and math.isfinite(v)


def _json_scalar_or_list(v: Any) -> bool:
    if v is None or isinstance(v, bool | str):
        return True
    if isinstance(v, int | float):
        return math.isfinite(v)
    if isinstance(v, list):
        return all(_json_scalar_or_list(x) for x in v)
    return False


def _parse_step(
    code: Any, raw: Any, centers: Mapping[str, str], errors: list[str]
) -> StepDefinition | None:
    n = len(errors)
    where = f"step {code!r}"
    if not isinstance(code, str) or not code.replace("_", "").isalnum() or code != code.lower():
        errors.append(f"{where}: step codes are lower-case snake_case")
    if not isinstance(raw, Mapping):
        errors.append(f"{where}: definition must be an object")
        return None
    for key in raw:
        if key not in _STEP_KEYS:
            errors.append(f"{where}: unknown key {key!r}; allowed: {', '.join(sorted(_STEP_KEYS))}")
    for key in ("name", "work_center", "instructions", "standard_minutes"):
        if key not in raw:
            errors.append(f"{where}: missing {key!r}")
    name, wc, text = raw.get("name"), raw.get("work_center"), raw.get("instructions")
    if "name" in raw and (not isinstance(name, str) or not name.strip()):
        errors.append(f"{where}: name must be non-empty text")
    if "work_center" in raw and wc not in centers:
        errors.append(f"{where}: work_center {wc!r} is not in work_centers")
    if "instructions" in raw and (not isinstance(text, str) or not text.strip()):
        errors.append(f"{where}: instructions must be non-empty text")
    minutes = raw.get("standard_minutes")
    if "standard_minutes" in raw and (
        isinstance(minutes, bool) or not isinstance(minutes, int) or not 0 < minutes <= 10_000
    ):
        errors.append(f"{where}: standard_minutes must be a whole number from 1 to 10000")
    params = raw.get("parameters", {})
    if not isinstance(params, Mapping) or not all(
        isinstance(k, str) and _json_scalar_or_list(v) for k, v in params.items()
    ):
        errors.append(f"{where}: parameters must map text keys to numbers, text, booleans or lists")
    hazard = raw.get("hazard")
    if hazard is not None and (
        not isinstance(hazard, str) or "safety data sheet" not in hazard.lower()
    ):
        errors.append(
            f"{where}: a hazard note must be text and must say it does not replace the "
            "site's safety procedures and safety data sheets"
        )
    queue = raw.get("queue_time_limit_minutes")
    if queue is not None and (isinstance(queue, bool) or not isinstance(queue, int) or queue <= 0):
        errors.append(f"{where}: queue_time_limit_minutes must be a positive whole number or null")
    until = raw.get("queue_time_until")
    if until is not None and not isinstance(until, str):
        errors.append(f"{where}: queue_time_until must be a step code or null")
    measurements = _parse_measurements(where, raw.get("measurements", {}), errors)
    materials = _code_list(where, "materials", raw.get("materials"), errors)
    for kind in materials or ():
        if kind not in MATERIAL_KINDS:
            errors.append(
                f"{where}: material kind {kind!r} is not known; allowed: "
                + ", ".join(MATERIAL_KINDS)
            )
    rework = _code_list(where, "rework", raw.get("rework"), errors)
    if len(errors) != n:
        return None
    assert isinstance(code, str) and isinstance(name, str) and isinstance(wc, str)
    assert isinstance(text, str) and isinstance(minutes, int) and isinstance(params, Mapping)
    return StepDefinition(
        code=code,
        name=name,
        work_center=wc,
        instructions=text,
        parameters=copy.deepcopy(dict(params)),
        standard_minutes=minutes,
        hazard=hazard,
        queue_time_limit_minutes=queue,
        queue_time_until=until,
        measurements=measurements,
        materials=materials,
        rework=rework,
    )


def _code_list(where: str, key: str, raw: Any, errors: list[str]) -> tuple[str, ...] | None:
    if raw is None:
        return None
    if not isinstance(raw, list) or not all(isinstance(x, str) and x for x in raw):
        errors.append(f"{where}: {key} must be a list of codes (text)")
        return None
    return tuple(raw)


def _parse_measurements(where: str, raw: Any, errors: list[str]) -> dict[str, WindowOverride]:
    out: dict[str, WindowOverride] = {}
    if not isinstance(raw, Mapping):
        errors.append(f"{where}: measurements must be an object keyed by quantity")
        return out
    for quantity, w in raw.items():
        at = f"{where} measurement {quantity!r}"
        if quantity not in QUANTITIES:
            errors.append(f"{at}: unknown quantity; allowed: {', '.join(QUANTITIES)}")
            continue
        if w is None:
            w = {}
        if not isinstance(w, Mapping):
            errors.append(f"{at}: must be an object (empty for the default window)")
            continue
        bad = [k for k in w if k not in _WINDOW_KEYS]
        if bad:
            errors.append(f"{at}: unknown keys {bad}; allowed: {', '.join(sorted(_WINDOW_KEYS))}")
        if "unit" in w and w["unit"] != canonical_unit(quantity):
            errors.append(f"{at}: unit must be {canonical_unit(quantity)!r} (the canonical unit)")
        values: dict[str, float | None] = {}
        for key in ("min", "max", "target"):
            v = w.get(key)
            if v is not None and not _is_number(v):
                errors.append(f"{at}: {key} must be a finite number or null")
                v = None
            values[key] = None if v is None else float(v)
        lo, hi, tgt = values["min"], values["max"], values["target"]
        if lo is not None and hi is not None and lo > hi:
            errors.append(f"{at}: min {lo:g} is above max {hi:g}")
        if tgt is not None and ((lo is not None and tgt < lo) or (hi is not None and tgt > hi)):
            errors.append(f"{at}: target {tgt:g} lies outside min/max")
        samples = w.get("samples")
        if samples is not None and (
            isinstance(samples, bool) or not isinstance(samples, int) or samples < 1
        ):
            errors.append(f"{at}: samples must be a whole number >= 1")
            samples = None
        source = w.get("source")
        what = w.get("applies_to")
        if what is not None and what not in _APPLIES_TO:
            errors.append(f"{at}: applies_to must be one of {', '.join(_APPLIES_TO)}")
            what = None
        override = WindowOverride(
            min=lo, max=hi, target=tgt, samples=samples, source=source, applies_to=what
        )
        if override.sets_limits and (not isinstance(source, str) or not source.strip()):
            errors.append(f"{at}: a library window that sets limits must name its source")
        out[quantity] = override
    return out


@cache
def _default_library() -> ProcessLibrary:
    return ProcessLibrary.from_dict(DEFAULT_LIBRARY)
