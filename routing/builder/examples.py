"""Example build specs (invented boards) for the API docs, the quote page and tests."""

from __future__ import annotations

from typing import Any, Final


def _hdi24_stackup() -> list[dict[str, Any]]:
    """An invented 24-layer, 3.2 mm build: two laser build-up levels each side (60 um
    prepreg, so microvias stay below 1:1), then alternating cores and prepregs."""
    out: list[dict[str, Any]] = []

    def cu(um: float) -> None:
        out.append({"kind": "copper", "thickness_um": um, "material": "copper foil"})

    def diel(kind: str, um: float) -> None:
        material = "FR-4 high-Tg core" if kind == "core" else "FR-4 high-Tg prepreg"
        out.append({"kind": kind, "thickness_um": um, "material": material})

    cu(17.5)
    diel("prepreg", 60)
    cu(35)
    diel("prepreg", 60)
    for layer in range(3, 22):  # dielectrics between L3 and L22
        cu(35)
        diel("core" if layer % 2 else "prepreg", 113)
    cu(35)
    diel("prepreg", 60)
    cu(35)
    diel("prepreg", 60)
    cu(17.5)
    return out


#: The example spec of the API docs and the engineering page (invented).
EXAMPLE_SPEC: Final[dict[str, Any]] = {
    "layers": 4,
    "ipc_class": 2,
    "board_thickness_mm": 1.6,
    "outer_copper_base_um": 17.5,
    "inner_copper_um": 35,
    "finish": "enig",
    "solder_mask": {"sides": "both", "colour": "green"},
    "legend": {"sides": "both"},
    "profile": "route",
    "electrical_test": "flying_probe",
    "min_hole_mm": 0.3,
}


#: Invented example specs, for the API docs, tests and the benchmark.
EXAMPLE_SPECS: Final[dict[str, dict[str, Any]]] = {
    "two_layer": {
        "layers": 2,
        "ipc_class": 2,
        "board_thickness_mm": 1.6,
        "outer_copper_base_um": 17.5,
        "finish": "hasl_lead_free",
        "profile": "route",
        "electrical_test": "flying_probe",
        "min_hole_mm": 0.3,
    },
    "eight_layer_buried": {
        "layers": 8,
        "ipc_class": 3,
        "board_thickness_mm": 1.6,
        "outer_copper_base_um": 17.5,
        "inner_copper_um": 35,
        "finish": "enig",
        "hard_gold_fingers": False,
        "solder_mask": {"sides": "both", "colour": "green"},
        "legend": {"sides": "top"},
        "profile": "route_and_v_score",
        "electrical_test": "fixture",
        "min_hole_mm": 0.25,
        "vias": [
            {"from": 1, "to": 8, "kind": "through", "drill": "mechanical"},
            {"from": 3, "to": 4, "kind": "buried", "drill": "mechanical"},
        ],
    },
    "twenty_four_layer_hdi": {
        "layers": 24,
        "ipc_class": 3,
        "board_thickness_mm": 3.2,
        "outer_copper_base_um": 17.5,
        "inner_copper_um": 35,
        "finish": "enepig",
        "hard_gold_fingers": True,
        "solder_mask": {"sides": "both", "colour": "green"},
        "legend": {"sides": "both"},
        "profile": "route",
        "electrical_test": "flying_probe",
        "min_hole_mm": 0.4,
        "vias": [
            {"from": 1, "to": 24, "kind": "through", "drill": "mechanical"},
            {"from": 3, "to": 22, "kind": "buried", "drill": "mechanical"},
            {"from": 1, "to": 2, "kind": "blind", "drill": "laser"},
            {"from": 2, "to": 3, "kind": "buried", "drill": "laser"},
            {"from": 23, "to": 24, "kind": "blind", "drill": "laser"},
            {"from": 22, "to": 23, "kind": "buried", "drill": "laser"},
        ],
        "stackup": _hdi24_stackup(),
    },
}
