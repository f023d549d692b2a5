"""Customer wording of the certificate (shopfloor.core.certificate).

The standards named are the IPC documents the window sources cite (IPC-6012 performance
classes, IPC-4552A ENIG, IPC-9252 electrical test); the check is that the customer sees
the document and requirement and never the shop's notes on how a value was sourced.
"""

from __future__ import annotations

from shopfloor.core.certificate import (
    MeasuredValue,
    characteristic_rows,
    customer_standard,
    forbidden_words,
    requirement_text,
    specification_line,
)


def test_sourcing_notes_never_reach_the_customer():
    source = (
        "IPC-6012 hole copper for through holes, class 2: average >= 20 um, thin area >= 18 "
        "um (from memory; confirm against the revision on the order)"
    )
    text = customer_standard(source)
    assert text.startswith("IPC-6012 hole copper for through holes, class 2")
    assert forbidden_words(text) == [] and "memory" not in text.lower()
    silver = customer_standard("IPC-4553A immersion silver, minimum 0.12 um (from memory); max")
    assert silver == "IPC-4553A immersion silver, minimum 0.12 µm"  # the unit as printed
    assert customer_standard("shop practice: registration within 50 um") == (
        "Manufacturer's process requirement"
    )
    assert customer_standard("customer spec: drawing note 5") == (
        "Customer specification (drawing note 5)"
    )


def test_requirements_in_plain_words():
    assert requirement_text({"min": 20, "unit": "um"}) == "≥ 20 µm"
    assert requirement_text({"min": 1.44, "max": 1.76, "unit": "mm"}) == "1.44 – 1.76 mm"
    assert requirement_text({"max": 0, "unit": "count", "attribute": True}) == "none allowed"


def test_rows_group_values_per_requirement():
    w = {"min": 20.0, "unit": "um", "source": "IPC-6012 hole copper, class 2 (from memory)"}
    values = [
        MeasuredValue("hole_wall_copper", 24.0, "um", w, True),
        MeasuredValue("hole_wall_copper", 21.5, "um", w, True),
        MeasuredValue("hole_wall_copper", 19.0, "um", w, False),
    ]
    (row,) = characteristic_rows(values)
    assert row.characteristic == "Plated hole wall copper thickness"
    assert row.count == 3 and row.lowest == "19 µm" and row.highest == "24 µm"
    assert "accepted by deviation" in row.result
    assert "memory" not in row.standard


def test_specification_line_names_class_and_finish():
    line = specification_line(
        {
            "layers": 4,
            "board_thickness_mm": 1.6,
            "finish": "ENIG",
            "solder_mask": {"sides": "both", "colour": "green"},
        },
        3,
    )
    assert line.startswith("IPC-6012 performance class 3; 4 layers, 1.6 mm thick")
    assert "ENIG" in line and "green solder mask" in line
