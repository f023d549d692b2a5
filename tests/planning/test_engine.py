"""The event loop on floors whose answer is known: a deterministic line, a calendar,
batches, the board's queue order, and the same floor modelled in simpy 4.1."""

from __future__ import annotations

import datetime as dt
import random

import pytest
import simpy

from shopfloor.core.planning.calendar import Shift, ShiftCalendar, compile_calendar
from shopfloor.core.planning.engine import Center, Lot, percentile, simulate
from shopfloor.core.planning.steptimes import Sampler, constant_table

MONDAY_6 = dt.datetime(2030, 1, 7, 6, 0, tzinfo=dt.UTC)  # 7 January 2030 is a Monday


def fixed(*minutes: float) -> list[Sampler]:
    return [Sampler(0.0, (), constant_table(m)) for m in minutes]


def test_deterministic_line_is_the_sum_of_its_step_times():
    # No variability and no contention: the flow time is the plain sum of the step
    # times (a line's critical path; common practice).
    samplers = fixed(30, 45, 12.5, 60)
    lot = Lot(steps=((0, 0), (1, 1), (2, 2), (0, 3)))
    rep = simulate([Center(), Center(), Center()], samplers, [lot], 5, seed=1)
    assert all(r.finish == [pytest.approx(147.5)] for r in rep)


def test_one_unit_serves_the_queue_in_board_order():
    # Three lots wait at one unit: the supervisor's order first, then lot priority,
    # then arrival; each takes 10 min, so they finish at 10, 20, 30 in that order.
    s = fixed(10)
    lots = [
        Lot(steps=((0, 0),), order=(0, 100), arrived=-50.0),  # oldest, plain
        Lot(steps=((0, 0),), order=(0, 50), arrived=-5.0),  # urgent lot priority
        Lot(steps=((0, 0),), order=(-1, 100), arrived=-1.0),  # supervisor put it on top
    ]
    rep = simulate([Center()], s, lots, 1, seed=1)[0]
    assert rep.finish == [30.0, 20.0, 10.0]


def test_parallel_units_and_a_batch_center():
    s = fixed(10, 60)
    # 4 lots, 2 units of 10 min: two waves -> 10, 10, 20, 20
    lots = [Lot(steps=((0, 0),), arrived=-float(4 - k)) for k in range(4)]
    rep = simulate([Center(units=2)], s, lots, 1, seed=1)[0]
    assert sorted(rep.finish) == [10, 10, 20, 20]
    # a press of one opening taking loads of 3: 5 lots -> loads at 0 and 60
    lots = [Lot(steps=((0, 1),), arrived=-float(5 - k)) for k in range(5)]
    rep = simulate([Center(units=1, batch_size=3)], s, lots, 1, seed=1)[0]
    assert sorted(rep.finish) == [60, 60, 60, 120, 120]


def test_calendar_pauses_work_overnight_and_over_the_weekend():
    cal = ShiftCalendar(
        weekdays=frozenset(range(5)), shifts=(Shift(dt.time(6, 0), dt.time(14, 0)),)
    )
    # Starting Friday 12:00: 2 h left on Friday, then Monday 06:00 for the rest.
    friday_noon = dt.datetime(2030, 1, 11, 12, 0, tzinfo=dt.UTC)
    working = compile_calendar(cal, friday_noon)
    assert working is not None
    rep = simulate([Center(working=working)], fixed(300), [Lot(steps=((0, 0),))], 1, 1)[0]
    monday_9 = dt.datetime(2030, 1, 14, 9, 0, tzinfo=dt.UTC)
    assert friday_noon + dt.timedelta(minutes=rep.finish[0]) == monday_9


def test_lot_already_in_work_needs_only_the_rest_of_its_time():
    rep = simulate([Center()], fixed(50), [Lot(steps=((0, 0),), elapsed=20.0)], 1, 1)[0]
    assert rep.finish == [30.0]
    # past its time it still needs a little (RESIDUAL_FLOOR of the draw)
    rep = simulate([Center()], fixed(50), [Lot(steps=((0, 0),), elapsed=80.0)], 1, 1)[0]
    assert rep.finish == [pytest.approx(2.5)]


def test_released_lot_joins_later():
    rep = simulate([Center()], fixed(10), [Lot(steps=((0, 0),), release=100.0)], 1, 1)[0]
    assert rep.finish == [110.0]


def _simpy_floor(routes, orders, releases, units, minutes):
    """The same floor in simpy 4.1: a PriorityResource per center, one process per lot,
    the request priority being the lot's place in the board order."""
    env = simpy.Environment()
    res = [simpy.PriorityResource(env, capacity=u) for u in units]
    finish = [0.0] * len(routes)

    def run(i):
        yield env.timeout(releases[i])
        for c, s in routes[i]:
            with res[c].request(priority=orders[i]) as req:
                yield req
                yield env.timeout(minutes[s])
        finish[i] = env.now

    for i in range(len(routes)):
        env.process(run(i))
    env.run()
    return finish


def test_matches_simpy_on_a_deterministic_floor():
    # Reference library: simpy 4.1 (PriorityResource serves by priority, then request
    # time). Every step time drawn once from a continuous range and distinct release
    # times (so no two events tie: simultaneous events may run in either order in
    # either engine), unique priorities: both must give the same finishes.
    rng = random.Random(42)
    units = [1, 2, 3, 1, 2]
    minutes: list[float] = []
    routes, orders, releases, lots = [], [], [], []
    for i in range(80):
        route = []
        for _ in range(rng.randint(1, 7)):
            route.append((rng.randrange(5), len(minutes)))
            minutes.append(rng.uniform(5, 30))
        route = tuple(route)
        routes.append(route)
        orders.append(i * 7 % 83)
        releases.append(rng.uniform(0.01, 60))
        lots.append(Lot(steps=route, order=(0, orders[-1]), release=releases[-1]))
    mine = simulate([Center(units=u) for u in units], fixed(*minutes), lots, 1, 1)[0].finish
    reference = _simpy_floor(routes, orders, releases, units, minutes)
    assert mine == pytest.approx(reference, rel=1e-12)
    assert max(mine) > 200  # the floor was congested: queues formed and were ordered


def test_same_seed_same_answer_and_replications_differ():
    s = [Sampler(0.0, (), tuple(float(k) for k in range(1, 101)))]
    lots = [Lot(steps=((0, 0), (0, 0)))] * 3
    a = simulate([Center()], s, lots, 4, seed=9)
    b = simulate([Center()], s, lots, 4, seed=9)
    assert [r.finish for r in a] == [r.finish for r in b]
    assert len({tuple(r.finish) for r in a}) == 4


def test_percentile_is_hyndman_fan_type_7():
    # Hyndman and Fan (1996), definition 7 (NumPy's default): for 1..10,
    # P50 = 5.5 and P90 = 9.1.
    values = [float(v) for v in range(1, 11)]
    assert percentile(values, 0.5) == pytest.approx(5.5)
    assert percentile(values, 0.9) == pytest.approx(9.1)


def test_bad_model_is_refused():
    with pytest.raises(ValueError, match="at least one unit"):
        Center(units=0)
    with pytest.raises(ValueError, match="does not exist"):
        simulate([Center()], fixed(1), [Lot(steps=((3, 0),))], 1, 1)
