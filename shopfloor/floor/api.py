"""API views for the floor: readings, corrections, step actions and lot status.

Thin on purpose: parse the body with a serializer, check access (permissions.py), call
one service function inside the Idempotency-Key wrapper, serialize the result. Every
refusal is a DomainError, which shopfloor.api_errors turns into the one error shape.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from django.core.serializers.json import DjangoJSONEncoder
from drf_spectacular.extensions import OpenApiAuthenticationExtension
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework import serializers as drf_serializers
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from shopfloor.access import require_lot_readable
from shopfloor.api_parsers import StrictJSONParser
from shopfloor.errors import InvalidInput
from shopfloor.floor import batch, idempotency, readings, services
from shopfloor.floor.permissions import (
    CanPostReadings,
    CanRead,
    CanWorkSteps,
    access_reading,
    access_step,
    check_work_center,
    is_instrument,
)
from shopfloor.floor.serializers import (
    MAX_ID,
    BatchInputSerializer,
    BatchResultSerializer,
    CorrectionInputSerializer,
    ErrorSerializer,
    LotStatusSerializer,
    LotStepSerializer,
    ReadingInputSerializer,
    ReadingSerializer,
    StepCompleteSerializer,
    StepPauseSerializer,
    StepStartSerializer,
    StepWindowsSerializer,
    batch_items,
    lot_status,
    window_dict,
)
from shopfloor.plant import people


class InstrumentTokenScheme(OpenApiAuthenticationExtension):  # type: ignore[no-untyped-call]
    """Documents the instrument token header (the class lives in floor.api_auth)."""

    target_class = "shopfloor.floor.api_auth.InstrumentTokenAuthentication"
    name = "instrumentToken"

    def get_security_definition(self, auto_schema: Any) -> dict[str, Any]:
        return {
            "type": "apiKey",
            "in": "header",
            "name": "Authorization",
            "description": "Instrument token: 'Token <key>'. May only post readings, and only "
            "at the token's own work center.",
        }


# --- shared by every API view (routing/api.py uses these too) ------------------------

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
                        "value": _json_safe(value),
                        "problem": str(message),
                        "allowed": None,
                    }
                )
    return problems


def _json_safe(value: Any) -> Any:
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
        return status, _json_safe(body)

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


def _respond(outcome: idempotency.Outcome) -> Response:
    response = Response(outcome.body, status=outcome.status)
    if outcome.replayed:
        response["Idempotent-Replay"] = "true"
    return response


def idempotent_batch(request: Request, action: Callable[[], tuple[int, Any]]) -> Response:
    """Like `idempotent`, but the action runs its own transactions (one per lot step)."""

    def stored_action() -> tuple[int, dict[str, Any]]:
        status, body = action()
        return status, _json_safe(body)

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


# --- readings ------------------------------------------------------------------------


class ReadingCreateView(JsonAPIView):
    permission_classes = [CanPostReadings]

    @extend_schema(
        operation_id="readings_create",
        summary="Record a reading on a lot's step",
        description=(
            "Records one reading (value converted to the quantity's canonical unit) on the "
            "lot's current step, or on `step` when given; judges it against the step's "
            "window and returns the window with its source and its criteria in plain words. "
            "A value outside its window, or implausibly far from it, is refused with 409 "
            "(error `confirm_out_of_window`, saying what to confirm and, where another unit "
            'would fit, which) unless the request carries `"confirm_out_of_window": true`; '
            "the confirmation is stored with the reading. A reading that completes the "
            "sample set returns the set's verdict. Instrument tokens may post only at their "
            "own work center."
        ),
        request=ReadingInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: ReadingSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request) -> Response:
        data = parse(ReadingInputSerializer, request.data)
        person = people.person_for(request.user)
        reading_input = services.ReadingInput(
            quantity=data["quantity"],
            value=data["value"],
            unit=data["unit"],
            sample_index=data["sample_index"],
            position=data.get("position") or "",
            equipment_id=data.get("equipment"),
            captured_at=data.get("captured_at"),
            confirm_out_of_window=bool(data.get("confirm_out_of_window")),
        )
        instrument = is_instrument(request)
        outcome = readings.record_reading_once(
            person=person,
            data=reading_input,
            via="instrument" if instrument else "api",
            claim=idempotency.claim(
                request.user,
                request.headers.get("Idempotency-Key"),
                idempotency.fingerprint(request.method or "POST", request.path, request.data),
            ),
            reply=lambda reading: _json_safe(ReadingSerializer(reading).data),
            lot_code=data["lot"],
            lot_step_id=data.get("step"),
            # an instrument posts only at its own work center; a person's assignment is
            # checked by the service with the rest of the facts it reads
            check_access=(lambda step: check_work_center(request, step)) if instrument else None,
        )
        return _respond(outcome)


class ReadingBatchView(JsonAPIView):
    permission_classes = [CanPostReadings]

    @extend_schema(
        operation_id="readings_batch",
        summary="Record up to 1,000 readings (a sample set, or a gauge's file of results)",
        description=(
            "Each item is a reading as for POST /api/v1/readings/ plus `sample_key`, the "
            "instrument's own key for the measurement. Items are grouped by lot step and "
            "each lot step is recorded in its own transaction, so a refused item or lot "
            "never blocks another lot step. The reply lists every item as created, "
            "duplicate (the key was seen on that lot step before: the stored reading is "
            "returned) or refused (with the reason). The whole request is idempotent with "
            "Idempotency-Key."
        ),
        request=BatchInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={200: BatchResultSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request) -> Response:
        raw = parse(BatchInputSerializer, request.data)["items"]
        person = people.person_for(request.user)
        items, invalid = batch_items(raw, problems_from)
        via = "instrument" if is_instrument(request) else "api"

        def action() -> tuple[int, Any]:
            results = batch.record_batch(
                person=person,
                items=items,
                via=via,
                check_access=lambda step: check_work_center(request, step),
            )
            return 200, batch.summary(sorted(results + invalid, key=lambda r: r.index))

        return idempotent_batch(request, action)


class ReadingCorrectView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @extend_schema(
        operation_id="readings_correct",
        summary="Correct a reading (supersede it with a reason)",
        description="The old reading stays in history, marked superseded, with the reason.",
        request=CorrectionInputSerializer,
        parameters=[ID_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: ReadingSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(CorrectionInputSerializer, request.data)
        person = people.person_for(request.user)
        reading = access_reading(request, pk)

        def action() -> tuple[int, Any]:
            new = services.correct_reading(
                person=person,
                reading_id=reading.pk,
                value=data["value"],
                unit=data["unit"],
                reason=data["reason"],
                captured_at=data.get("captured_at"),
                confirm_out_of_window=bool(data.get("confirm_out_of_window")),
                lot_code=data.get("lot"),
            )
            return 201, ReadingSerializer(new).data

        return idempotent(request, action)


# --- steps ---------------------------------------------------------------------------


def _step_schema(summary: str, request_serializer: Any) -> Callable[[Any], Any]:
    return extend_schema(
        summary=summary,
        request=request_serializer,
        parameters=[ID_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={200: LotStepSerializer, **WRITE_ERRORS},
    )


class StepStartView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @_step_schema("Start (or resume) the lot's current step", StepStartSerializer)
    def post(self, request: Request, pk: int) -> Response:
        data = parse(StepStartSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            done = services.start_step(
                person=person,
                lot_step_id=step.pk,
                equipment_id=data.get("equipment"),
                material_lot_ids=data.get("material_lots"),
            )
            return 200, LotStepSerializer(done).data

        return idempotent(request, action)


class StepPauseView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @_step_schema("Pause a step in progress", StepPauseSerializer)
    def post(self, request: Request, pk: int) -> Response:
        data = parse(StepPauseSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            done = services.pause_step(
                person=person, lot_step_id=step.pk, reason=data.get("reason") or ""
            )
            return 200, LotStepSerializer(done).data

        return idempotent(request, action)


class StepCompleteView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @_step_schema("Sign off the step with the PIN (e-signature)", StepCompleteSerializer)
    def post(self, request: Request, pk: int) -> Response:
        data = parse(StepCompleteSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            done = services.complete_step(
                person=person, lot_step_id=step.pk, pin=data["pin"], meaning=data["meaning"]
            )
            return 200, LotStepSerializer(done).data

        return idempotent(request, action)


# --- lots ----------------------------------------------------------------------------


class LotStatusView(APIView):
    permission_classes = [CanRead]

    @extend_schema(
        summary="A lot's status, hold flag, current step and every step",
        parameters=[LOT_CODE_IN_PATH],
        responses={200: LotStatusSerializer, 400: error("The lot code is blank"), **READ_ERRORS},
    )
    def get(self, request: Request, code: str) -> Response:
        lot = services.find_lot(code)
        require_lot_readable(request.user, lot)  # the one read-scope rule (shopfloor.access)
        steps = list(
            lot.steps.select_related("work_center", "started_by", "completed_by").order_by(
                "position"
            )
        )
        current = next((s for s in steps if s.status not in {"done", "skipped"}), None)
        return Response(LotStatusSerializer(lot_status(lot, steps, current)).data)


class LotWindowsView(APIView):
    permission_classes = [CanRead]

    @extend_schema(
        summary="The windows of the lot's current step, each with its source",
        parameters=[LOT_CODE_IN_PATH],
        responses={200: StepWindowsSerializer, 400: error("The lot code is blank"), **READ_ERRORS},
    )
    def get(self, request: Request, code: str) -> Response:
        lot = services.find_lot(code)
        require_lot_readable(request.user, lot)  # the one read-scope rule (shopfloor.access)
        step = services.current_step(lot)
        windows = [window_dict(m) for m in (step.plan if step else [])]
        return Response(
            StepWindowsSerializer({"lot": lot.code, "step": step, "windows": windows}).data
        )
