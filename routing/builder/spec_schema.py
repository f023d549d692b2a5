"""The build spec as JSON Schema (2020-12), for the OpenAPI docs and client-side forms."""

from __future__ import annotations

from typing import Any

from .spec_model import (
    DRILLS,
    ELECTRICAL_TESTS,
    FINISHES,
    LAYER_COUNTS,
    MASK_COLOURS,
    PROFILES,
    REQUIRED_KEYS,
    SIDES,
    STACKUP_KINDS,
    VIA_KINDS,
)


def spec_json_schema() -> dict[str, Any]:
    """JSON Schema (2020-12) of the spec, for the OpenAPI docs and client-side forms.

    The schema covers shape and enumerations only; cross-field shop rules (stack-up
    agreement, aspect ratios, lamination) are enforced by `parse_spec`.
    """
    sides = {"type": "string", "enum": list(SIDES), "default": "both"}
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "BuildSpec",
        "description": "What the board is; the routing builder derives the process from it.",
        "type": "object",
        "additionalProperties": False,
        "required": list(REQUIRED_KEYS),
        "properties": {
            "layers": {"type": "integer", "enum": list(LAYER_COUNTS)},
            "ipc_class": {"type": "integer", "enum": [1, 2, 3]},
            "board_thickness_mm": {"type": "number", "minimum": 0.1, "maximum": 10},
            "outer_copper_base_um": {"type": "number", "exclusiveMinimum": 0, "maximum": 420},
            "inner_copper_um": {
                "type": "number",
                "exclusiveMinimum": 0,
                "maximum": 420,
                "description": "Required when layers >= 4.",
            },
            "finish": {"type": "string", "enum": list(FINISHES)},
            "hard_gold_fingers": {"type": "boolean", "default": False},
            "solder_mask": {
                "type": "object",
                "additionalProperties": False,
                "properties": {
                    "sides": sides,
                    "colour": {"type": "string", "enum": list(MASK_COLOURS), "default": "green"},
                },
            },
            "legend": {
                "type": "object",
                "additionalProperties": False,
                "properties": {"sides": sides},
            },
            "profile": {"type": "string", "enum": list(PROFILES)},
            "electrical_test": {"type": "string", "enum": list(ELECTRICAL_TESTS)},
            "min_hole_mm": {"type": "number", "minimum": 0.05, "maximum": 10},
            "vias": {
                "type": "array",
                "default": [],
                "items": {
                    "type": "object",
                    "additionalProperties": False,
                    "required": ["from", "to", "kind", "drill"],
                    "properties": {
                        "from": {"type": "integer", "minimum": 1, "maximum": 40},
                        "to": {"type": "integer", "minimum": 1, "maximum": 40},
                        "kind": {"type": "string", "enum": list(VIA_KINDS)},
                        "drill": {"type": "string", "enum": list(DRILLS)},
                    },
                },
            },
            "outline": {
                "type": "object",
                "additionalProperties": False,
                "required": ["width_mm", "height_mm"],
                "description": "Optional board outline size (profile bounding box), mm.",
                "properties": {
                    "width_mm": {"type": "number", "exclusiveMinimum": 0, "maximum": 2000},
                    "height_mm": {"type": "number", "exclusiveMinimum": 0, "maximum": 2000},
                },
            },
            "stackup": {
                "type": "array",
                "minItems": 1,
                "description": "Optional, top to bottom.",
                "items": {
                    "type": "object",
                    "additionalProperties": False,
                    "required": ["kind", "thickness_um"],
                    "properties": {
                        "kind": {"type": "string", "enum": list(STACKUP_KINDS)},
                        "thickness_um": {"type": "number", "exclusiveMinimum": 0, "maximum": 5000},
                        "material": {"type": "string", "maxLength": 80},
                    },
                },
            },
        },
    }
