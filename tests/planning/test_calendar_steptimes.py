"""Shift calendars on the minute axis and the blend of measured and standard times."""

from __future__ import annotations

import datetime as dt
import statistics

import pytest

from shopfloor.core.planning.calendar import Shift, ShiftCalendar, compile_calendar
from shopfloor.core.planning.steptimes import (
    PRIOR_WEIGHT,
    blended_sampler,
    credibility,
    lognormal_table,
)

MONDAY_0 = dt.datetime(2030, 1, 7, 0, 0, tzinfo=dt.UTC)


def test_two_shifts_weekdays_and_a_holiday():
    cal = ShiftCalendar(
        weekdays=frozenset(range(5)),
        shifts=(Shift(dt.time(6), dt.time(14)), Shift(dt.time(14), dt.time(22))),
        holidays=frozenset({dt.date(2030, 1, 8)}),
    )
    w = compile_calendar(cal, MONDAY_0)
    assert w is not None
    assert w.next_open(0) == 360  # Monday 06:00
    # 16 h on Monday, Tuesday a holiday: 1 more minute lands on Wednesday 06:01
    assert w.add(360, 16 * 60) == 22 * 60
    assert w.add(360, 16 * 60 + 1) == 2 * 1440 + 361


def test_night_shift_crosses_midnight():
    cal = ShiftCalendar(shifts=(Shift(dt.time(22), dt.time(6)),))
    w = compile_calendar(cal, MONDAY_0)
    assert w is not None
    assert w.next_open(0) == 0  # Sunday's night shift still running at Monday 00:00
    assert w.add(0, 360) == 360
    assert w.add(0, 361) == 22 * 60 + 1


def test_site_time_zone_and_daylight_saving():
    # Shifts follow the wall clock: in Europe/Berlin 06:00 local is 05:00 UTC in
    # winter and 04:00 UTC in summer (the clocks changed on 31 March 2030).
    cal = ShiftCalendar(shifts=(Shift(dt.time(6), dt.time(7)),))
    start = dt.datetime(2030, 3, 30, 0, 0, tzinfo=dt.UTC)
    w = compile_calendar(cal, start, "Europe/Berlin")
    assert w is not None
    assert w.next_open(0) == 5 * 60
    assert w.next_open(5 * 60 + 61) == 1440 + 4 * 60


def test_round_the_clock_calendar_costs_nothing():
    assert compile_calendar(ShiftCalendar(), MONDAY_0) is None


def test_calendar_input_is_checked():
    with pytest.raises(ValueError, match="0 \\(Monday\\) to 6"):
        ShiftCalendar(weekdays=frozenset({7}))
    with pytest.raises(ValueError, match="time zone"):
        # a naive datetime on purpose: the calendar must refuse it
        compile_calendar(ShiftCalendar(weekdays=frozenset({1})), dt.datetime(2030, 1, 1))  # noqa: DTZ001


def test_credibility_weight_rule():
    # n / (n + k): the standard minutes count as k = PRIOR_WEIGHT observations.
    assert credibility(0) == 0
    assert credibility(int(PRIOR_WEIGHT)) == pytest.approx(0.5)
    assert credibility(45) == pytest.approx(0.9)


def test_lognormal_table_has_the_standard_mean_and_cv():
    # Lognormal moments (any statistics handbook): mean exp(mu + s^2/2), CV sqrt(e^{s^2}-1)
    t = lognormal_table(40.0, 0.3)
    assert statistics.fmean(t) == pytest.approx(40.0, rel=0.01)
    assert statistics.pstdev(t) / statistics.fmean(t) == pytest.approx(0.3, rel=0.05)


def test_blend_mean_follows_the_rule():
    history = [60.0] * 15  # measured: every run took 60 min, standard says 40
    s = blended_sampler(40.0, history)
    w = 15 / (15 + PRIOR_WEIGHT)
    assert s.weight == pytest.approx(w)
    assert s.mean() == pytest.approx(w * 60 + (1 - w) * 40, rel=0.01)
    # drawing over a fine grid of u reproduces it
    draws = [s.draw((k + 0.5) / 20000) for k in range(20000)]
    assert statistics.fmean(draws) == pytest.approx(s.mean(), rel=0.01)


def test_outliers_left_out_of_history():
    s = blended_sampler(30.0, [30.0, 31.0, 3000.0, 0.5])
    assert s.history == (30.0, 31.0)
