"""API for shipments (ERP) and the floor's material, scrap and acceptance records.

Thin: parse the body, check the role, call one service inside the Idempotency-Key
wrapper. A shipment the records do not support is a 409 listing every reason.
"""

from __future__ import annotations

from typing import Any

from django.http import HttpResponse
from django.urls import reverse
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView

from shopfloor.api_base import (
    ID_IN_PATH,
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
from shopfloor.errors import NotFound
from shopfloor.floor import services as floor
from shopfloor.floor.permissions import CanWorkSteps, access_step
from shopfloor.plant import people
from shopfloor.quality.models import Nonconformance
from shopfloor.quality.services import dispositions
from shopfloor.shipping import services

SHIP_ROLES = services.SHIP_ROLES
CERT_READ_ROLES = services.CERTIFICATE_READ_ROLES


class CanShip(RolePermission):
    roles = SHIP_ROLES
    what = "ship jobs"


class CanReadCertificates(RolePermission):
    roles = CERT_READ_ROLES
    what = "read certificates of conformance"


class CanDisposition(RolePermission):
    roles = frozenset({"quality_engineer"})
    what = "disposition nonconformances"


# --- shipments ----------------------------------------------------------------------------


class ShipmentInputSerializer(serializers.Serializer):
    job = serializers.CharField(max_length=30, help_text="Job (work order) number")
    quantity = serializers.IntegerField(min_value=1, max_value=10_000_000)
    lots = serializers.ListField(
        child=serializers.CharField(max_length=30),
        min_length=1,
        max_length=services.MAX_LOTS,
        help_text="Lot codes the boards come from, in the order to draw from",
    )


class ShipmentLotSerializer(serializers.Serializer):
    lot = serializers.CharField()
    boards = serializers.IntegerField()


class ShipmentSerializer(serializers.Serializer):
    shipment = serializers.CharField()
    job = serializers.CharField()
    quantity = serializers.IntegerField()
    lots = ShipmentLotSerializer(many=True)
    certificate = serializers.CharField(help_text="Certificate of conformance number")
    certificate_url = serializers.CharField(help_text="Link to the certificate PDF")
    job_shipped = serializers.IntegerField(help_text="Boards of the job shipped so far")
    job_closed = serializers.BooleanField(help_text="The ordered quantity has shipped")


def _shipment_body(request: Request, cert: Any) -> dict[str, Any]:
    shipment = cert.shipment
    job = shipment.job
    shipped = services.shipped_quantity(job)
    return {
        "shipment": shipment.number,
        "job": job.number,
        "quantity": shipment.quantity,
        "lots": [
            {"lot": s.lot.code, "boards": s.boards} for s in shipment.lots.select_related("lot")
        ],
        "certificate": cert.number,
        "certificate_url": request.build_absolute_uri(
            reverse("api-certificate-pdf", args=[cert.number])
        ),
        "job_shipped": shipped,
        "job_closed": shipped >= job.quantity,
    }


class ShipmentCreateView(JsonAPIView):
    permission_classes = [CanShip]

    @extend_schema(
        operation_id="shipments_create",
        summary="Ship N boards of a job from completed lots and issue the certificate",
        description=(
            "Issues the certificate of conformance only when every lot named has completed "
            "every step, every required reading is in window or covered by a signed "
            "deviation or disposition, and no NCR on those lots is open; otherwise 409 with "
            "every reason and nothing saved. Partial shipments are allowed; the job closes "
            "when its ordered quantity has shipped."
        ),
        request=ShipmentInputSerializer,
        parameters=[IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={
            201: ShipmentSerializer,
            **WRITE_ERRORS,
            409: error("The certificate cannot be issued; problems lists every reason"),
        },
    )
    def post(self, request: Request) -> Response:
        data = parse(ShipmentInputSerializer, request.data)
        person = people.person_for(request.user)

        def action() -> tuple[int, Any]:
            cert = services.ship(
                person=person,
                job_number=data["job"],
                quantity=data["quantity"],
                lot_codes=list(data["lots"]),
            )
            return 201, _shipment_body(request, cert)

        return idempotent(request, action)


CERT_NUMBER_IN_PATH = OpenApiParameter(
    "number",
    {"type": "string", "pattern": "^[^/]+$", "maxLength": 20},
    OpenApiParameter.PATH,
    description="Certificate number, e.g. COC-000001",
)


class CertificatePdfView(APIView):
    permission_classes = [CanReadCertificates]

    @extend_schema(
        operation_id="certificates_pdf",
        summary="The certificate of conformance as issued (PDF)",
        parameters=[CERT_NUMBER_IN_PATH],
        responses={
            (200, "application/pdf"): OpenApiResponse(OpenApiTypes.BINARY),
            **READ_ERRORS,
        },
    )
    def get(self, request: Request, number: str) -> HttpResponse:
        cert = services.certificate_by_number(number)
        response = HttpResponse(bytes(cert.pdf), content_type="application/pdf")
        response["Content-Disposition"] = f'inline; filename="{cert.number}.pdf"'
        return response


# --- floor records: materials, scrap, accepted quantity ---------------------------------


class MaterialInputSerializer(serializers.Serializer):
    material_lot = serializers.CharField(max_length=60, help_text="Material lot code as scanned")


class MaterialUseSerializer(serializers.Serializer):
    lot_step = serializers.IntegerField(source="lot_step_id")
    material_lot = serializers.CharField(source="material_lot.code")
    kind = serializers.CharField()
    missing = serializers.ListField(child=serializers.CharField())


class MaterialUseView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @extend_schema(
        operation_id="steps_materials_create",
        summary="Record the material lot a step consumes (shelf life and expiry checked)",
        request=MaterialInputSerializer,
        parameters=[ID_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: MaterialUseSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(MaterialInputSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            use = floor.record_material(
                person=person, lot_step_id=step.pk, code=data["material_lot"], via="api"
            )
            step.refresh_from_db()
            return 201, {
                "lot_step": step.pk,
                "material_lot": use.material_lot.code,
                "kind": use.kind,
                "missing": floor.missing_materials(step),
            }

        return idempotent(request, action)


class ScrapInputSerializer(serializers.Serializer):
    panel = serializers.CharField(max_length=40, help_text="Panel serial")
    boards = serializers.IntegerField(
        min_value=1, required=False, help_text="Boards crossed out; leave out to scrap the panel"
    )
    job = serializers.CharField(
        max_length=30, required=False, help_text="When the panel has several jobs"
    )
    reason = serializers.CharField(max_length=30, help_text="Scrap reason code (site list)")
    note = serializers.CharField(max_length=300, required=False, allow_blank=True)


class ScrapResultSerializer(serializers.Serializer):
    lot_step = serializers.IntegerField()
    panel = serializers.CharField()
    boards = serializers.IntegerField()
    panel_scrapped = serializers.BooleanField()


class ScrapView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @extend_schema(
        operation_id="steps_scrap_create",
        summary="Scrap boards on a panel, or a whole panel, at the current step",
        request=ScrapInputSerializer,
        parameters=[ID_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: ScrapResultSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(ScrapInputSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            records = floor.record_scrap(
                person=person,
                lot_step_id=step.pk,
                panel_serial=data["panel"],
                reason_code=data["reason"],
                boards=data.get("boards"),
                job_number=data.get("job"),
                note=data.get("note") or "",
            )
            return 201, {
                "lot_step": step.pk,
                "panel": data["panel"],
                "boards": sum(r.boards for r in records),
                "panel_scrapped": records[0].panel_scrapped,
            }

        return idempotent(request, action)


class AcceptanceInputSerializer(serializers.Serializer):
    accepted = serializers.DictField(
        child=serializers.IntegerField(min_value=0), help_text="Job number -> boards accepted"
    )
    reason = serializers.CharField(
        max_length=30, required=False, allow_blank=True, help_text="Scrap reason for the rest"
    )


class AcceptanceResultSerializer(serializers.Serializer):
    lot_step = serializers.IntegerField()
    accepted = serializers.DictField(child=serializers.IntegerField())


class AcceptanceView(JsonAPIView):
    permission_classes = [CanWorkSteps]

    @extend_schema(
        operation_id="steps_accepted_create",
        summary="Final inspection: record the boards accepted per job",
        request=AcceptanceInputSerializer,
        parameters=[ID_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={201: AcceptanceResultSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, pk: int) -> Response:
        data = parse(AcceptanceInputSerializer, request.data)
        person = people.person_for(request.user)
        step = access_step(request, pk)

        def action() -> tuple[int, Any]:
            rows = floor.record_acceptance(
                person=person,
                lot_step_id=step.pk,
                accepted=dict(data["accepted"]),
                reason_code=data.get("reason") or "",
            )
            return 201, {"lot_step": step.pk, "accepted": {r.job.number: r.boards for r in rows}}

        return idempotent(request, action)


# --- dispositions ---------------------------------------------------------------------------


class DispositionInputSerializer(serializers.Serializer):
    disposition = serializers.ChoiceField(
        choices=["use_as_is", "rework", "scrap"],
        required=False,
        help_text="For the whole lot; leave out when panel_actions decides per panel",
    )
    panel_actions = serializers.DictField(
        child=serializers.ChoiceField(choices=["use_as_is", "rework", "scrap"]),
        required=False,
        help_text="Panel serial -> use_as_is | rework | scrap; every live panel needs one",
    )
    rework_route = serializers.ListField(
        child=serializers.CharField(max_length=60),
        required=False,
        max_length=10,
        help_text="Process-library step codes; default: the library's rework for the step",
    )
    scrap_reason = serializers.CharField(max_length=30, required=False, allow_blank=True)
    root_cause = serializers.CharField(max_length=30)
    corrective_action = serializers.CharField(max_length=2000)
    note = serializers.CharField(max_length=2000)
    pin = serializers.CharField(max_length=20)


class DispositionResultSerializer(serializers.Serializer):
    ncr = serializers.CharField()
    disposition = serializers.CharField()
    panels = serializers.DictField(child=serializers.CharField())
    rework_steps = serializers.ListField(child=serializers.CharField())
    lot_on_hold = serializers.BooleanField()


NCR_NUMBER_IN_PATH = OpenApiParameter(
    "number",
    {"type": "string", "pattern": "^[^/]+$", "maxLength": 20},
    OpenApiParameter.PATH,
    description="NCR number, e.g. NCR-000001",
)


class DispositionView(JsonAPIView):
    permission_classes = [CanDisposition]

    @extend_schema(
        operation_id="ncrs_disposition_create",
        summary="Disposition an NCR (per panel if need be), signed with the PIN",
        request=DispositionInputSerializer,
        parameters=[NCR_NUMBER_IN_PATH, IDEMPOTENCY_KEY, REPLAY_HEADER],
        responses={200: DispositionResultSerializer, **WRITE_ERRORS},
    )
    def post(self, request: Request, number: str) -> Response:

        data = parse(DispositionInputSerializer, request.data)
        person = people.person_for(request.user)
        ncr = Nonconformance.objects.filter(number=number).first()
        if ncr is None:
            raise NotFound(f"No NCR {number!r}.")

        def action() -> tuple[int, Any]:
            done = dispositions.disposition_ncr(
                person,
                ncr.pk,
                data.get("disposition") or "",
                data["note"],
                data["pin"],
                panel_actions=data.get("panel_actions") or None,
                rework_route=data.get("rework_route") or None,
                root_cause=data["root_cause"],
                corrective_action=data["corrective_action"],
                scrap_reason=data.get("scrap_reason") or "",
            )
            done.lot.refresh_from_db()
            return 200, {
                "ncr": done.number,
                "disposition": done.disposition,
                "panels": done.panel_actions,
                "rework_steps": list(
                    done.rework_steps.order_by("position").values_list("name", flat=True)
                ),
                "lot_on_hold": done.lot.on_hold,
            }

        return idempotent(request, action)


__all__ = [
    "AcceptanceView",
    "CertificatePdfView",
    "DispositionView",
    "MaterialUseView",
    "ScrapView",
    "ShipmentCreateView",
]
