"""The DRF base every app's API views use: the JSON-only view class, body parsing into the
one problem-list shape, the Idempotency-Key wrapper, and the shared OpenAPI parameters
and error replies.

An API view stays thin: `parse(SerializerClass, request.data)` (InvalidInput listing every
problem), one service call inside `idempotent(request, action)` for a state change, and
`extend_schema(..., responses={..., **WRITE_ERRORS})`. Every refusal is a DomainError,
which shopfloor.api_errors turns into the one error shape.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from django.core.serializers.json import DjangoJSONEncoder
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse
from rest_framework import serializers as drf_serializers
from rest_framework.permissions import BasePermission
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from shopfloor.access import roles_of
from shopfloor.api_parsers import StrictJSONParser
from shopfloor.errors import InvalidInput
from shopfloor.floor import idempotency
from shopfloor.floor.models import InstrumentToken
from shopfloor.floor.serializers import (
    MAX_ID,
    ErrorSerializer,
)

IDEMPOTENCY_KEY = OpenApiParameter(
    "Idempotency-Key",
    OpenApiTypes.STR,
    OpenApiParameter.HEADER,
    required=False,
    description=(
        "Any unique text up to 100 characters. A repeat with the same key and body gets the "
        "stored reply (header Idempotent-Replay: true) and records nothing; the same key "
        "with another body gets 422; a repeat while the first is still running gets 409."
    ),
)


REPLAY_HEADER = OpenApiParameter(
    "Idempotent-Replay",
    OpenApiTypes.STR,
    OpenApiParameter.HEADER,
    response=True,
    description="'true' when this reply is the stored reply of an earlier identical request",
)


#: Path parameters as the URL patterns match them (api_urls: <int:pk>, <str:code>), so the
#: schema does not promise an API answer for a path the URL resolver never routes here.
ID_IN_PATH = OpenApiParameter(
    "id",
    {"type": "integer", "minimum": 0, "maximum": MAX_ID},
    OpenApiParameter.PATH,
    description="Record id",
)


LOT_CODE_IN_PATH = OpenApiParameter(
    "code",
    {"type": "string", "pattern": "^[^/]+$", "maxLength": 30},
    OpenApiParameter.PATH,
    description="Lot (traveller) code as scanned",
)


def error(description: str) -> OpenApiResponse:
    return OpenApiResponse(ErrorSerializer, description=description)


READ_ERRORS = {
    401: error("No credentials (log in, or send 'Authorization: Token <key>')"),
    403: error("This role or instrument may not do this"),
    404: error("No such lot, step or reading"),
}


WRITE_ERRORS = {
    400: error("The body has problems; each one listed with field, value and what is allowed"),
    **READ_ERRORS,
    409: error("Not possible in the current state (not the current step, on hold, busy key)"),
    415: error("Send the body as application/json"),
    422: error("This Idempotency-Key was already used for a different request"),
}


def problems_from(errors: Any, data: Any, prefix: str = "") -> list[dict[str, Any]]:
    """Serializer errors as the one problem-list shape (field, value, problem)."""
    problems: list[dict[str, Any]] = []
    if isinstance(errors, list):
        for message in errors:
            if isinstance(message, dict | list):
                problems += problems_from(message, data, prefix)
            else:
                problems.append(
                    {
                        "field": prefix or "body",
                        "value": None,
                        "problem": str(message),
                        "allowed": None,
                    }
                )
        return problems
    for field, messages in errors.items():
        name = "body" if field == "non_field_errors" else field
        path = f"{prefix}.{name}" if prefix else name
        value = data.get(field) if isinstance(data, dict) else None
        if isinstance(messages, dict):
            problems += problems_from(messages, value, path)
            continue
        for message in messages if isinstance(messages, list) else [messages]:
            if isinstance(message, dict | list):
                problems += problems_from(message, value, path)
            else:
                problems.append(
                    {
                        "field": path,
                        "value": json_safe(value),
                        "problem": str(message),
                        "allowed": None,
                    }
                )
    return problems


def json_safe(value: Any) -> Any:
    return json.loads(json.dumps(value, cls=DjangoJSONEncoder, default=str))


def parse(serializer_class: type[drf_serializers.Serializer], data: Any) -> dict[str, Any]:
    """Validate a body; on failure raise InvalidInput listing every problem."""
    serializer = serializer_class(data=data)
    if not serializer.is_valid():
        problems = problems_from(serializer.errors, data)
        raise InvalidInput(
            f"The request has {len(problems)} problem(s); nothing was saved.", problems=problems
        )
    return dict(serializer.validated_data)


def idempotent(request: Request, action: Callable[[], tuple[int, Any]]) -> Response:
    """Run a state change at most once per Idempotency-Key (shopfloor.floor.idempotency)."""

    def stored_action() -> tuple[int, dict[str, Any]]:
        status, body = action()
        return status, json_safe(body)

    outcome = idempotency.run(
        user=request.user,
        key=request.headers.get("Idempotency-Key"),
        request_fingerprint=idempotency.fingerprint(
            request.method or "POST", request.path, request.data
        ),
        action=stored_action,
    )
    response = Response(outcome.body, status=outcome.status)
    if outcome.replayed:
        response["Idempotent-Replay"] = "true"
    return response


def idempotent_batch(request: Request, action: Callable[[], tuple[int, Any]]) -> Response:
    """Like `idempotent`, but the action runs its own transactions (one per lot step)."""

    def stored_action() -> tuple[int, dict[str, Any]]:
        status, body = action()
        return status, json_safe(body)

    outcome = idempotency.run_in_steps(
        user=request.user,
        key=request.headers.get("Idempotency-Key"),
        request_fingerprint=idempotency.fingerprint(
            request.method or "POST", request.path, request.data
        ),
        action=stored_action,
    )
    response = Response(outcome.body, status=outcome.status)
    if outcome.replayed:
        response["Idempotent-Replay"] = "true"
    return response


class JsonAPIView(APIView):
    parser_classes = [StrictJSONParser]


def is_instrument(request: Request) -> bool:
    return isinstance(getattr(request, "auth", None), InstrumentToken)


class RolePermission(BasePermission):
    """Refuse (403, naming the roles allowed) a caller without one of `roles`, and every
    instrument token; an unauthenticated caller gets 401. Apps subclass it per endpoint."""

    roles: frozenset[str] = frozenset()
    what = "use this endpoint"

    def has_permission(self, request: Request, view: Any) -> bool:
        if not request.user or not request.user.is_authenticated:
            return False  # DRF answers 401 with the authentication scheme
        if is_instrument(request):
            self.message = "An instrument token may only post readings (POST /api/v1/readings/)."
            return False
        if not roles_of(request.user) & self.roles:
            allowed = ", ".join(sorted(r.replace("_", " ") for r in self.roles))
            self.message = f"Only these roles may {self.what}: {allowed}."
            return False
        return True
