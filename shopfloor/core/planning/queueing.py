"""Closed-form queueing results, and the engine run on the textbook queues.

The validation tests and `manage.py planning validate` compare the simulation with:
- M/M/1 mean time in system W = 1 / (mu - lambda) (Kleinrock, Queueing Systems vol. 1,
  1975, section 3.2; any operations-research text, e.g. Hillier and Lieberman);
- M/M/c: Erlang's C formula for the probability of waiting, Wq = C / (c mu - lambda)
  (A. K. Erlang 1917; Kleinrock section 3.5);
- tandem M/M/1 queues (a Jackson network): W = sum 1 / (mu_k - lambda)
  (J. R. Jackson, Operations Research 5, 1957; Burke's output theorem, 1956);
- Little's law L = lambda W (J. D. C. Little, Operations Research 9(3), 1961).
"""

from __future__ import annotations

import math
import random
from collections.abc import Sequence
from dataclasses import dataclass

from .engine import Center, Lot, simulate
from .steptimes import Sampler, exponential_table

# The first share of each replication's jobs is dropped from the averages: the system
# starts empty, which biases early waits low (the usual warm-up deletion).
WARMUP_FRACTION = 0.1


def mm1_time_in_system(arrival_rate: float, service_rate: float) -> float:
    _check_stable(arrival_rate, service_rate, 1)
    return 1.0 / (service_rate - arrival_rate)


def erlang_c(servers: int, arrival_rate: float, service_rate: float) -> float:
    """Probability an arrival waits in an M/M/c queue (Erlang C)."""
    _check_stable(arrival_rate, service_rate, servers)
    a = arrival_rate / service_rate
    rho = a / servers
    term = 1.0
    partial = 0.0
    for k in range(servers):
        partial += term
        term *= a / (k + 1)
    # term is now a^c / c!
    top = term / (1.0 - rho)
    return top / (partial + top)


def mmc_wait_in_queue(servers: int, arrival_rate: float, service_rate: float) -> float:
    return erlang_c(servers, arrival_rate, service_rate) / (servers * service_rate - arrival_rate)


def mmc_time_in_system(servers: int, arrival_rate: float, service_rate: float) -> float:
    return mmc_wait_in_queue(servers, arrival_rate, service_rate) + 1.0 / service_rate


def _check_stable(arrival_rate: float, service_rate: float, servers: int) -> None:
    if arrival_rate <= 0 or service_rate <= 0 or servers < 1:
        raise ValueError("rates must be positive and servers at least 1")
    if arrival_rate >= servers * service_rate:
        raise ValueError(
            f"the queue is unstable: arrival rate {arrival_rate} must be below "
            f"servers x service rate = {servers * service_rate}"
        )


@dataclass(frozen=True)
class LineResult:
    """Averages over replications, each with its Monte Carlo standard error."""

    mean_time_in_system: float
    mean_in_queue: float
    utilisation: float
    mean_number_in_system: float
    replications: int
    se_time_in_system: float
    se_in_queue: float
    se_number_in_system: float


def simulate_line(
    arrival_rate: float,
    service_rates: Sequence[float],
    servers: Sequence[int],
    jobs: int,
    seed: int,
    replications: int = 20,
) -> LineResult:
    """Poisson arrivals through a line of exponential stations (one station = M/M/c).

    Time in system and wait in queue average the jobs after the warm-up; utilisation is
    the first station's busy time over its capacity until the last departure; the mean
    number in system is the time average of N(t) over the middle of the run (from the
    first counted arrival to the last one), measured apart from W so Little's law is a
    real check."""
    if len(service_rates) != len(servers) or not service_rates:
        raise ValueError("one service rate and one server count per station")
    if jobs < 20:
        raise ValueError("at least 20 jobs per replication")
    for mu, c in zip(service_rates, servers, strict=True):
        _check_stable(arrival_rate, mu, c)
    centers = [Center(units=c) for c in servers]
    samplers = [Sampler(0.0, (), exponential_table(1.0 / mu)) for mu in service_rates]
    route = tuple((k, k) for k in range(len(service_rates)))
    w_means, q_means, utils, l_means = [], [], [], []
    for r in range(replications):
        rng = random.Random(seed * 7919 + r)
        t = 0.0
        lots = []
        for _ in range(jobs):
            t += rng.expovariate(arrival_rate)
            lots.append(Lot(steps=route, release=t))
        rep = simulate(centers, samplers, lots, 1, seed * 104_729 + r)[0]
        skip = int(jobs * WARMUP_FRACTION)
        kept = range(skip, jobs)
        w = [rep.finish[i] - lots[i].release for i in kept]
        w_means.append(sum(w) / len(w))
        q_means.append(sum(w[j] - rep.service[i] for j, i in enumerate(kept)) / len(w))
        end = max(rep.finish)
        utils.append(rep.busy_minutes[0] / (servers[0] * end))
        a, b = lots[skip].release, lots[-1].release
        l_means.append(_time_average_in_system(lots, rep.finish, a, b))
    return LineResult(
        mean_time_in_system=_mean(w_means),
        mean_in_queue=_mean(q_means),
        utilisation=_mean(utils),
        mean_number_in_system=_mean(l_means),
        replications=replications,
        se_time_in_system=_se(w_means),
        se_in_queue=_se(q_means),
        se_number_in_system=_se(l_means),
    )


def _time_average_in_system(
    lots: Sequence[Lot], finish: Sequence[float], a: float, b: float
) -> float:
    """(1 / (b - a)) x integral over [a, b] of the number of jobs in the system."""
    total = 0.0
    for lot, f in zip(lots, finish, strict=True):
        lo = max(lot.release, a)
        hi = min(f, b)
        if hi > lo:
            total += hi - lo
    return total / (b - a)


def _mean(values: Sequence[float]) -> float:
    return sum(values) / len(values)


def _se(values: Sequence[float]) -> float:
    n = len(values)
    if n < 2:
        return math.inf
    m = _mean(values)
    return math.sqrt(sum((v - m) ** 2 for v in values) / (n - 1) / n)
