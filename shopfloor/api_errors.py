"""One shape for every API error: {"error": code, "detail": text, "problems": [...]}."""

from __future__ import annotations

from typing import Any

from rest_framework.response import Response
from rest_framework.views import exception_handler as drf_handler

from shopfloor.errors import DomainError


def exception_handler(exc: Exception, context: dict[str, Any]) -> Response | None:
    if isinstance(exc, DomainError):
        return Response(exc.as_dict(), status=exc.status)
    response = drf_handler(exc, context)
    if response is None:
        return None
    data = response.data
    if isinstance(data, dict) and "detail" in data and len(data) == 1:
        code = getattr(data["detail"], "code", "error")
        response.data = {"error": str(code), "detail": str(data["detail"])}
    else:
        response.data = {"error": "invalid", "detail": "The request has problems", "problems": data}
    return response
