"""API views for the floor: readings, corrections, step actions and lot status.

Thin on purpose: parse the body with a serializer, check access (permissions.py), call
one service function inside the Idempotency-Key wrapper, serialize the result. Every
refusal is a DomainError, which shopfloor.api_errors turns into the one error shape.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from drf_spectacular.extensions import OpenApiAuthenticationExtension
from drf_spectacular.utils import extend_schema
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from shopfloor.access import require_lot_readable
from shopfloor.api_base import (
    ID_IN_PATH,
    IDEMPOTENCY_KEY,
    LOT_CODE_IN_PATH,
    READ_ERRORS,
    REPLAY_HEADER,
    WRITE_ERRORS,
    JsonAPIView,
    error,
    idempotent,
    idempotent_batch,
    json_safe,
    parse,
    problems_from,
)
from shopfloor.floor import batch, idempotency, readings, services
from shopfloor.floor.models import LotStep
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
    BatchInputSerializer,
    BatchResultSerializer,
    CorrectionInputSerializer,
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


def _respond(outcome: idempotency.Outcome) -> Response:
    response = Response(outcome.body, status=outcome.status)
    if outcome.replayed:
        response["Idempotent-Replay"] = "true"
    return response


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
            tested=data.get("tested"),
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
            reply=lambda reading: json_safe(ReadingSerializer(reading).data),
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
        step = LotStep.objects.current_for(lot)
        windows = [window_dict(m) for m in (step.plan if step else [])]
        return Response(
            StepWindowsSerializer({"lot": lot.code, "step": step, "windows": windows}).data
        )
