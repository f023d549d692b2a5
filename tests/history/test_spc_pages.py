"""SPC pages and the SVG charts: limits, a marked rule break, the window on the histogram."""

from __future__ import annotations

import datetime as dt
import itertools

import pytest
from django.utils import timezone

from shopfloor.floor.models import Reading
from shopfloor.quality.read import charts

# Individuals chart limits are mean +- 3 * MRbar / d2, d2 = 1.128 for n = 2, i.e.
# mean +- 2.66 MRbar (Montgomery, Introduction to Statistical Quality Control, ch. 6).
BASE = [25.0, 25.4, 24.8, 25.2, 25.1, 24.9, 25.3, 25.0, 24.7, 25.2]


def _mrbar(xs):
    return sum(abs(b - a) for a, b in itertools.pairwise(xs)) / (len(xs) - 1)


@pytest.fixture
def series(floor):
    step = floor.lot.steps.order_by("position").first()
    window = {
        "quantity": "copper_thickness",
        "unit": "um",
        "min": 23.0,
        "max": 27.0,
        "source": "Customer spec CS-12 (test)",
    }
    now = timezone.now()
    values = [*BASE, 29.0]  # the last point is far beyond 3 sigma
    Reading.objects.bulk_create(
        [
            Reading(
                lot_step=step,
                quantity="copper_thickness",
                entered_value=str(v),
                entered_unit="um",
                value=v,
                unit="um",
                operator=floor.personas["operator"],
                captured_at=now - dt.timedelta(minutes=len(values) - i),
                window=window,
                in_window=23 <= v <= 27,
            )
            for i, v in enumerate(values)
        ]
    )
    return values, step.work_center.code


def test_spc_list_and_series_page(series, floor, client):
    values, wc = series
    client.force_login(floor.personas["quality_engineer"].user)
    html = client.get("/quality/spc/").content.decode()
    # quantity @ operation @ work center @ equipment @ window identity (none stored on
    # these bulk-created rows): series never mix windows
    code = Reading.objects.values_list("lot_step__code", flat=True).first()
    key = f"copper_thickness@{code}@{wc}@-@"
    assert key in html and "computed from readings" in html
    page = client.get(f"/quality/spc/{key}/").content.decode()
    mean = sum(values) / len(values)
    ucl = mean + 2.66 * _mrbar(values)
    assert "<svg" in page and "rule-break" in page
    assert "western_electric_1" in page
    shown_ucl = float(page.split("UCL ")[1].split()[0])
    assert shown_ucl == pytest.approx(ucl, rel=2e-3)  # 2.66 is 3/1.128 rounded
    assert "LSL 23" in page and "USL 27" in page
    assert "Customer spec CS-12" in page


def test_control_chart_svg_marks_and_names_rule():
    fig = charts.control_chart([1, 2, 9], 2.0, 5.0, -1.0, [(2, "western_electric_1")])
    svg = charts.to_svg(fig)
    assert svg.count('class="rule-break"') == 1
    assert "western_electric_1 at point(s) 3" in svg
    assert "UCL 5" in svg and "LCL -1" in svg
    drawing = charts.to_drawing(fig)
    assert drawing.width == pytest.approx(fig.width * 0.55)


def test_histogram_bins_square_root_rule():
    # square-root choice of bin count (common practice), clamped to 5..30
    assert len(charts.histogram_bins(list(range(100)), 0, 99)) == 10
    assert sum(charts.histogram_bins(list(range(100)), 0, 99)) == 100
    svg = charts.to_svg(charts.capability_histogram([1.0, 2.0, 3.0, 9.0], 0.5, 5.0))
    assert "1 outside the window" in svg and "USL 5" in svg
