"""The SPC series page at the desk (1366x768): an X-bar chart with its R chart beneath,
and a c chart whose limits are c-bar +- 3 sqrt(c-bar) with the LCL at 0 (NIST/SEMATECH
e-Handbook 6.3.3.1) and no Cpk for counts. Labels must not overlap (looked at)."""

from __future__ import annotations

import datetime as dt
import random
from urllib.parse import quote

import pytest
from django.utils import timezone
from playwright.sync_api import expect

from shopfloor.core import judging, spc
from shopfloor.floor.models import LotStep, Reading
from shopfloor.quality.models import SeriesState
from shopfloor.quality.series import limits_to_dict, series_key
from tests import helpers

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
DESK = {"width": 1366, "height": 768}


def _series(floor, quantity, values_by_lot, chart, size):
    lot_step = helpers.advance_to(floor.lot, helpers.PLATING)
    window = judging.group_plan(lot_step.plan)
    group = next(g for g in window if g.quantity == quantity) if quantity != "aoi_defects" else None
    snap = (
        group.window()
        if group
        else {"quantity": "aoi_defects", "unit": "count", "max": 0, "attribute": True,
              "samples": None, "source": "shop practice (test)"}
    )  # fmt: skip
    spec = judging.spec_key(judging.criteria_of(snap))
    now = timezone.now()
    rows = []
    for i, values in enumerate(values_by_lot):
        # one lot step per lot: an X-bar subgroup is one lot's samples at the step
        own = lot_step
        if size > 1:
            own = LotStep.objects.get(pk=lot_step.pk)
            own.pk = None
            own.position = 100_000 + i
            own.save()
        for sample, v in enumerate(values, start=1):
            rows.append(
                Reading(
                    lot_step=own,
                    quantity=quantity,
                    entered_value=str(v),
                    entered_unit=snap["unit"],
                    value=v,
                    unit=snap["unit"],
                    sample_index=sample if size > 1 else i + 1,
                    operator=floor.personas["operator"],
                    captured_at=now - dt.timedelta(minutes=len(values_by_lot) - i),
                    window=snap,
                    in_window=True,
                    spec_key=spec,
                )
            )
    Reading.objects.bulk_create(rows)
    data = values_by_lot if size > 1 else [v[0] for v in values_by_lot]
    limits = spc.compute_limits(chart, data)
    wc = lot_step.work_center
    key = series_key(quantity, wc.code, None, lot_step.code, spec)
    SeriesState.objects.create(
        key=key,
        quantity=quantity,
        work_center=wc,
        step_code=lot_step.code,
        spec_key=spec,
        window=judging.criteria_of(snap),
        window_label=judging.describe_criteria(judging.criteria_of(snap)),
        chart=chart,
        subgroup_size=size,
        limits=limits_to_dict(limits, source="test baseline"),
        points=len(rows),
    )
    return key


def test_spc_pages_at_the_desk(persona_page, floor, shoot):
    rng = random.Random(7)
    # invented demo-style data: 30 lots of 5 hole-copper samples around 27 um
    lots = [[round(rng.gauss(27.0, 0.8), 2) for _ in range(5)] for _ in range(30)]
    counts = [[c] for c in [0, 1, 0, 0, 1, 0, 0]]
    c_key = _series(floor, "aoi_defects", counts, "c", 1)
    xbar = _series(floor, "hole_wall_copper", lots, "xbar_r", 5)
    page = persona_page("quality_engineer", viewport=DESK)
    page.goto(f"/quality/spc/{quote(xbar, safe='')}/")
    expect(page.locator("#series-spec")).to_contain_text(
        "average of 5 samples ≥ 20 µm; each ≥ 18 µm"
    )
    expect(page.locator("#spread-chart")).to_contain_text("R chart")
    expect(page.locator("main")).to_contain_text("30 subgroup(s) of 5 samples")
    shoot(page, "spc-desk-xbar-r")
    page.goto(f"/quality/spc/{quote(c_key, safe='')}/")
    # c-bar = 2/7 = 0.2857; UCL 0.2857 + 3 sqrt(0.2857) = 1.89; LCL 0 (e-Handbook 6.3.3.1)
    expect(page.locator("#current-limits")).to_contain_text("Centre 0.29 · UCL 1.89 · LCL 0")
    svg = page.locator("figure.chart svg").first.inner_html()
    assert "UCL 1.89" in svg and "LCL 0" in svg and "CL 0.29" in svg
    expect(page.locator("#attribute-summary")).to_contain_text("no Cp/Cpk")
    assert "Cpk" not in page.locator("main").inner_text().replace("no Cp/Cpk", "")
    assert "c chart chart" not in page.content()
    shoot(page, "spc-desk-c-chart")
    page.goto("/quality/spc/")
    shoot(page, "spc-desk-list")
