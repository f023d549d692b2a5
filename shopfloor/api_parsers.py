"""The API's JSON parser: shopfloor.strict_json behind DRF's parser interface, so deep
nesting, 1e400, NaN and NUL characters are a 400 with the usual error body."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from rest_framework.exceptions import ParseError
from rest_framework.parsers import JSONParser

from shopfloor import strict_json

#: Bodies larger than this are refused before parsing (a reading body is ~200 bytes).
MAX_BODY_BYTES = 2 * 1024 * 1024


class StrictJSONParser(JSONParser):
    def parse(
        self,
        stream: Any,
        media_type: str | None = None,
        parser_context: Mapping[str, Any] | None = None,
    ) -> Any:
        raw = stream.read(MAX_BODY_BYTES + 1) if stream is not None else b""
        if len(raw) > MAX_BODY_BYTES:
            raise ParseError(f"The body is larger than {MAX_BODY_BYTES // 1024} KiB.")
        if not raw:
            raise ParseError("The body is empty; send a JSON object.")
        try:
            return strict_json.loads(raw)
        except strict_json.StrictJSONError as exc:
            raise ParseError(f"The body is not acceptable JSON: {exc}.") from None
