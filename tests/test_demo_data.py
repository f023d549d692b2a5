"""The demo loader builds the invented shop through the real services and is safe to rerun."""

from __future__ import annotations

import json
import re

import pytest
from django.core.management import call_command

from shopfloor.audit.services import verify_chain
from shopfloor.floor.models import Reading
from shopfloor.plant.models import Job, Lot, Person
from shopfloor.quality.models import Alert, Nonconformance

pytestmark = pytest.mark.django_db


def _counts() -> dict[str, int]:
    return {
        "jobs": Job.objects.count(),
        "lots": Lot.objects.count(),
        "people": Person.objects.count(),
        "readings": Reading.objects.count(),
        "alerts": Alert.objects.count(),
        "ncrs": Nonconformance.objects.count(),
    }


def test_demo_loads_twice_without_duplicates(settings, django_capture_on_commit_callbacks):
    settings.CELERY_TASK_ALWAYS_EAGER = True  # the demo's embedded mode
    with django_capture_on_commit_callbacks(execute=True):
        call_command("load_demo")
    first = _counts()
    # 13 jobs with lots made by the loader (one of them shipped), one job only entered,
    # one released by the planner's release (45 boards at 6 per panel, 8 % allowance:
    # ceil(8.1) = 9 panels, 1 lot)
    assert first["jobs"] == 15 and first["lots"] == 14
    from shopfloor.orders import read

    assert read.job_summary("WO-24113").status == "entered"
    assert read.job_summary("WO-24114").status == "released"
    assert read.job_summary("WO-24114").quantities.on_panels == 54
    # the lots meant to be held were held by real out-of-window readings
    assert set(Lot.objects.filter(on_hold=True).values_list("code", flat=True)) == {
        "LOT-24105-1",
        "LOT-24111-1",
    }
    assert first["ncrs"] == 2
    # each hold is a real failure under the plan's own criteria (IPC-6012 hole copper:
    # the class figure bounds the average of the set, the thin-area figure each reading;
    # from memory): one alert per failed set, citing every sample of it
    from shopfloor.core import judging

    for ncr in Nonconformance.objects.all():
        readings = list(ncr.readings.order_by("sample_index"))
        assert len(readings) >= 1
        group = judging.group_plan(judging.criteria_of(readings[0].window))[0]
        values = {r.sample_index: r.value for r in readings if r.superseded_by_id is None}
        each_ok = all(judging.judge_each(v, group.entries).in_window for v in values.values())
        verdict = judging.judge_set(values, group.set_entries, group.samples)
        assert not each_ok or verdict.in_window is False
    assert Alert.objects.filter(kind="out_of_window").count() == 2
    # every SPC series of the demo holds readings judged against one window only
    from shopfloor.quality.models import SeriesState
    from shopfloor.quality.series import series_queryset

    assert SeriesState.objects.exists()
    for series in SeriesState.objects.all():
        specs = set(series_queryset(series).values_list("spec_key", flat=True))
        assert specs == {series.spec_key}, series.key
        assert set(series_queryset(series).values_list("lot_step__code", flat=True)) == {
            series.step_code
        }
    _check_materials_and_shipping()
    from shopfloor.plant.models import Equipment

    assert set(Equipment.objects.values_list("code", flat=True)) == {
        e["code"] for e in _demo_file()["equipment"]
    }
    with django_capture_on_commit_callbacks(execute=True):
        call_command("load_demo")
    assert _counts() == first
    assert verify_chain().ok


def _check_materials_and_shipping() -> None:
    """The demo records its materials per lot step, holds one job ready to ship and one
    shipped with its certificate."""
    from shopfloor.floor.models import MaterialUse
    from shopfloor.plant.models import MaterialLot
    from shopfloor.shipping import services as shipping
    from shopfloor.shipping.models import Certificate

    used = set(MaterialUse.objects.values_list("kind", flat=True))
    assert {"laminate", "prepreg", "foil", "dry_film", "mask_ink"} <= used
    expired = MaterialLot.objects.get(code="PP-2604-X")
    assert not MaterialUse.objects.filter(material_lot=expired).exists()
    ready = shipping.job_shipping(Job.objects.get(number="WO-24112"))
    assert ready.shipped == 0 and ready.available == ready.accepted > 0
    shipped = Job.objects.get(number="WO-24115")
    assert shipping.job_closed(shipped)
    # one job at each stage of an order's life (issue 12's demo)
    from shopfloor.orders import read

    stages = {
        "WO-24113": "entered",
        "WO-24114": "released",
        "WO-24102": "in_process",
        "WO-24105": "held",
        "WO-24112": "ready_to_ship",
        "WO-24115": "shipped",
    }
    assert {n: read.job_summary(n).status for n in stages} == stages
    assert Certificate.objects.filter(shipment__job=shipped).count() == 1


def _demo_file() -> dict:
    from shopfloor.plant.management.commands.load_demo import DEFAULT_FILE

    return json.loads(DEFAULT_FILE.read_text(encoding="utf-8"))


#: Demo equipment codes are invented and named after the measuring technique or the
#: process (issue 15 item 8): the prefix says how the instrument measures, and the
#: instrument's name spells that technique out. Abbreviations are our own.
TECHNIQUE_PREFIXES = {
    "ECG": "eddy-current",
    "XRF": "x-ray fluorescence",
    "MIC": "micrometer",
    "OPT": "optical",
    "VSD": "v-score depth",
    "PLT": "plating",
}


def test_demo_equipment_codes_name_the_technique() -> None:
    equipment = _demo_file()["equipment"]
    assert equipment, "the demo has instruments to pick at the tablet"
    codes = [e["code"] for e in equipment]
    assert len(codes) == len(set(codes))
    for e in equipment:
        match = re.fullmatch(r"([A-Z]{3})-([0-9A-Z]{2})", e["code"])
        assert match, f"{e['code']}: codes are a three-letter technique and a two-character number"
        prefix = match.group(1)
        assert prefix in TECHNIQUE_PREFIXES, f"{e['code']}: {prefix} is not a technique prefix"
        assert TECHNIQUE_PREFIXES[prefix] in e["name"].lower(), (
            f"{e['code']} ({e['name']}) should name its technique ({TECHNIQUE_PREFIXES[prefix]})"
        )
    # the hole-wall copper gauges measure by eddy current, as the example names them
    assert {"ECG-01", "ECG-02"} <= set(codes)
