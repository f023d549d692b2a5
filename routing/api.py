"""API for process engineering: preview a routing from a build spec (nothing saved)."""

from __future__ import annotations

from typing import Any

from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiExample, extend_schema
from rest_framework import serializers as drf_serializers
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from routing import services
from routing.builder import render
from routing.builder.examples import EXAMPLE_SPEC
from routing.serializers import (
    DesignImportRequestSerializer,
    DesignImportSerializer,
    PreviewRequestSerializer,
    PreviewSerializer,
)
from shopfloor.access import ENGINEER_ROLES
from shopfloor.api_base import (
    IDEMPOTENCY_KEY,
    READ_ERRORS,
    REPLAY_HEADER,
    WRITE_ERRORS,
    JsonAPIView,
    RolePermission,
    error,
    idempotent,
    parse,
)
from shopfloor.api_parsers import NulSafeMultiPartParser
from shopfloor.errors import InvalidInput
from shopfloor.floor.permissions import CanEngineer, CanRead
from shopfloor.plant.people import person_for


def split_preview_body(data: Any) -> tuple[Any, list[dict[str, Any]]]:
    """Accept the spec itself or {"spec": ..., "overrides": [...]}; return (spec, overrides)."""
    if isinstance(data, dict) and "spec" in data:
        # Only a list of objects (or no key at all): a false-y value of the wrong type (0,
        # "", {}, null) is refused like any other, as the schema says.
        overrides = data.get("overrides", [])
        if not isinstance(overrides, list) or not all(isinstance(o, dict) for o in overrides):
            raise InvalidInput(
                "overrides must be a list of objects.",
                problems=[
                    {
                        "field": "overrides",
                        "value": None,
                        "problem": "not a list of objects",
                        "allowed": "[{quantity, step_code, min, max, target, reason}]",
                    }
                ],
            )
        unknown = sorted(set(data) - {"spec", "overrides"})
        if unknown:
            raise InvalidInput(
                f"Unknown key(s) beside spec: {', '.join(unknown)}.",
                problems=[
                    {
                        "field": k,
                        "value": None,
                        "problem": "unknown key",
                        "allowed": ["spec", "overrides"],
                    }
                    for k in unknown
                ],
            )
        return data["spec"], overrides
    return data, []


class PreviewView(JsonAPIView):
    permission_classes = [CanRead]

    @extend_schema(
        operation_id="routing_preview",
        summary="Preview the routing a build spec would get (nothing is saved)",
        description=(
            'Send the build spec itself, or {"spec": ..., "overrides": [...]}. A bad spec '
            "gets 400 with every problem listed (field, value, problem, allowed)."
        ),
        request=PreviewRequestSerializer,
        responses={
            200: PreviewSerializer,
            400: error("The spec has problems; every one listed with what is allowed"),
            **READ_ERRORS,
            415: error("Send the body as application/json"),
        },
        examples=[OpenApiExample("4-layer ENIG", value={"spec": EXAMPLE_SPEC}, request_only=True)],
    )
    def post(self, request: Request) -> Response:
        spec, overrides = split_preview_body(request.data)
        return Response(services.preview(spec, overrides))


class CanImportDesigns(RolePermission):
    """Design import is process engineering's tool (it reads up to 150 MB per request)."""

    roles = ENGINEER_ROLES
    what = "import design files"


class ImportDesignView(APIView):
    """Read an uploaded IPC-2581 file into a draft build spec; nothing is saved."""

    permission_classes = [CanImportDesigns]
    parser_classes = [NulSafeMultiPartParser]

    @extend_schema(
        operation_id="routing_import_design",
        summary="Import an IPC-2581 design file (revision B, B1 or C) as a draft build spec",
        description=(
            "Send the file as multipart field `file`. The reply is the draft build spec "
            "(only what the file states), the fields still to fill in (finish, class, mask "
            "colour, profile, electrical test, and anything the file leaves out), warnings, "
            "and where it came from (revision, units, exporter, thickness basis, microvia "
            "rule). Nothing is saved. A file that is not IPC-2581, an unsupported revision, "
            "broken XML or one declaring a DTD gets 400 naming what was found."
        ),
        request=DesignImportRequestSerializer,
        responses={
            200: DesignImportSerializer,
            400: error("Not an IPC-2581 file, unsupported revision, broken XML, DTD, no file"),
            **READ_ERRORS,
            415: error("Send the file as multipart/form-data"),
        },
    )
    def post(self, request: Request) -> Response:
        upload = request.FILES.get("file")
        if upload is None:
            raise InvalidInput(
                "Send the design file as multipart form field 'file'.",
                problems=[
                    {
                        "field": "file",
                        "value": None,
                        "problem": "missing",
                        "allowed": "an IPC-2581 XML file, revision B, B1 or C",
                    }
                ],
            )
        result = services.import_design(upload, name=upload.name or "", size=upload.size)
        return Response(result.as_dict())


# --- authoring through the API (the ERP / engineering tools path) -------------------------


class SpecBodySerializer(drf_serializers.Serializer):
    """The build spec itself (README "Build spec"); checked by validate_spec."""


class DraftInputSerializer(drf_serializers.Serializer):
    reason = drf_serializers.CharField(max_length=300, required=False, allow_blank=True)
    overrides = drf_serializers.ListField(
        child=drf_serializers.DictField(), required=False, help_text="Customer window overrides"
    )
    deviation_pin = drf_serializers.CharField(
        required=False, allow_blank=True, help_text="Your PIN: needed for a looser override"
    )


class RoutingReleaseInputSerializer(drf_serializers.Serializer):
    pin = drf_serializers.CharField(help_text="Your PIN: the release e-signature")


def revision_dict(revision: Any) -> dict[str, Any]:

    previous = revision.previous
    return {
        "id": revision.pk,
        "part_revision": revision.part_revision_id,
        "number": revision.number,
        "status": revision.status,
        "ipc_class": revision.ipc_class,
        "reason": revision.reason,
        "steps": len(revision.built.get("steps", [])),
        "changes": render.diff_table(previous.built, revision.built) if previous else [],
    }


class PartRevisionSpecView(JsonAPIView):
    permission_classes = [CanEngineer]

    @extend_schema(
        operation_id="part_revision_spec_set",
        summary="Store a part revision's build spec (validated; stored normalised)",
        description="The same validator as the authoring form, the command and the admin.",
        request=SpecBodySerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={200: OpenApiTypes.OBJECT, **WRITE_ERRORS},
    )
    def put(self, request: Request, pk: int) -> Response:
        person = person_for(request.user)

        def action() -> tuple[int, Any]:
            pr = services.set_spec(person=person, part_revision_id=pk, spec=request.data)
            return 200, {"part_revision": pr.pk, "build_spec": pr.build_spec}

        return idempotent(request, action)


class DraftCreateView(JsonAPIView):
    permission_classes = [CanEngineer]

    @extend_schema(
        operation_id="routing_draft_create",
        summary="Draft a routing revision from the part revision's build spec",
        request=DraftInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: OpenApiTypes.OBJECT, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(DraftInputSerializer, request.data)
        person = person_for(request.user)

        def action() -> tuple[int, Any]:
            revision = services.create_draft(
                person=person,
                part_revision_id=pk,
                reason=data.get("reason") or "",
                overrides=data.get("overrides") or [],
                deviation_pin=data.get("deviation_pin") or None,
            )
            return 201, revision_dict(revision)

        return idempotent(request, action)


class RevisionReleaseView(JsonAPIView):
    permission_classes = [CanEngineer]

    @extend_schema(
        operation_id="routing_revision_release",
        summary="Release a draft routing revision with the PIN (refused when identical)",
        request=RoutingReleaseInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={200: OpenApiTypes.OBJECT, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(RoutingReleaseInputSerializer, request.data)
        person = person_for(request.user)

        def action() -> tuple[int, Any]:
            revision = services.release(person=person, revision_id=pk, pin=data["pin"])
            return 200, revision_dict(revision)

        return idempotent(request, action)
