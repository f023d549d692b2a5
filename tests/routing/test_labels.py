"""The label table: every parameter and quantity key people see has a written label.

Outside facts used: the unit symbols are the SI brochure's (BIPM, 9th edition: µm, °C,
A/dm² as A divided by dm squared, kPa, mJ/cm², min and s for time); "mil" and "rpm" are
the trade's (common practice).
"""

from __future__ import annotations

import copy

import pytest

from routing.builder import build_routing, parse_spec
from routing.builder.examples import EXAMPLE_SPECS
from routing.builder.labels import (
    PARAMETER_LABELS,
    QUANTITY_LABELS,
    parameter_label,
    parameter_rows,
    parameter_value,
    quantity_label,
)
from routing.builder.library import ProcessLibrary
from routing.builder.windows import QUANTITIES
from shopfloor.core import units

#: Keys the plating calculator writes onto a plating step (shopfloor/chemistry/services.py,
#: `_store_setup`); it is Django code, so it is listed here rather than imported.
PLATING_KEYS = {
    "plated_area_dm2",
    "target_thickness_um",
    "cathode_efficiency",
    "rectifier_current_a",
    "time_min",
}

_VARIANTS = [
    ("two_layer", {}),
    ("two_layer", {"layers": 1}),
    ("two_layer", {"finish": "osp"}),
    ("two_layer", {"finish": "immersion_silver"}),
    ("two_layer", {"finish": "immersion_tin"}),
    ("eight_layer_buried", {}),
    ("eight_layer_buried", {"hard_gold_fingers": True}),
    ("twenty_four_layer_hdi", {}),
]


def _built_keys() -> set[str]:
    keys: set[str] = set()
    for name, changes in _VARIANTS:
        data = copy.deepcopy(EXAMPLE_SPECS[name])
        data.update(changes)
        try:
            spec = parse_spec(data)
        except Exception:  # a variant this example cannot take; the others cover it
            continue
        for step in build_routing(spec).steps:
            keys |= set(step.parameters)
    return keys


def test_every_library_parameter_key_has_a_written_label():
    library_keys = {k for s in ProcessLibrary.default().steps.values() for k in s.parameters}
    missing = sorted((library_keys | _built_keys() | PLATING_KEYS) - set(PARAMETER_LABELS))
    assert not missing, f"add a row to routing/builder/labels.py for: {missing}"


def test_every_quantity_key_has_a_written_label():
    keys = set(QUANTITIES) | set(units.quantities())
    assert not sorted(keys - set(QUANTITY_LABELS))


@pytest.mark.parametrize("label", [*PARAMETER_LABELS.values(), *QUANTITY_LABELS.values()])
def test_labels_are_words_not_code_names(label):
    assert "_" not in label.text and label.text[:1].isupper()
    # units as symbols, never spelled as in a code name ("um", "a per dm2")
    assert label.unit in {
        "",
        "µm",
        "mm",
        "°C",
        "°",
        "A/dm²",
        "dm²",
        "A",
        "kPa",
        "mJ/cm²",
        "m/min",
        "min",
        "s",
        "rpm",
        "%",
    }


def test_parameter_values_read_as_the_trade_writes_them():
    assert parameter_value("current_density_a_per_dm2", 2.0) == "2 A/dm²"
    assert parameter_value("temperature_c", 48) == "48 °C"
    assert parameter_value("blade_angle_deg", 30) == "30°"
    assert parameter_value("stacks", ["L3-L6", "L1-L8"]) == "L3-L6, L1-L8"
    assert parameter_value("plated", False) == "no"
    assert parameter_value("microetch_um", 1.5, decimal=",") == "1,5 µm"
    rows = parameter_rows({"current_density_a_per_dm2": 1.5, "time_min": 12})
    assert rows == [("Current density", "1.5 A/dm²"), ("Time", "12 min")]


def test_an_unlabelled_key_is_still_read_from_its_spelling():
    assert parameter_label("rinse_flow_l_per_min").text == "Rinse flow l per min"
    assert parameter_label("oven_temperature_c").unit == "°C"
    assert quantity_label("hole_wall_copper") == "Hole wall copper"


def test_every_built_in_library_name_is_in_the_catalogue_list():
    from routing.builder.default_library import WORK_CENTERS
    from routing.builder.library_words import LIBRARY_WORDS

    lib = ProcessLibrary.default()
    texts = {*WORK_CENTERS.values(), *(s.name for s in lib.steps.values())}
    texts |= {s.hazard for s in lib.steps.values() if s.hazard}
    missing = sorted(texts - set(LIBRARY_WORDS))
    assert not missing, "run python -m routing.builder.library_words and update the list"
