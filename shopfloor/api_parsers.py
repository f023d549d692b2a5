"""The API's JSON parser: shopfloor.strict_json behind DRF's parser interface, so deep
nesting, 1e400, NaN and NUL characters are a 400 with the usual error body."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from rest_framework.exceptions import ParseError
from rest_framework.parsers import FormParser, JSONParser, MultiPartParser

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


def _refuse_nul(fields: Any) -> None:
    for key in fields:
        values = fields.getlist(key) if hasattr(fields, "getlist") else [fields[key]]
        if "\x00" in str(key) or any("\x00" in str(v) for v in values):
            raise ParseError(
                "The request holds a NUL character (0x00) in a form field. Codes, names and "
                "notes are printable text; scan or type the value again."
            )


class NulSafeFormParser(FormParser):
    """Form bodies on the API: a NUL in a field is a 400, decided after authentication and
    permissions (DRF parses lazily), so a caller who may not use the endpoint gets its 403."""

    def parse(
        self,
        stream: Any,
        media_type: str | None = None,
        parser_context: Mapping[str, Any] | None = None,
    ) -> Any:
        data = super().parse(stream, media_type, parser_context)
        _refuse_nul(data)
        return data


class NulSafeMultiPartParser(MultiPartParser):
    """Multipart bodies on the API: as NulSafeFormParser for the text fields (file parts are
    bytes and are read by the endpoint that takes them)."""

    def parse(
        self,
        stream: Any,
        media_type: str | None = None,
        parser_context: Mapping[str, Any] | None = None,
    ) -> Any:
        result = super().parse(stream, media_type, parser_context)
        _refuse_nul(result.data)
        return result
