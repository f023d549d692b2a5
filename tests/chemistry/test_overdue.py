"""The overdue analysis alert, with time travel (time_machine), and the beat task."""

from __future__ import annotations

import datetime as dt

import pytest
import time_machine

from shopfloor.chemistry import services
from shopfloor.core.chemistry import schedule
from shopfloor.quality import tasks
from shopfloor.quality.models import Alert
from tests.factories import copper_tank, lab_tech

pytestmark = pytest.mark.django_db
T0 = dt.datetime(2026, 3, 2, 6, 0, tzinfo=dt.UTC)


def overdue_alerts():
    return Alert.objects.filter(kind=Alert.Kind.ANALYSIS_OVERDUE, closed_at__isnull=True)


def test_daily_analysis_is_due_after_a_day_and_overdue_after_the_grace(floor):
    with time_machine.travel(T0, tick=False):
        tank, lab = copper_tank(), lab_tech()
        for code, value, unit in (("copper_sulfate", "75", "g/L"), ("chloride", "60", "mg/L")):
            services.record_analysis(
                person=lab, tank_code=tank.code,
                data=services.AnalysisInput(parameter=code, value=value, unit=unit),
            )  # fmt: skip
    # daily: due at T0 + 24 h, overdue after a quarter more (6 h) -> T0 + 30 h.
    # per shift (8 h): chloride due at T0 + 8 h, overdue after T0 + 10 h.
    with time_machine.travel(T0 + dt.timedelta(hours=9), tick=False):
        counts = tasks.check_bath_analyses()
        assert counts["due"] == 1 and counts["overdue"] == 0
        assert not overdue_alerts().exists()
    with time_machine.travel(T0 + dt.timedelta(hours=25), tick=False):
        counts = services.check_analyses()
        assert counts["overdue"] == 1  # chloride
        assert counts["due"] == 1  # copper sulfate: due, not yet overdue
        message = overdue_alerts().get().message
        assert message.startswith("Tank T-CU (Acid copper): the Chloride analysis")
    with time_machine.travel(T0 + dt.timedelta(hours=31), tick=False):
        services.check_analyses()
        services.check_analyses()  # the beat runs again: nothing twice
        assert overdue_alerts().count() == 2
        services.record_analysis(
            person=lab, tank_code=tank.code,
            data=services.AnalysisInput(parameter="chloride", value="55", unit="mg/L"),
        )  # fmt: skip
        assert overdue_alerts().count() == 1  # recording the analysis closed its alert


@pytest.mark.parametrize(
    ("hours", "state"), [(7.9, "ok"), (8.0, "due"), (9.9, "due"), (10.0, "overdue")]
)
def test_per_shift_boundaries(hours, state):
    # 8 h shifts (common practice), grace a quarter of the interval = 2 h
    due = schedule.analysis_due("per_shift", last_taken_at=T0, now=T0 + dt.timedelta(hours=hours))
    assert due.state == state


def test_amp_hour_plan():
    # every 2000 Ah: 1999 Ah passed -> ok; 2000 -> due; 2500 (1.25 ×) -> overdue
    kw = {"last_taken_at": T0, "now": T0, "every_amp_hours": 2000.0, "last_amp_hours": 10_000}
    assert schedule.analysis_due("amp_hours", amp_hours_now=11_999, **kw).state == "ok"
    assert schedule.analysis_due("amp_hours", amp_hours_now=12_000, **kw).state == "due"
    assert schedule.analysis_due("amp_hours", amp_hours_now=12_500, **kw).state == "overdue"
    # no counter reading: falls back to daily
    fallback = schedule.analysis_due("amp_hours", **{**kw, "now": T0 + dt.timedelta(days=2)})
    assert fallback.state == "overdue"
