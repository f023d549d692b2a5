"""API shapes for the routing preview (the preview contract of routing.builder.render)."""

from __future__ import annotations

from typing import Any

from drf_spectacular.utils import extend_schema_field
from rest_framework import serializers

from routing.builder.spec_schema import spec_json_schema
from shopfloor.floor.serializers import WindowSerializer


def build_spec_schema() -> dict[str, Any]:
    """The build spec's JSON schema from the builder, minus the keys OpenAPI 3.0 rejects."""
    schema = dict(spec_json_schema())
    for key in ("$schema", "title"):
        schema.pop(key, None)
    return _openapi30(schema)


def _openapi30(node: Any) -> Any:
    """JSON Schema 2020-12 to OpenAPI 3.0: exclusiveMinimum is a flag there, not a number."""
    if isinstance(node, list):
        return [_openapi30(n) for n in node]
    if not isinstance(node, dict):
        return node
    out = {k: _openapi30(v) for k, v in node.items()}
    for bound, flag in (("exclusiveMinimum", "minimum"), ("exclusiveMaximum", "maximum")):
        value = out.get(bound)
        if isinstance(value, int | float) and not isinstance(value, bool):
            out[flag] = value
            out[bound] = True
    return out


@extend_schema_field(build_spec_schema())
class BuildSpecField(serializers.JSONField):
    """A build spec; routing.builder.spec.parse_spec checks it fully (shop rules too)."""


class PreviewRequestSerializer(serializers.Serializer):
    """Either the build spec itself, or {"spec": ..., "overrides": [...]}."""

    spec = BuildSpecField()
    overrides = serializers.ListField(
        child=serializers.DictField(),
        required=False,
        help_text="Customer window overrides: quantity, step_code, min, max, target, reason",
    )


class PreviewStepSerializer(serializers.Serializer):
    seq = serializers.IntegerField()
    code = serializers.CharField()
    name = serializers.CharField()
    work_center = serializers.CharField()
    instructions = serializers.CharField(allow_blank=True)
    parameters = serializers.DictField()
    hazard = serializers.CharField(
        allow_null=True, allow_blank=True, help_text="Caution text; defer to site safety procedures"
    )
    queue_time_limit_minutes = serializers.IntegerField(allow_null=True)
    standard_minutes = serializers.IntegerField()
    cycle = serializers.IntegerField(allow_null=True)
    measurements = WindowSerializer(many=True)
    criteria_in_words = serializers.ListField(
        child=serializers.DictField(child=serializers.CharField()),
        required=False,
        help_text=(
            "One line per quantity with every entry in plain words, e.g. "
            "'average of 5 samples ≥ 25 µm; each ≥ 20 µm'"
        ),
    )


class PreviewSerializer(serializers.Serializer):
    """The preview contract: steps with windows (and sources), and warnings."""

    steps = PreviewStepSerializer(many=True)
    warnings = serializers.ListField(child=serializers.CharField())
    lamination_cycles = serializers.IntegerField(required=False)
    aspect_ratio = serializers.FloatField(required=False)


class DesignImportRequestSerializer(serializers.Serializer):
    file = serializers.FileField(help_text="The IPC-2581 XML file (revision B, B1 or C)")


class DesignImportSourceSerializer(serializers.Serializer):
    revision = serializers.CharField()
    units = serializers.CharField()
    exporter = serializers.CharField(allow_null=True)
    stackup = serializers.CharField(required=False, help_text="The stackup the spec was read from")
    thickness_basis = serializers.CharField(
        required=False, help_text="'over mask' or 'over metal' (or as the file states it)"
    )
    stated_thickness_mm = serializers.FloatField(required=False)
    microvia_rule = serializers.CharField(required=False)
    board_step = serializers.CharField(required=False)
    panel = serializers.DictField(required=False)
    from_file = serializers.ListField(child=serializers.CharField())


class DesignImportSerializer(serializers.Serializer):
    """The draft spec holds only what the file states; `to_fill` names the rest."""

    spec = serializers.DictField(help_text="Build spec keys stated by the file")
    to_fill = serializers.ListField(child=serializers.CharField())
    warnings = serializers.ListField(child=serializers.CharField())
    source = DesignImportSourceSerializer()  # type: ignore[assignment]  # DRF collects declared fields; the name clashes only in the stubs
