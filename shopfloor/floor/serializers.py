"""API input and output shapes for lots, steps and readings.

Input serializers check types and ranges only (so a bad body gets every problem at
once, with nothing saved); the shop rules (window, units, current step, calibration)
stay in shopfloor.floor.services, which the tablet pages call too.
"""

from __future__ import annotations

import math
import re
from typing import Any

from django.core.validators import RegexValidator
from django.utils import timezone
from drf_spectacular.utils import extend_schema_field
from rest_framework import serializers

from routing.builder import labels
from shopfloor.core import judging, units
from shopfloor.floor import batch, services
from shopfloor.floor.models import LotStep, Reading

MAX_ID = 2**63 - 1

#: A reading typed as text: ASCII digits, optional sign, point and a 1-2 digit exponent,
#: with surrounding spaces (which are dropped). The schema publishes this same pattern,
#: so what the schema allows the server accepts and nothing else (every such number is
#: finite: at most 40 characters, exponent at most 99).
VALUE_TEXT_PATTERN = r"^\s*[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]{1,2})?\s*$"
_VALUE_TEXT = re.compile(VALUE_TEXT_PATTERN, re.ASCII)


class ExactCharField(serializers.CharField):
    """A CharField whose limits mean what the schema says.

    DRF trims surrounding whitespace (control characters included) before checking
    max_length, so 300 characters plus trailing control characters passed a 300-character
    limit the schema published; here the limit applies to the text as sent. A field that
    may not be blank publishes the pattern "\\S" (some non-space character), which is
    what DRF's trimming enforces.
    """

    def __init__(self, **kwargs: Any) -> None:
        if not kwargs.get("allow_blank", False):
            kwargs.setdefault("validators", []).append(
                RegexValidator(r"\S", message="This field may not be blank.")
            )
        super().__init__(**kwargs)

    def run_validation(self, data: Any = serializers.empty) -> Any:
        if isinstance(data, str) and self.max_length is not None and len(data) > self.max_length:
            self.fail("max_length", max_length=self.max_length)
        return super().run_validation(data)


class ErrorSerializer(serializers.Serializer):
    """Every refusal: a code, a sentence for people, and the problems one by one."""

    error = serializers.CharField(help_text="Machine-readable code, e.g. invalid, conflict")
    detail = serializers.CharField(help_text="What was wrong and what to do")
    problems = serializers.ListField(
        child=serializers.DictField(),
        required=False,
        help_text="One entry per problem: field, value, problem, allowed",
    )


@extend_schema_field(
    {
        "oneOf": [
            {"type": "number", "minimum": -(10**15), "maximum": 10**15},
            {"type": "string", "minLength": 1, "maxLength": 40, "pattern": VALUE_TEXT_PATTERN},
        ],
        "example": 22.5,
    }
)
class NumberOrTextField(serializers.Field):
    """A reading value as typed: a JSON number or numeric text ("12.5"), never a bool.

    The text is kept as entered (it is stored beside the converted value); the unit
    conversion in shopfloor.core.units decides what is plausible for the quantity.
    """

    default_error_messages = {
        "invalid": "Give a number such as 12.5: ASCII digits with an optional sign, decimal "
        "point and exponent (a point as the decimal separator).",
        "not_finite": "The value must be a finite number (not NaN or infinity).",
    }

    def to_internal_value(self, data: Any) -> Any:
        if isinstance(data, bool) or not isinstance(data, int | float | str):
            self.fail("invalid")
        if isinstance(data, str):
            text = data.strip()
            if len(data) > 40 or not _VALUE_TEXT.match(data):
                self.fail("invalid")
            try:
                number = units.parse_decimal(text)
            except ValueError:
                self.fail("invalid")
            if not math.isfinite(number):
                self.fail("not_finite")
            return text
        if isinstance(data, float) and not math.isfinite(data):
            self.fail("not_finite")
        if abs(data) > 10**15:
            self.fail("invalid")
        return data

    def to_representation(self, value: Any) -> Any:
        return value


class AwareDateTimeField(serializers.DateTimeField):
    """A capture time must carry its offset: a gauge's local clock is not UTC."""

    def enforce_timezone(self, value: Any) -> Any:
        if timezone.is_naive(value):
            raise serializers.ValidationError(
                "captured_at needs a time zone offset, e.g. 2025-03-01T08:30:00Z or +01:00."
            )
        return super().enforce_timezone(value)


class ReadingInputSerializer(serializers.Serializer):
    lot = ExactCharField(max_length=30, help_text="Lot (traveller) code as scanned")
    step = serializers.IntegerField(
        required=False,
        allow_null=True,
        min_value=1,
        max_value=MAX_ID,
        help_text="Lot step id; default: the lot's current step",
    )
    quantity = ExactCharField(max_length=40, help_text="What is measured, e.g. hole_copper")
    value = NumberOrTextField(help_text="Number as read (number or numeric text)")
    unit = ExactCharField(
        max_length=20, allow_blank=True, help_text="Unit as read, e.g. um, mil, mm, percent, count"
    )
    sample_index = serializers.IntegerField(default=1, min_value=1, max_value=1000)
    position = ExactCharField(max_length=60, required=False, allow_blank=True, default="")
    equipment = serializers.IntegerField(
        required=False, allow_null=True, min_value=1, max_value=MAX_ID
    )
    captured_at = AwareDateTimeField(required=False, allow_null=True)
    confirm_out_of_window = serializers.BooleanField(
        default=False,
        help_text=(
            "Store a value outside its window (or implausibly far from it) as entered. "
            "Without it such a value is refused with 409 saying what to confirm."
        ),
    )
    tested = serializers.IntegerField(
        required=False,
        allow_null=True,
        min_value=1,
        max_value=1_000_000,
        help_text=(
            "Defectives out of n (etest_failed): the boards tested; `value` is how many "
            "failed. Default: the lot's good boards at the step. Only for such quantities."
        ),
    )


class BatchItemSerializer(ReadingInputSerializer):
    sample_key = serializers.CharField(
        max_length=100,
        help_text="The instrument's own unique key for this measurement; a repeat with the "
        "same key on the same lot step returns the stored reading as a duplicate",
    )

    def validate_sample_key(self, value: str) -> str:
        value = value.strip()
        if not value or not value.isprintable():
            raise serializers.ValidationError("Give 1 to 100 printable characters.")
        return value


def batch_items(
    raw: list[Any], problems_from: Any, labels: list[str] | None = None
) -> tuple[list[Any], list[Any]]:
    """Check each item on its own: (items to record, refusals of the malformed ones).

    `labels` names each item in a refusal ("line 7" for a file); `problems_from` turns
    serializer errors into the one problem-list shape.
    """

    items: list[batch.BatchItem] = []
    invalid: list[batch.ItemResult] = []
    for index, entry in enumerate(raw):
        serializer = BatchItemSerializer(data=entry)
        key = entry.get("sample_key") if isinstance(entry, dict) else None
        key_text = key.strip()[:100] if isinstance(key, str) else ""
        if not serializer.is_valid():
            problems = problems_from(serializer.errors, entry)
            where = f"{labels[index]}: " if labels else ""
            invalid.append(
                batch.refused(
                    index,
                    key_text,
                    f"{where}{len(problems)} problem(s): "
                    + "; ".join(f"{p['field']}: {p['problem']}" for p in problems)
                    + ". It was not recorded.",
                    problems,
                )
            )
            continue
        data = serializer.validated_data
        items.append(
            batch.BatchItem(
                index=index,
                lot=data["lot"],
                step=data.get("step"),
                sample_key=data["sample_key"],
                reading=services.ReadingInput(
                    quantity=data["quantity"],
                    value=data["value"],
                    unit=data["unit"],
                    sample_index=data["sample_index"],
                    position=data.get("position") or "",
                    equipment_id=data.get("equipment"),
                    captured_at=data.get("captured_at"),
                    confirm_out_of_window=bool(data.get("confirm_out_of_window")),
                    tested=data.get("tested"),
                ),
            )
        )
    return items, invalid


class BatchInputSerializer(serializers.Serializer):
    """Only the envelope is checked here; each item is checked on its own, so one bad
    item is refused in the reply instead of failing the whole batch."""

    items = serializers.ListField(
        child=serializers.JSONField(),
        min_length=1,
        max_length=1000,
        help_text="1 to 1,000 readings, each shaped like BatchItem",
    )


class BatchItemResultSerializer(serializers.Serializer):
    index = serializers.IntegerField(help_text="Position of the item in the request, from 0")
    sample_key = serializers.CharField(allow_blank=True)
    status = serializers.ChoiceField(choices=["created", "duplicate", "refused"])
    reading = serializers.DictField(
        required=False, help_text="The stored reading (created or duplicate)"
    )
    reason = serializers.CharField(required=False, help_text="Why the item was refused")
    problems = serializers.ListField(child=serializers.DictField(), required=False)


class BatchResultSerializer(serializers.Serializer):
    created = serializers.IntegerField()
    duplicate = serializers.IntegerField()
    refused = serializers.IntegerField()
    items = BatchItemResultSerializer(many=True)


class CorrectionInputSerializer(serializers.Serializer):
    value = NumberOrTextField()
    unit = ExactCharField(max_length=20, allow_blank=True)
    reason = ExactCharField(
        max_length=300, min_length=3, help_text="What was wrong with the first reading"
    )
    captured_at = AwareDateTimeField(required=False, allow_null=True)
    confirm_out_of_window = serializers.BooleanField(
        default=False, help_text="As for a new reading: store an out-of-window value as entered"
    )
    lot = serializers.CharField(
        max_length=30,
        required=False,
        help_text="The lot the reading belongs to; a reading of another lot is refused (409)",
    )


class StepStartSerializer(serializers.Serializer):
    equipment = serializers.IntegerField(
        required=False, allow_null=True, min_value=1, max_value=MAX_ID
    )
    material_lots = serializers.ListField(
        child=serializers.IntegerField(min_value=1, max_value=MAX_ID),
        required=False,
        max_length=50,
    )


class StepPauseSerializer(serializers.Serializer):
    reason = ExactCharField(max_length=300, required=False, allow_blank=True, default="")


class StepCompleteSerializer(serializers.Serializer):
    pin = ExactCharField(max_length=40, help_text="The signer's PIN (second component)")
    meaning = serializers.ChoiceField(
        choices=["performed_by", "verified_by"],
        default="performed_by",
        help_text="What the signature means",
    )


class WindowSerializer(serializers.Serializer):
    """A tolerance window in the canonical unit, always with its source."""

    quantity = serializers.CharField()
    label = serializers.CharField(  # type: ignore[assignment]  # DRF collects declared fields; the name clashes only in the stubs
        required=False,
        help_text="The quantity as people read it (display only; on readings and lot windows)",
    )
    unit = serializers.CharField()
    min = serializers.FloatField(allow_null=True)
    max = serializers.FloatField(allow_null=True)
    target = serializers.FloatField(allow_null=True)
    samples = serializers.IntegerField(allow_null=True, help_text="null means every board")
    source = serializers.CharField(help_text="Standard and clause, shop practice or customer")  # type: ignore[assignment]  # DRF collects declared fields; the name clashes only in the stubs
    attribute = serializers.BooleanField()
    deviation = serializers.BooleanField()
    applies_to = serializers.ChoiceField(
        choices=["each_reading", "mean", "minimum", "maximum", "range"],
        help_text=(
            "What the limits bound: every reading, or the sample set's mean, smallest, "
            "largest sample or range (largest - smallest)"
        ),
    )
    in_words = serializers.CharField(
        help_text="This entry in plain words, rounded to the quantity's resolution"
    )

    def to_representation(self, instance: Any) -> Any:
        if isinstance(instance, dict):
            instance = window_dict(instance)
        return super().to_representation(instance)


class ReadingSerializer(serializers.ModelSerializer):
    lot = serializers.CharField(source="lot_step.lot.code", read_only=True)
    step = serializers.IntegerField(source="lot_step_id", read_only=True)
    operator = serializers.CharField(source="operator.printed_name", read_only=True)
    window = WindowSerializer(read_only=True)
    equipment = serializers.IntegerField(source="equipment_id", allow_null=True, read_only=True)
    superseded_by = serializers.IntegerField(
        source="superseded_by_id", allow_null=True, read_only=True
    )

    class Meta:
        model = Reading
        fields = [
            "id",
            "lot",
            "step",
            "quantity",
            "value",
            "unit",
            "entered_value",
            "entered_unit",
            "sample_index",
            "position",
            "equipment",
            "operator",
            "captured_at",
            "recorded_at",
            "in_window",
            "window",
            "superseded_by",
            "via",
            "confirmation",
            "set_verdict",
        ]
        read_only_fields = fields


class LotStepSerializer(serializers.ModelSerializer):
    work_center = serializers.CharField(source="work_center.code", read_only=True)
    started_by = serializers.CharField(
        source="started_by.printed_name", allow_null=True, read_only=True
    )
    completed_by = serializers.CharField(
        source="completed_by.printed_name", allow_null=True, read_only=True
    )
    parameters_display = serializers.SerializerMethodField(
        help_text="The step's parameters as people read them: label and value with unit"
    )

    @extend_schema_field(
        {
            "type": "array",
            "items": {
                "type": "object",
                "properties": {"label": {"type": "string"}, "value": {"type": "string"}},
            },
        }
    )
    def get_parameters_display(self, step: LotStep) -> list[dict[str, str]]:
        return [
            {"label": label, "value": value}
            for label, value in labels.parameter_rows(step.parameters or {})
        ]

    class Meta:
        model = LotStep
        fields = [
            "id",
            "position",
            "code",
            "name",
            "work_center",
            "status",
            "is_rework",
            "hazard",
            "queue_time_limit_minutes",
            "arrived_at",
            "started_at",
            "started_by",
            "completed_at",
            "completed_by",
            "parameters_display",
        ]
        read_only_fields = fields


class LotStatusSerializer(serializers.Serializer):
    code = serializers.CharField()
    status = serializers.CharField()
    on_hold = serializers.BooleanField()
    routing_revision = serializers.IntegerField()
    current_step = LotStepSerializer(allow_null=True)
    steps = LotStepSerializer(many=True)


class StepWindowsSerializer(serializers.Serializer):
    lot = serializers.CharField()
    step = LotStepSerializer(allow_null=True)
    windows = WindowSerializer(many=True)


def lot_status(lot: Any, steps: list[LotStep], current: LotStep | None) -> dict[str, Any]:
    return {
        "code": lot.code,
        "status": lot.status,
        "on_hold": lot.on_hold,
        "routing_revision": lot.routing_revision_id,
        "current_step": current,
        "steps": steps,
    }


def window_dict(m: dict[str, Any]) -> dict[str, Any]:
    """A plan entry as the window contract (missing keys become null/false)."""
    return {
        "quantity": m.get("quantity", ""),
        "label": labels.quantity_label(str(m.get("quantity", ""))),
        "unit": m.get("unit", ""),
        "min": m.get("min"),
        "max": m.get("max"),
        "target": m.get("target"),
        "samples": m.get("samples"),
        "source": m.get("source") or "",
        "attribute": bool(m.get("attribute")),
        "deviation": bool(m.get("deviation")),
        "applies_to": judging.applies_to(m),
        # a reading's snapshot carries every criterion of its quantity in words
        "in_words": m.get("in_words") or judging.describe_entry(m),
    }
