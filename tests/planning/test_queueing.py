"""The simulation against closed-form queueing theory (sources named beside each check).

Each check runs the engine on a textbook queue with fixed seeds and requires the
simulated mean to lie within 4 Monte Carlo standard errors (taken across independent
replications) of the formula: a correct engine fails that about once in 16,000 seeds,
a wrong queue discipline or capacity rule misses by many standard errors.
"""

from __future__ import annotations

import pytest

from shopfloor.core.planning import queueing

Z = 4.0


def _close(simulated: float, expected: float, se: float) -> None:
    assert abs(simulated - expected) <= Z * se, (simulated, expected, se)


def test_mm1_time_in_system_matches_one_over_mu_minus_lambda():
    # Kleinrock, Queueing Systems vol. 1 (1975), section 3.2: W = 1 / (mu - lambda).
    lam, mu = 0.6, 1.0
    r = queueing.simulate_line(lam, [mu], [1], jobs=4000, seed=11, replications=12)
    assert queueing.mm1_time_in_system(lam, mu) == pytest.approx(2.5)
    _close(r.mean_time_in_system, 2.5, r.se_time_in_system)
    # Wq = rho / (mu - lambda) = 1.5 (same source)
    _close(r.mean_in_queue, 1.5, r.se_in_queue)
    # utilisation rho = lambda / mu
    assert r.utilisation == pytest.approx(0.6, abs=0.03)


@pytest.mark.parametrize("servers", [2, 3])
def test_mmc_matches_erlang_c(servers):
    # Erlang C (A. K. Erlang 1917; Kleinrock section 3.5): P(wait) and
    # Wq = C(c, a) / (c mu - lambda), W = Wq + 1 / mu.
    mu = 1.0
    lam = 0.7 * servers * mu
    r = queueing.simulate_line(lam, [mu], [servers], jobs=4000, seed=5 + servers, replications=12)
    _close(r.mean_in_queue, queueing.mmc_wait_in_queue(servers, lam, mu), r.se_in_queue)
    _close(
        r.mean_time_in_system,
        queueing.mmc_time_in_system(servers, lam, mu),
        r.se_time_in_system,
    )
    assert r.utilisation == pytest.approx(0.7, abs=0.03)


def test_erlang_c_formula_against_published_values():
    # Textbook check values (from memory, recomputed by hand from the formula):
    # c = 2, a = 1 (rho = 0.5): C = 1/3; c = 1: C = rho.
    assert queueing.erlang_c(2, 1.0, 1.0) == pytest.approx(1 / 3)
    assert queueing.erlang_c(1, 0.8, 1.0) == pytest.approx(0.8)
    # c = 3, a = 2: C = (8/6 * 3) / (1 + 2 + 2 + 8/6 * 3) = 4 / 9
    assert queueing.erlang_c(3, 2.0, 1.0) == pytest.approx(4 / 9)


def test_littles_law_on_a_simulated_line():
    # Little's law L = lambda W (J. D. C. Little, Operations Research 9(3), 1961): the
    # time-average number in the system, measured from the trajectory, equals the
    # arrival rate times the mean time in system.
    lam = 0.5
    r = queueing.simulate_line(lam, [1.0, 0.8, 1.25], [1, 1, 1], jobs=3000, seed=3, replications=12)
    se = lam * r.se_time_in_system + r.se_number_in_system
    _close(r.mean_number_in_system, lam * r.mean_time_in_system, se)
    # Jackson (Operations Research 5, 1957): tandem M/M/1 queues, W = sum 1/(mu_k - lambda)
    _close(r.mean_time_in_system, 1 / 0.5 + 1 / 0.3 + 1 / 0.75, r.se_time_in_system)


def test_unstable_queue_is_refused_with_the_rule():
    with pytest.raises(ValueError, match="unstable"):
        queueing.simulate_line(1.0, [1.0], [1], jobs=100, seed=1)
