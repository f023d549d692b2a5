"""Job API for the ERP: enter a job, read its status and quantities, list, release.

Thin: the body goes to one service (every problem at once, the same checks as the job
entry page), inside the Idempotency-Key wrapper for state changes.
"""

from __future__ import annotations

from typing import Any

from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, extend_schema
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from shopfloor.access import scope_for
from shopfloor.api_base import (
    IDEMPOTENCY_KEY,
    READ_ERRORS,
    REPLAY_HEADER,
    WRITE_ERRORS,
    JsonAPIView,
    error,
    idempotent,
    parse,
)
from shopfloor.errors import InvalidInput
from shopfloor.floor.permissions import CanPlan, CanRead
from shopfloor.orders import read, services
from shopfloor.orders import serializers as s
from shopfloor.plant import people

JOB_NUMBER_IN_PATH = OpenApiParameter(
    "number",
    {"type": "string", "pattern": "^[^/\\u0000]+$", "maxLength": 30},
    OpenApiParameter.PATH,
    description="Job (work order) number",
)


def _body(request: Request) -> dict[str, Any]:
    if not isinstance(request.data, dict):
        raise InvalidInput(
            "Send a JSON object.",
            problems=[
                {"field": "body", "value": None, "problem": "not an object", "allowed": "{...}"}
            ],
        )
    return request.data


def _job_input(data: dict[str, Any]) -> services.JobInput:
    allowed = set(services.JobInput.__dataclass_fields__)
    unknown = sorted(set(data) - allowed)
    if unknown:
        raise InvalidInput(
            f"Unknown field(s): {', '.join(unknown)}; nothing was saved.",
            problems=[
                {"field": k, "value": None, "problem": "unknown field", "allowed": sorted(allowed)}
                for k in unknown
            ],
        )
    return services.JobInput(**{k: v for k, v in data.items() if k in allowed})


class JobListView(JsonAPIView):
    def get_permissions(self) -> list[Any]:
        return [CanPlan()] if self.request.method == "POST" else [CanRead()]

    @extend_schema(
        operation_id="jobs_list",
        summary="Jobs by due date, filtered by status, customer and due date",
        parameters=[
            OpenApiParameter("status", OpenApiTypes.STR, enum=list(read.STATUSES)),
            OpenApiParameter(
                "customer",
                {"type": "string", "pattern": "^[^\\u0000]*$", "maxLength": 40},
                description="Code or part of a name (no NUL characters)",
            ),
            OpenApiParameter("due_before", OpenApiTypes.DATE),
        ],
        responses={
            200: s.JobSerializer(many=True),
            400: error("A filter is not valid"),
            **READ_ERRORS,
        },
    )
    def get(self, request: Request) -> Response:
        flt = read.parse_filter(request.query_params)
        return Response([s.job_dict(row) for row in read.list_jobs(flt)])

    @extend_schema(
        operation_id="jobs_create",
        summary="Enter a job (customer, part and revision picked or created)",
        description="Every problem is reported at once with field, value and what is allowed.",
        request=s.JobInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: s.JobSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request) -> Response:
        data = _job_input(_body(request))
        person = people.person_for(request.user)

        def action() -> tuple[int, Any]:
            job = services.enter_job(person=person, data=data)
            return 201, s.job_dict(read.summaries([job])[0])

        return idempotent(request, action)


class JobDetailView(APIView):
    permission_classes = [CanRead]

    @extend_schema(
        operation_id="jobs_read",
        summary="A job's status, quantities, lots and projected finish",
        parameters=[JOB_NUMBER_IN_PATH],
        responses={200: s.JobSerializer, **READ_ERRORS},
    )
    def get(self, request: Request, number: str) -> Response:
        return Response(s.job_dict(read.job_summary(number, scope_for(request.user))))


class JobReleaseView(JsonAPIView):
    permission_classes = [CanPlan]

    @extend_schema(
        operation_id="jobs_release",
        summary="Release a job to the floor: panels with serials, lots, travellers",
        description=(
            "Panels needed = ceil(quantity / boards_per_panel x (1 + scrap allowance)), "
            "split into lots of at most the site's maximum. Idempotent: a released job gets "
            "its existing lots and panels back (200, created false). Refused (409) with the "
            "reasons when a job has no released routing revision or the shared jobs' specs "
            "are not compatible."
        ),
        request=s.ReleaseInputSerializer,
        parameters=[JOB_NUMBER_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: s.ReleaseSerializer, 200: s.ReleaseSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, number: str) -> Response:
        data = parse(s.ReleaseInputSerializer, _body(request))
        person = people.person_for(request.user)
        share = [(x["job"], x["boards_per_panel"]) for x in data.get("share_with") or []]

        def action() -> tuple[int, Any]:
            result = services.release_job(
                person=person,
                number=number,
                boards_per_panel=data["boards_per_panel"],
                share_with=share,
            )
            return (201 if result.created else 200), s.release_dict(result)

        return idempotent(request, action)


class JobMakeupView(JsonAPIView):
    permission_classes = [CanPlan]

    @extend_schema(
        operation_id="jobs_makeup",
        summary="Release make-up panels for a job with a shortfall",
        request=s.MakeupInputSerializer,
        parameters=[JOB_NUMBER_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: s.ReleaseSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, number: str) -> Response:
        data = parse(s.MakeupInputSerializer, _body(request))
        person = people.person_for(request.user)

        def action() -> tuple[int, Any]:
            result = services.release_makeup(
                person=person, number=number, panels=data.get("panels")
            )
            return 201, s.release_dict(result)

        return idempotent(request, action)
