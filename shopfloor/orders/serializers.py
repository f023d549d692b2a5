"""API shapes for jobs: the entry body (for the docs), the job status and a release reply.

Input bodies are checked by shopfloor.orders.services (every problem at once, the same
checks as the job entry page); these serializers describe the shapes for OpenAPI and
write the replies.
"""

from __future__ import annotations

from typing import Any

from django.urls import reverse
from rest_framework import serializers

from shopfloor.orders import read, services


class OverrideSerializer(serializers.Serializer):
    quantity = serializers.CharField(help_text="A measured quantity, e.g. hole_wall_copper")
    step_code = serializers.CharField(required=False, help_text="Limit to one step")
    min = serializers.FloatField(required=False)
    max = serializers.FloatField(required=False)
    target = serializers.FloatField(required=False)
    reason = serializers.CharField(help_text="Why the customer asks for it")


class JobInputSerializer(serializers.Serializer):
    """What the ERP sends to enter a job (customer, part and revision picked or created)."""

    customer = serializers.CharField(help_text="Customer code; a new code needs customer_name")
    customer_name = serializers.CharField(required=False, help_text="Adds a new customer")
    part_number = serializers.CharField()
    part_description = serializers.CharField(required=False)
    part_revision = serializers.CharField(help_text="Created (without a build spec) when new")
    quantity = serializers.IntegerField(min_value=1, max_value=services.MAX_QUANTITY)
    due_date = serializers.DateField()
    ipc_class = serializers.ChoiceField(choices=[1, 2, 3])
    customer_spec_notes = serializers.CharField(required=False, allow_blank=True)
    customer_overrides = OverrideSerializer(many=True, required=False)
    number = serializers.CharField(
        required=False, help_text="The ERP's job number; blank = the next WO- number"
    )


class QuantitiesSerializer(serializers.Serializer):
    ordered = serializers.IntegerField()
    on_panels = serializers.IntegerField(help_text="Boards imaged on the job's panels")
    in_process = serializers.IntegerField(help_text="Boards on live panels of unfinished lots")
    finished = serializers.IntegerField(help_text="Boards of finished lots not yet shipped")
    scrapped = serializers.IntegerField()
    shipped = serializers.IntegerField()
    good_remaining = serializers.IntegerField(help_text="on_panels - scrapped")
    shortfall = serializers.IntegerField(
        help_text="ordered - good_remaining, when positive: make-up panels are needed"
    )


class LotLineSerializer(serializers.Serializer):
    code = serializers.CharField()
    status = serializers.CharField()
    on_hold = serializers.BooleanField()
    panels = serializers.IntegerField(help_text="Panels of this lot carrying the job")
    boards = serializers.IntegerField(help_text="The job's boards on those panels")
    current_step = serializers.CharField()


class JobSerializer(serializers.Serializer):
    number = serializers.CharField()
    customer = serializers.CharField()
    part_number = serializers.CharField()
    part_revision = serializers.CharField()
    part_revision_id = serializers.IntegerField(help_text="For the spec and routing endpoints")
    has_spec = serializers.BooleanField(help_text="False until a build spec is authored")
    ipc_class = serializers.IntegerField()
    due_date = serializers.DateField()
    status = serializers.ChoiceField(choices=list(read.STATUSES))
    status_label = serializers.CharField()
    quantities = QuantitiesSerializer()
    lots = LotLineSerializer(many=True)
    routing_revision = serializers.IntegerField(allow_null=True)
    projected_finish = serializers.DateTimeField(
        allow_null=True,
        help_text="P50 of the newest finish forecast (half of the simulated futures finish "
        "the job by then); null while no fresh forecast knows the job",
    )
    projected_finish_p90 = serializers.DateTimeField(
        allow_null=True, help_text="P90 of the same forecast (nine in ten finish by then)"
    )
    forecast_due_state = serializers.ChoiceField(
        choices=["on_time", "at_risk", "late"],
        allow_null=True,
        help_text="From P90 against the end of the due date; null without a forecast",
    )
    customer_spec_notes = serializers.CharField()
    customer_overrides = serializers.ListField(child=serializers.DictField())


def job_dict(summary: read.JobSummary) -> dict[str, Any]:
    job = summary.job
    part = job.part_revision.part
    return {
        "number": job.number,
        "customer": part.customer.code,
        "part_number": part.number,
        "part_revision": job.part_revision.revision,
        "part_revision_id": job.part_revision_id,
        "has_spec": bool(job.part_revision.build_spec),
        "ipc_class": job.ipc_class,
        "due_date": job.due_date,
        "status": summary.status,
        "status_label": summary.status_label,
        "quantities": summary.quantities.as_dict(),
        "lots": [
            {
                "code": lot.code,
                "status": lot.status,
                "on_hold": lot.on_hold,
                "panels": lot.panels,
                "boards": lot.boards,
                "current_step": lot.current_step,
            }
            for lot in summary.lots
        ],
        "routing_revision": job.routing_revision_id,
        "projected_finish": summary.projected_finish,
        "projected_finish_p90": summary.projected_finish_p90,
        "forecast_due_state": summary.forecast_due_state,
        "customer_spec_notes": job.customer_spec_notes,
        "customer_overrides": job.customer_overrides or [],
    }


class ShareSerializer(serializers.Serializer):
    job = serializers.CharField()
    boards_per_panel = serializers.IntegerField(min_value=1)


class ReleaseInputSerializer(serializers.Serializer):
    boards_per_panel = serializers.IntegerField(
        min_value=1, help_text="This job's images per panel"
    )
    share_with = ShareSerializer(
        many=True, required=False, help_text="Other unreleased jobs imaged on the same panels"
    )


class MakeupInputSerializer(serializers.Serializer):
    panels = serializers.IntegerField(
        min_value=1, required=False, help_text="Default: enough to cover the shortfall"
    )


class PanelSerializer(serializers.Serializer):
    serial = serializers.CharField()
    lot = serializers.CharField()


class ReleaseLotSerializer(serializers.Serializer):
    code = serializers.CharField()
    panels = serializers.IntegerField()
    routing_revision = serializers.IntegerField()
    traveller = serializers.CharField(help_text="Traveller PDF link")
    label = serializers.CharField(help_text="Lot label PDF link")  # type: ignore[assignment]  # DRF collects declared fields; the name clashes only in the stubs


class ReleaseSerializer(serializers.Serializer):
    jobs = serializers.ListField(child=serializers.CharField())
    created = serializers.BooleanField(help_text="False when the job was already released")
    routing_revision = serializers.IntegerField()
    lots = ReleaseLotSerializer(many=True)
    panels = PanelSerializer(many=True)


def release_dict(result: services.ReleaseResult) -> dict[str, Any]:

    return {
        "jobs": [j.number for j in result.jobs],
        "created": result.created,
        "routing_revision": result.routing_revision.pk,
        "lots": [
            {
                "code": lot.code,
                "panels": lot.panel_count,
                "routing_revision": lot.routing_revision_id,
                "traveller": reverse("floor:traveller_pdf", args=[lot.code]),
                "label": reverse("orders:lot_label", args=[lot.code]),
            }
            for lot in result.lots
        ],
        "panels": [{"serial": p.serial, "lot": p.lot.code} for p in result.panels],
    }
