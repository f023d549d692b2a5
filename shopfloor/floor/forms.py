"""Tablet forms: they only check shape (present, a number, a time with an offset).

The rules (which units, which samples, is the gauge calibrated, is the lot held) live in
the floor services, so the tablet and the API reach the same refusals. Each form gives
`payload()`, the cleaned values used for the idempotency fingerprint.
"""

from __future__ import annotations

from datetime import datetime
from hashlib import sha256
from typing import Any

from django import forms
from django.utils import timezone


class CapturedAtField(forms.CharField):
    """An ISO 8601 time that must carry its offset (the tablet's clock and zone)."""

    def to_python(self, value: Any) -> datetime | None:  # type: ignore[override]
        text = (super().to_python(value) or "").strip()
        if not text:
            return None
        try:
            parsed = datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            raise forms.ValidationError(
                f"Capture time {text!r} is not an ISO 8601 time such as 2030-01-31T22:15:00+01:00."
            ) from None
        if timezone.is_naive(parsed):
            raise forms.ValidationError(
                "Capture time must include its offset from UTC (for example +01:00 or Z)."
            )
        return parsed


class TabletForm(forms.Form):
    """Shared: the idempotency key travels as a hidden field or the Idempotency-Key header."""

    idempotency_key = forms.CharField(required=False, max_length=100)

    def payload(self) -> dict[str, Any]:
        return {
            name: (value.isoformat() if isinstance(value, datetime) else value)
            for name, value in self.cleaned_data.items()
            if name != "idempotency_key"
        }

    def error_text(self) -> str:
        parts = []
        for name, errors in self.errors.items():
            label = self.fields[name].label or name.replace("_", " ") if name in self.fields else ""
            for error in errors:
                parts.append(f"{label.capitalize()}: {error}" if label else str(error))
        return " ".join(parts) or "The form was not filled in correctly."


class ScanForm(forms.Form):
    code = forms.CharField(max_length=60, label="Lot code")


class StartForm(TabletForm):
    equipment = forms.IntegerField(required=False, min_value=1)


class PauseForm(TabletForm):
    reason = forms.CharField(required=False, max_length=300)


class ReadingForm(TabletForm):
    quantity = forms.CharField(max_length=40)
    sample_index = forms.IntegerField(min_value=1, max_value=1000, label="Sample")
    value = forms.CharField(max_length=40, label="Value")
    unit = forms.CharField(max_length=20, label="Unit", required=False)
    position = forms.CharField(max_length=60, required=False, label="Position")
    equipment = forms.IntegerField(required=False, min_value=1, label="Gauge")
    captured_at = CapturedAtField(required=False, label="Capture time")
    # Set by the Confirm button the typo guard offers; never ticked silently.
    confirm_out_of_window = forms.BooleanField(required=False)
    # "failed k of n tested" quantities: n (blank: the lot's good boards)
    tested = forms.IntegerField(required=False, min_value=1, max_value=1_000_000, label="Tested")

    def clean_value(self) -> str:
        value = self.cleaned_data["value"].strip()
        if not value:
            raise forms.ValidationError("type the reading, for example 22.5")
        return value


class CorrectionForm(TabletForm):
    value = forms.CharField(max_length=40, label="Corrected value")
    unit = forms.CharField(max_length=20, required=False, label="Unit")
    reason = forms.CharField(max_length=300, label="Reason")
    captured_at = CapturedAtField(required=False, label="Capture time")
    confirm_out_of_window = forms.BooleanField(required=False)


class CompleteForm(TabletForm):
    pin = forms.CharField(max_length=20, label="PIN", strip=False)
    meaning = forms.ChoiceField(
        choices=[("performed_by", "Performed by")], initial="performed_by", label="Meaning"
    )

    def payload(self) -> dict[str, Any]:
        # The PIN is never part of the stored fingerprint input in clear; a hash would let a
        # replay with a different PIN count as "different", which is what we want.

        data = super().payload()
        data["pin"] = sha256(str(data.get("pin", "")).encode()).hexdigest()
        return data


class MaterialForm(TabletForm):
    code = forms.CharField(max_length=60, required=False, label="Material lot")
    pick = forms.CharField(max_length=60, required=False, label="Material lot")

    def clean(self) -> dict[str, Any]:
        data = super().clean() or {}
        code = (data.get("code") or "").strip() or (data.get("pick") or "").strip()
        if not code:
            raise forms.ValidationError("scan the material lot's label or pick it from the list")
        data["code"] = code
        return data


class ScrapForm(TabletForm):
    panel = forms.CharField(max_length=40, label="Panel")
    boards = forms.IntegerField(required=False, min_value=1, max_value=10_000, label="Boards")
    reason = forms.CharField(max_length=30, label="Reason")
    note = forms.CharField(max_length=300, required=False, label="Note")


class AcceptanceForm(TabletForm):
    """Final inspection: one `accepted-<job number>` field per job on the lot."""

    reason = forms.CharField(max_length=30, required=False, label="Scrap reason")

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        for key in sorted(self.data):
            if key.startswith("accepted-"):
                self.fields[key] = forms.IntegerField(
                    min_value=0, max_value=10_000_000, label=f"Accepted, job {key[9:]}"
                )

    def accepted(self) -> dict[str, int]:
        return {
            k.removeprefix("accepted-"): int(v)
            for k, v in self.cleaned_data.items()
            if k.startswith("accepted-")
        }
