"""Reading entry on the tablet: units of the quantity's dimension only, the last unit
and gauge kept per person and quantity, the window also in the unit typed, labels
written for people.

Outside facts used: 1 mil = 25.4 µm exactly (1 in = 25.4 mm, 1959 international yard
and pound agreement).
"""

from __future__ import annotations

import re

import pytest

from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Person
from tests import helpers

pytestmark = pytest.mark.django_db


@pytest.fixture
def op_client(client, operator):
    client.force_login(operator.user)
    return client


@pytest.fixture
def started(op_client, measured_step):
    r = op_client.post(f"/floor/steps/{measured_step.pk}/start/", {"idempotency_key": "s-1"})
    assert r.status_code == 302
    measured_step.refresh_from_db()
    return measured_step


def _quantity(step: LotStep) -> str:
    return next(m["quantity"] for m in step.plan if not m.get("attribute"))


def _unit_options(body: str, quantity: str) -> list[list[str]]:
    selects = re.findall(
        rf'<select name="unit" data-unit-for="{quantity}">(.*?)</select>', body, re.S
    )
    return [re.findall(r'<option value="([^"]*)"', s) for s in selects]


def _selected(body: str, attr: str, quantity: str) -> list[str]:
    selects = re.findall(rf'<select name="\w+" {attr}="{quantity}">(.*?)</select>', body, re.S)
    return [(re.findall(r'<option value="([^"]*)" selected', s) or [""])[0] for s in selects]


def test_only_units_of_the_dimension_are_offered(op_client, floor, started):
    q = _quantity(started)
    body = op_client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    options = _unit_options(body, q)
    assert options and all(o == options[0] for o in options)
    assert set(options[0]) <= {"µm", "mil", "µin", "mm", "in"} and len(options[0]) <= 5
    assert "oz" not in body.split('id="plan"')[1].split("</section>")[0]


def test_last_unit_and_gauge_are_kept_per_person_and_quantity(
    op_client, floor, started, operator, gauge_at
):
    gauge = gauge_at(started.work_center, code="ECG-07")
    q = _quantity(started)
    m = next(x for x in started.plan if x["quantity"] == q and x.get("min") is not None)
    mil = helpers.in_window_value(m) / 25.4
    r = op_client.post(
        f"/floor/steps/{started.pk}/readings/",
        {
            "quantity": q,
            "sample_index": 1,
            "value": f"{mil:.3f}",
            "unit": "mil",
            "equipment": gauge.pk,
            "idempotency_key": "k-1",
        },
        HTTP_HX_REQUEST="true",
    )
    assert r.status_code == 201, r.content.decode()
    assert Reading.objects.get(lot_step=started, quantity=q).entered_unit == "mil"
    operator.refresh_from_db()
    assert operator.entry_defaults[q] == {"unit": "mil", "equipment": gauge.pk}
    body = op_client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    # every sample still to take offers mil and the gauge first
    assert set(_selected(body, "data-unit-for", q)) == {"mil"}
    assert set(_selected(body, "data-gauge-for", q)) == {str(gauge.pk)}
    # ... and the window is shown in mil too, unhidden
    assert re.search(r'<p class="window window-in" data-unit="mil">In mil: <strong>', body)
    # another person starts from the stored unit
    other = Person.objects.exclude(pk=operator.pk).filter(entry_defaults={}).first()
    assert other is not None and q not in other.entry_defaults


def test_labels_are_written_for_people(op_client, floor, started):
    body = op_client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    assert "Current Density A Per Dm2" not in body and "current density a per dm2" not in body
    assert "['" not in body  # no Python list text ("Stacks ['L3-L6']")
    if "current_density_a_per_dm2" in started.parameters:
        assert "A/dm²" in body
    assert "<h3>" + _quantity(started).replace("_", " ") + "</h3>" not in body
