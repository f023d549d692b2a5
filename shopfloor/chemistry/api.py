"""Bath chemistry API: tanks with their plan state, analyses (post), and exposed lots.

Thin: parse with a serializer, check the role, call one service inside the
Idempotency-Key wrapper, serialize. Errors use the one error shape (shopfloor.api_errors).
"""

from __future__ import annotations

from typing import Any

from drf_spectacular.utils import OpenApiParameter, extend_schema
from rest_framework import serializers
from rest_framework.request import Request
from rest_framework.response import Response

from shopfloor.api_base import (
    ID_IN_PATH,
    IDEMPOTENCY_KEY,
    READ_ERRORS,
    REPLAY_HEADER,
    WRITE_ERRORS,
    JsonAPIView,
    RolePermission,
    idempotent,
    parse,
)
from shopfloor.chemistry import read, services
from shopfloor.chemistry.models import Analysis, Tank
from shopfloor.floor.permissions import READ_ROLES
from shopfloor.plant.people import person_for


class CanReadBaths(RolePermission):
    """Tanks, plans, analyses and exposures: every role, no instruments."""

    roles = READ_ROLES
    what = "read bath analyses"


class CanReadExposure(RolePermission):
    """Exposed lots span every work center: every role but operators."""

    roles = READ_ROLES - {"operator"}
    what = "read the lots a bath exposed"


class CanEnterAnalyses(RolePermission):
    """Post analyses: lab technicians, process engineers, administrators."""

    roles = frozenset(str(r) for r in services.LAB_ROLES)
    what = "enter bath analyses"


class AnalysisInputSerializer(serializers.Serializer):
    tank = serializers.CharField(max_length=40, help_text="Tank code")
    parameter = serializers.CharField(max_length=40, help_text="Plan parameter code")
    value = serializers.CharField(max_length=40, help_text="The analysed value, as read")
    unit = serializers.CharField(
        max_length=20,
        required=False,
        allow_blank=True,
        help_text="g/L, mg/L, mL/L, % v/v, oz/gal, SG, pH, °C ...; blank = the plan's unit",
    )
    taken_at = serializers.DateTimeField(
        required=False, allow_null=True, help_text="When sampled, with a time zone; none = now"
    )
    amp_hours = serializers.FloatField(required=False, allow_null=True, min_value=0)
    note = serializers.CharField(max_length=300, required=False, allow_blank=True)


class AnalysisSerializer(serializers.Serializer):
    id = serializers.IntegerField()
    tank = serializers.CharField(source="tank.code")
    parameter = serializers.CharField(source="parameter.code")
    value = serializers.FloatField(help_text="In the canonical unit (window.unit)")
    entered_value = serializers.CharField()
    entered_unit = serializers.CharField()
    window = serializers.DictField(help_text="low, high, target, unit and source")
    in_window = serializers.BooleanField()
    taken_at = serializers.DateTimeField()
    analyst = serializers.CharField(source="analyst.badge_number")
    lots_exposed = serializers.SerializerMethodField()

    def get_lots_exposed(self, obj: Analysis) -> list[str]:
        if obj.in_window:
            return []
        return [lot.code for lot in read.exposure(obj).lots]


class ParameterStateSerializer(serializers.Serializer):
    code = serializers.CharField(source="parameter.code")
    name = serializers.CharField(source="parameter.name")
    unit = serializers.CharField(source="parameter.unit")
    window = serializers.SerializerMethodField()
    last_value = serializers.CharField()
    in_window = serializers.BooleanField(allow_null=True)
    due = serializers.CharField(source="due.state", help_text="ok, due or overdue")
    due_at = serializers.DateTimeField(source="due.due_at", allow_null=True)

    def get_window(self, obj: read.ParameterRow) -> str:
        return read.window_text(obj.parameter)


class TankStateSerializer(serializers.Serializer):
    code = serializers.CharField(source="tank.code")
    name = serializers.CharField(source="tank.name")
    work_center = serializers.CharField(source="tank.work_center.code")
    kind = serializers.CharField(source="tank.kind")
    volume_l = serializers.FloatField(source="tank.volume_l")
    flagged = serializers.BooleanField(help_text="A parameter's last analysis is out of window")
    parameters = ParameterStateSerializer(source="rows", many=True)


class ExposedStepSerializer(serializers.Serializer):
    lot = serializers.CharField(source="lot_step.lot.code")
    step = serializers.CharField(source="lot_step.name")
    used_at = serializers.DateTimeField()
    on_hold = serializers.BooleanField(source="lot_step.lot.on_hold")


class ExposureSerializer(serializers.Serializer):
    analysis = serializers.IntegerField(source="analysis.pk")
    since = serializers.DateTimeField(allow_null=True)
    until = serializers.DateTimeField(allow_null=True)
    steps = ExposedStepSerializer(source="uses", many=True)


TANK_CODE = OpenApiParameter(
    "code", {"type": "string", "pattern": "^[^/]+$", "maxLength": 40}, OpenApiParameter.PATH
)


class TankListView(JsonAPIView):
    permission_classes = [CanReadBaths]

    @extend_schema(
        operation_id="tanks_list",
        summary="Every tank with its analysis plan's state (last value, due, overdue)",
        responses={200: TankStateSerializer(many=True), **READ_ERRORS},
    )
    def get(self, request: Request) -> Response:
        return Response(TankStateSerializer(read.tank_rows(), many=True).data)


class TankDetailView(JsonAPIView):
    permission_classes = [CanReadBaths]

    @extend_schema(
        operation_id="tanks_read",
        summary="One tank with its analysis plan's state",
        parameters=[TANK_CODE],
        responses={200: TankStateSerializer, **READ_ERRORS},
    )
    def get(self, request: Request, code: str) -> Response:
        tank = read.get_tank(code)
        rows = read.tank_rows(tanks=Tank.objects.filter(pk=tank.pk))
        return Response(TankStateSerializer(rows[0]).data)


class AnalysisCreateView(JsonAPIView):
    permission_classes = [CanEnterAnalyses]

    @extend_schema(
        operation_id="analyses_create",
        summary="Record a bath analysis",
        description=(
            "Converts the value to the parameter's canonical unit, judges it against the "
            "plan's window (with its source) and, when out of window, flags the tank and "
            "lists the lots exposed since the last in-window analysis."
        ),
        request=AnalysisInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: AnalysisSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request) -> Response:
        data = parse(AnalysisInputSerializer, request.data)
        person = person_for(request.user)
        analysis_input = services.AnalysisInput(
            parameter=data["parameter"],
            value=data["value"],
            unit=data.get("unit") or "",
            taken_at=data.get("taken_at"),
            amp_hours=data.get("amp_hours"),
            note=data.get("note") or "",
        )

        def action() -> tuple[int, Any]:
            analysis = services.record_analysis(
                person=person, tank_code=data["tank"], data=analysis_input, via="api"
            )
            return 201, AnalysisSerializer(analysis).data

        return idempotent(request, action)


class ExposureView(JsonAPIView):
    permission_classes = [CanReadExposure]

    @extend_schema(
        operation_id="analyses_exposure",
        summary="Lot steps that ran in the tank since its last in-window analysis",
        parameters=[ID_IN_PATH],
        responses={200: ExposureSerializer, **READ_ERRORS},
    )
    def get(self, request: Request, pk: int) -> Response:
        return Response(ExposureSerializer(read.exposure(read.get_analysis(pk))).data)
