"""API: a what-if quote (P50 / P90 ship dates for an order not yet released)."""

from __future__ import annotations

from drf_spectacular.utils import OpenApiExample, extend_schema
from rest_framework import serializers
from rest_framework.request import Request
from rest_framework.response import Response

from routing.builder.examples import EXAMPLE_SPEC
from shopfloor.api_base import READ_ERRORS, JsonAPIView, RolePermission, error
from shopfloor.floor.permissions import roles_of
from shopfloor.planning import services


class CanPlan(RolePermission):
    roles = services.PLANNING_ROLES
    what = "quote ship dates"


class QuoteRequestSerializer(serializers.Serializer):
    spec = serializers.JSONField(help_text="A build spec (README 'Build spec')")
    quantity = serializers.IntegerField(min_value=1, max_value=1_000_000, help_text="Boards")
    priority = serializers.IntegerField(
        required=False, default=100, help_text="Lot priority; lower runs first (default 100)"
    )
    boards_per_panel = serializers.IntegerField(
        required=False, default=services.DEFAULT_BOARDS_PER_PANEL, min_value=1, max_value=500
    )
    panels_per_lot = serializers.IntegerField(
        required=False, default=services.DEFAULT_PANELS_PER_LOT, min_value=1, max_value=500
    )


class QuoteSerializer(serializers.Serializer):
    p50_ship_date = serializers.DateField(help_text="Half of the simulated futures ship by then")
    p90_ship_date = serializers.DateField(help_text="Nine in ten simulated futures ship by then")
    p50_finish = serializers.DateTimeField()
    p90_finish = serializers.DateTimeField()
    lots = serializers.IntegerField()
    panels = serializers.IntegerField()
    steps_per_lot = serializers.IntegerField()
    standard_minutes_per_lot = serializers.IntegerField()
    replications = serializers.IntegerField()
    wip_lots = serializers.IntegerField(help_text="Lots already on the floor it queued among")


class QuoteView(JsonAPIView):
    permission_classes = [CanPlan]

    @extend_schema(
        operation_id="planning_quote",
        summary="P50 / P90 ship dates for a spec and quantity not yet released",
        description=(
            "Builds the spec's routing with the current process library, turns the quantity "
            "into lots, inserts them into today's work in progress with the given priority "
            "and simulates the floor. Nothing is saved. A bad spec gets 400 with every "
            "problem listed."
        ),
        request=QuoteRequestSerializer,
        responses={
            200: QuoteSerializer,
            400: error("The body or the spec has problems; each listed with what is allowed"),
            **READ_ERRORS,
            415: error("Send the body as application/json"),
        },
        examples=[
            OpenApiExample(
                "400 boards, 4-layer ENIG",
                value={"spec": EXAMPLE_SPEC, "quantity": 400, "priority": 50},
                request_only=True,
            )
        ],
    )
    def post(self, request: Request) -> Response:
        return Response(services.quote(roles_of(request.user), request.data).as_dict())
