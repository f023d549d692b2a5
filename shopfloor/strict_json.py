"""Strict JSON for everything people and instruments send: bodies, pasted specs, files.

Python's json module accepts what no instrument should send and fails in ways that become
500s: NaN and Infinity, 1e400 (read as infinity, which the error reply then cannot even
render), integers thousands of digits long, nesting deep enough to exhaust the stack
(RecursionError), and "\\u0000", which PostgreSQL refuses in text and jsonb. `loads`
refuses each with a ValueError that says what was wrong, so every caller that already
answers a ValueError with a 400 stays correct. No Django imports: the pure core may use it.
"""

from __future__ import annotations

import json
import math
from typing import Any

#: Deepest nesting accepted; real bodies and build specs use fewer than ten levels.
MAX_DEPTH = 64
MAX_INT_DIGITS = 30


class StrictJSONError(ValueError):
    """The text is not JSON this service accepts; the message says why."""


def _float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise StrictJSONError(
            f"the number {text[:40]} is out of range; numbers must be finite (at most about "
            "1.8e308)"
        )
    return value


def _int(text: str) -> int:
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise StrictJSONError(
            f"an integer of {len(text)} digits is too large (at most {MAX_INT_DIGITS} digits)"
        )
    return int(text)


def _constant(name: str) -> Any:
    raise StrictJSONError(f"{name} is not a number in JSON; send a finite number")


def _depth_ok(text: str) -> None:
    """Refuse deep nesting before the parser recurses (a cheap scan, strings skipped)."""
    depth = 0
    in_string = escaped = False
    for ch in text:
        if in_string:
            if escaped:
                escaped = False
            elif ch == "\\":
                escaped = True
            elif ch == '"':
                in_string = False
        elif ch == '"':
            in_string = True
        elif ch in "[{":
            depth += 1
            if depth > MAX_DEPTH:
                raise StrictJSONError(
                    f"the JSON is nested more than {MAX_DEPTH} levels deep; send a flat body"
                )
        elif ch in "]}":
            depth -= 1


def loads(text: str | bytes) -> Any:
    """Parse JSON strictly (see the module docstring); StrictJSONError says why not."""
    if isinstance(text, bytes | bytearray):
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise StrictJSONError(f"the body is not UTF-8 text ({exc.reason})") from None
    if "\\u0000" in text or "\x00" in text:
        raise StrictJSONError("text may not contain NUL characters (\\u0000)")
    _depth_ok(text)
    try:
        return json.loads(text, parse_float=_float, parse_int=_int, parse_constant=_constant)
    except StrictJSONError:
        raise
    except RecursionError:
        raise StrictJSONError(
            f"the JSON is nested more than {MAX_DEPTH} levels deep; send a flat body"
        ) from None
    except json.JSONDecodeError as exc:
        raise StrictJSONError(
            f"not valid JSON: {exc.msg} (line {exc.lineno}, column {exc.colno})"
        ) from None
    except ValueError as exc:  # e.g. Python's int-digit limit
        raise StrictJSONError(f"not acceptable JSON: {exc}") from None
