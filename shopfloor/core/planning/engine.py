"""The discrete-event simulation of a floor: lots queue at work centers and are served.

Why our own event loop instead of simpy: a forecast runs 2,000 lots x ~20 steps x 100
replications, some 4 million step starts, on a two-core machine in under 10 s. In simpy
each step is a generator process, a resource request and a timeout, several events and
callbacks per step; here a step is one heap entry in a center's queue and one on the
event heap, with every lookup in local variables. Every step time of a replication is
drawn up front in one pass done in C (16 random bits per step from one `randbytes`
call, scaled into the step's draw table by `map` over operator functions), and the
tables are contiguous float arrays, so a draw costs no interpreted arithmetic and few
cache misses. A forecast reads only finish times; the per-lot run times and per-center
busy minutes that the queueing validation needs are added up only when asked
(`detail`). The validation tests check the loop against closed-form queueing results
and, on a deterministic floor, against the same floor modelled in simpy
(tests/planning/test_engine.py).

The model:
- A work center has `units` identical parallel units and an optional calendar (working
  time; see calendar.py). A batch center (press load, plating flight) starts a batch of
  up to `batch_size` queued lots together as soon as a unit is free; the batch takes one
  drawn run time and all its lots finish together. It does not wait to fill a batch.
- A lot joins the queue of its next step's center the moment its step ends (moves take
  no time). Queues are served in the board's order: the supervisor's order at that step
  (0 for a step reached in the simulation), then the lot priority, then arrival, then
  lot code (the caller lists lots in code order, so the lot index breaks ties).
- A center closed by its calendar starts nothing; it wakes at its next opening and then
  starts the best of its queue, so a better lot arriving overnight goes first.
- A lot already in work at the start occupies a unit and needs the rest of its drawn
  run time: max(draw - elapsed, RESIDUAL_FLOOR x draw).
"""

from __future__ import annotations

import heapq
import random
from array import array
from bisect import bisect_right
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import repeat
from operator import getitem, mul, rshift

from .calendar import WorkingTime
from .steptimes import Sampler

# A lot already past its drawn run time still needs some time: this share of the draw.
RESIDUAL_FLOOR = 0.05

_INF = float("inf")


@dataclass(frozen=True)
class Center:
    """A work center's capacity."""

    units: int = 1
    batch_size: int = 1
    working: WorkingTime | None = None  # None: always open

    def __post_init__(self) -> None:
        if self.units < 1:
            raise ValueError("a work center needs at least one unit")
        if self.batch_size < 1:
            raise ValueError("a batch size is at least 1")


@dataclass(frozen=True)
class Lot:
    """A lot's remaining route: (center index, sampler index) per step, first = current.

    `order` is (supervisor order at the current step, lot priority); `arrived` is when
    it joined the current queue (minutes, <= 0 for lots already waiting); `release` is
    when it joins that queue if later (a lot on hold, a quoted order); `elapsed` is set
    when its current step is in work (minutes already worked)."""

    steps: tuple[tuple[int, int], ...]
    order: tuple[int, int] = (0, 100)
    arrived: float = 0.0
    release: float = 0.0
    elapsed: float | None = None


@dataclass
class Replication:
    """One replication: each lot's finish time and total run time drawn (minutes)."""

    finish: list[float]
    service: list[float]
    busy_minutes: list[float]  # per center: run time started there (a batch counts once)


def _key(order: tuple[int, int]) -> int:
    # One integer that sorts like (supervisor order, lot priority): fewer tuple compares.
    return order[0] * (1 << 40) + order[1]


@dataclass(frozen=True)
class Model:
    """A validated floor, flattened once for all replications."""

    centers: Sequence[Center]
    lots: Sequence[Lot]
    flat: _Flat


def prepare(centers: Sequence[Center], samplers: Sequence[Sampler], lots: Sequence[Lot]) -> Model:
    for n, lot in enumerate(lots):
        if not lot.steps:
            raise ValueError(f"lot {n} has no remaining steps")
        for c, s in lot.steps:
            if not (0 <= c < len(centers)) or not (0 <= s < len(samplers)):
                raise ValueError(f"lot {n} names a center or sampler that does not exist")
    return Model(centers=centers, lots=lots, flat=_flatten(samplers, lots))


def replicate(model: Model, seed: int, r: int, *, detail: bool = False) -> Replication:
    """Replication r of a model; its random stream depends only on (seed, r).

    `detail` also adds up each lot's run time and each center's busy minutes (the
    queueing validation needs them; a forecast reads only the finish times)."""
    return _one(model.centers, model.flat, model.lots, random.Random(seed * 1_000_003 + r), detail)


def simulate(
    centers: Sequence[Center],
    samplers: Sequence[Sampler],
    lots: Sequence[Lot],
    replications: int,
    seed: int,
) -> list[Replication]:
    """Run independent replications (each with its own random stream from `seed`)."""
    if replications < 1:
        raise ValueError("at least one replication")
    model = prepare(centers, samplers, lots)
    return [replicate(model, seed, r, detail=True) for r in range(replications)]


_Flat = tuple[
    list[int], list[array[float]], list[int], list[int], list[int], list[float], list[float]
]
_SPAN = 1e9


def _flatten(samplers: Sequence[Sampler], lots: Sequence[Lot]) -> _Flat:
    """Every lot's steps in one list, indexed by a global step number (built once), and
    each lot's queue rank at its current step and at later ones."""
    tables = [array("d", s.draw_table()) for s in samplers]  # contiguous: fewer cache misses
    for t in tables:
        if not 1 <= len(t) <= 65536:
            raise ValueError("a step-time table holds 1 to 65,536 values")
    step_c: list[int] = []
    step_t: list[array[float]] = []
    step_n: list[int] = []
    gstart = [0] * len(lots)
    gend = [0] * len(lots)
    for i, lot in enumerate(lots):
        gstart[i] = len(step_c)
        for c, s in lot.steps:
            step_c.append(c)
            step_t.append(tables[s])
            step_n.append(len(tables[s]))
        gend[i] = len(step_c)
    # A queue entry is (rank x _SPAN + arrival minutes, lot index): one float compare
    # instead of a tuple's. Ranks are the distinct (supervisor order, lot priority)
    # pairs in order; arrivals stay within +-_SPAN / 2 minutes (about 950 years).
    pairs = sorted({lot.order for lot in lots} | {(0, lot.order[1]) for lot in lots})
    rank = {pair: k for k, pair in enumerate(pairs)}
    first_key = [rank[lot.order] * _SPAN for lot in lots]
    later_key = [rank[(0, lot.order[1])] * _SPAN for lot in lots]
    return step_c, step_t, step_n, gstart, gend, first_key, later_key


def _one(
    centers: Sequence[Center],
    flat: _Flat,
    lots: Sequence[Lot],
    rng: random.Random,
    detail: bool,
) -> Replication:
    # Written for speed (see the module docstring). Every step's run time is drawn up
    # front, one uniform number per step in one list comprehension (a batch runs on its
    # first lot's draw). Events are (time, payload) with an int payload: 0 <= p < n lot
    # p's step done (its center is the step's); n <= p < 2n lot p - n released into its
    # queue; -nc <= p <= -1 center -1 - p opens; p < -nc batch -1 - nc - p done. Queue
    # entries are (float key, lot). The common cases (start the arriving lot on a free
    # unit of an open single-lot center, or refill the unit just freed) are inline.
    push, pop = heapq.heappush, heapq.heappop
    n = len(lots)
    nc = len(centers)
    step_c, step_t, step_n, gstart, gend, first_key, later_key = flat
    # 16 random bits per step, scaled to the step's table in C (map over operator
    # functions): index = (bits x size) >> 16 is uniform over a table whose size
    # divides 65,536 (the quantile tables are 1,024 to 65,536 values).
    bits = array("H", rng.randbytes(2 * len(step_c)))
    dur: list[float] = list(map(getitem, step_t, map(rshift, map(mul, bits, step_n), repeat(16))))
    gpos = list(gstart)
    units = [c.units for c in centers]
    batch = [c.batch_size for c in centers]
    cals = [c.working for c in centers]
    single = [c.batch_size == 1 for c in centers]
    queues: list[list[tuple[float, int]]] = [[] for _ in centers]
    busy = [0] * nc
    wake = [_INF] * nc
    finish = [0.0] * n
    service = [0.0] * n
    batches: list[tuple[int, tuple[int, ...]]] = []
    events: list[tuple[float, int]] = []
    busy_total = [0.0] * nc

    # Simulated time only moves forward, so each calendar center keeps the working
    # interval it is in (or the next one): an open check is two compares, and a step
    # that ends inside that interval needs no calendar arithmetic.
    cal_idx = [0] * nc
    cal_lo = [_INF] * nc
    cal_hi = [-_INF] * nc

    def start(c: int, t: float) -> None:
        q = queues[c]
        cal = cals[c]
        hi = _INF
        if cal is not None:
            hi = cal_hi[c]
            if t >= hi:
                k = bisect_right(cal.ends, t, cal_idx[c])
                cal_idx[c] = k
                if k == cal.n:
                    cal_lo[c], cal_hi[c] = -_INF, _INF
                else:
                    cal_lo[c], cal_hi[c] = cal.starts[k], cal.ends[k]
                hi = cal_hi[c]
            opens = cal_lo[c]
            if opens > t:
                if wake[c] > opens:
                    wake[c] = opens
                    push(events, (opens, -1 - c))
                return
        b = batch[c]
        while q and busy[c] < units[c]:
            if b == 1:
                i = pop(q)[1]
                p = i
                members: tuple[int, ...] = (i,)
            else:
                members = tuple(pop(q)[1] for _ in range(min(b, len(q))))
                i = members[0]
                p = -1 - nc - len(batches)
                batches.append((c, members))
            d = dur[gpos[i]]
            if detail:
                for m in members:
                    service[m] += d
                busy_total[c] += d
            busy[c] += 1
            end = t + d
            if end > hi and cal is not None:
                end = cal.add(t, d)
            push(events, (end, p))

    for i, lot in enumerate(lots):
        c = step_c[gpos[i]]
        if lot.elapsed is not None:
            d = dur[gpos[i]]
            d = max(d - lot.elapsed, RESIDUAL_FLOOR * d)
            if detail:
                service[i] += d
                busy_total[c] += d
            busy[c] += 1
            cal = cals[c]
            push(events, (d if cal is None else cal.add(0.0, d), i))
        elif lot.release > 0:
            push(events, (lot.release, n + i))
        else:
            queues[c].append((first_key[i] + lot.arrived, i))
    for q in queues:
        heapq.heapify(q)
    for c in range(nc):
        if queues[c] and busy[c] < units[c]:
            start(c, 0.0)

    while events:
        t, p = pop(events)
        if 0 <= p < n:
            g = gpos[p]
            c = step_c[g]
            g += 1
            if g == gend[p]:
                finish[p] = t
            else:
                gpos[p] = g
                c2 = step_c[g]
                q2 = queues[c2]
                cal = cals[c2]
                if (
                    single[c2]
                    and not q2
                    and busy[c2] < units[c2] - (c2 == c)
                    and (cal is None or cal_lo[c2] <= t < cal_hi[c2])
                ):
                    # straight onto a free unit of an open single-lot center
                    d = dur[g]
                    if detail:
                        service[p] += d
                        busy_total[c2] += d
                    busy[c2] += 1
                    end = t + d
                    if cal is not None and end > cal_hi[c2]:
                        end = cal.add(t, d)
                    push(events, (end, p))
                else:
                    push(q2, (later_key[p] + t, p))
                    if c2 != c and busy[c2] < units[c2]:
                        start(c2, t)
            # the unit just freed at c takes the head of its queue (it stays busy)
            q = queues[c]
            cal = cals[c]
            if q and single[c] and (cal is None or cal_lo[c] <= t < cal_hi[c]):
                i = pop(q)[1]
                d = dur[gpos[i]]
                if detail:
                    service[i] += d
                    busy_total[c] += d
                end = t + d
                if cal is not None and end > cal_hi[c]:
                    end = cal.add(t, d)
                push(events, (end, i))
            else:
                busy[c] -= 1
                if q:
                    start(c, t)
        elif p >= n:
            i = p - n
            c = step_c[gpos[i]]
            push(queues[c], (first_key[i] + t, i))
            if busy[c] < units[c]:
                start(c, t)
        elif p >= -nc:
            c = -1 - p
            wake[c] = _INF
            if queues[c] and busy[c] < units[c]:
                start(c, t)
        else:
            c, members = batches[-1 - nc - p]
            busy[c] -= 1
            moved: list[int] = []
            for i in members:
                g = gpos[i] + 1
                if g == gend[i]:
                    finish[i] = t
                    continue
                gpos[i] = g
                c2 = step_c[g]
                push(queues[c2], (later_key[i] + t, i))
                moved.append(c2)
            for c2 in dict.fromkeys(moved):
                if busy[c2] < units[c2]:
                    start(c2, t)
            if queues[c] and busy[c] < units[c]:
                start(c, t)
    return Replication(finish=finish, service=service, busy_minutes=busy_total)


def percentile(sorted_values: Sequence[float], p: float) -> float:
    """Linear interpolation between closest ranks (Hyndman and Fan 1996, definition 7,
    the default of R and NumPy)."""
    if not sorted_values:
        raise ValueError("no values")
    h = (len(sorted_values) - 1) * p
    lo = int(h)
    hi = min(lo + 1, len(sorted_values) - 1)
    return sorted_values[lo] + (h - lo) * (sorted_values[hi] - sorted_values[lo])
