"""Timing of the engines against closed forms: link rates, swap-ASAP waiting times, failed swaps.

Tolerances are 4.5 standard errors of the estimate (fixed seeds, so the tests are deterministic;
4.5 sigma keeps a correct engine far from the edge).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest

from netsim.engine import DesOptions, StopRule, simulate_chain_vector, simulate_des
from netsim.engine.chain import Chain, HopSpec, line_chain, synthetic_physics
from netsim.engine.vector import cycle_timeline
from netsim.network.bounds import expected_rounds, expected_wait_s
from netsim.scenario.model import Site

#: Stated for the timelines and closed forms here: every slot may attempt, no transfer time or
#: error, no attempt dephasing, no gate error (the built-in defaults are demonstrated NV values).
IDEAL: dict[str, Any] = {"communication_qubits": None, "memory_transfer_s": 0.0, "memory_transfer_error": 0.0,
                         "attempt_dephasing": 0.0, "gate_error": 0.0}

Z = 4.5


def shchukin_expected_max(n: int, p: float) -> float:
    """E[max of n iid Geometric(p) on {1, 2, ...}] = sum_k C(n,k) (-1)^(k+1) / (1 - (1-p)^k).

    Shchukin, Schmidt & van Loock, Phys. Rev. A 100, 032322 (2019): mean waiting time of a
    swap-as-soon-as-possible chain of n links kept once made, in attempt periods.
    """
    return sum(math.comb(n, k) * (-1) ** (k + 1) / (1.0 - (1.0 - p) ** k) for k in range(1, n + 1))


def test_netsim_waiting_time_matches_shchukin() -> None:
    """netsim's own closed form (network.bounds.expected_rounds / expected_wait_s, which the budget
    and the engines' expected rates use) against the published values: n = 2 gives
    (3 - 2p) / (p (2 - p)); n = 3 at p = 1/2 gives 3/(1/2) - 3/(3/4) + 1/(7/8) = 22/7, worked by
    hand (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019). The sum written above is the
    reference the engine tests below use; it must agree with netsim's function too."""
    for p in (0.01, 0.3, 0.9):
        assert expected_rounds([p, p]) == pytest.approx((3 - 2 * p) / (p * (2 - p)), rel=1e-12)
        assert expected_wait_s([p, p], [2e-3, 2e-3]) == pytest.approx(2e-3 * (3 - 2 * p) / (p * (2 - p)), rel=1e-12)
    assert expected_rounds([0.5] * 3) == pytest.approx(22 / 7, rel=1e-12)
    assert expected_wait_s([0.5] * 3, [1e-3] * 3) == pytest.approx(1e-3 * 22 / 7, rel=1e-12)
    for n in (2, 3, 4, 6):
        for p in (0.05, 0.2, 0.5):
            assert expected_rounds([p] * n) == pytest.approx(shchukin_expected_max(n, p), rel=1e-10)


@pytest.mark.parametrize("engine", ["vector", "des"])
def test_one_link_rate_is_round_success_over_period(engine: str) -> None:
    # One link: rate = p_round / T (common practice; the renewal-reward theorem). With a herald
    # delay shorter than the period the next round still starts one period later.
    p, period = 0.05, 1e-3
    chain = line_chain(1, p, period, herald_s=0.4 * period, length_km=30.0)
    pairs = 40_000 if engine == "vector" else 8_000
    rng = np.random.default_rng(11)
    if engine == "vector":
        run = simulate_chain_vector(chain, StopRule(pairs=pairs), rng)
    else:
        run = simulate_des([chain], StopRule(pairs=pairs), [rng])[0][0]
    rate = run.metrics.n / run.simulated_time_s
    expected = p / period
    # relative s.e. of n / t_n for geometric cycles: sqrt(1 - p) / sqrt(n)
    assert rate == pytest.approx(expected, rel=Z * math.sqrt(1 - p) / math.sqrt(pairs))
    assert run.hop_attempts[0] / pairs == pytest.approx(1 / p, rel=Z * math.sqrt(1 - p) / math.sqrt(pairs))


@pytest.mark.parametrize("n", [2, 3, 4])
def test_time_to_first_pair_matches_shchukin(n: int) -> None:
    # Deterministic swaps, no cut-off, no classical delay, herald at the end of the round: the
    # first end-to-end pair arrives after max_i K_i periods. Expected value: Shchukin, Schmidt &
    # van Loock, PRA 100, 032322 (2019).
    p, period, samples = 0.2, 1e-3, 200_000
    chain = line_chain(n, p, period)
    k = np.random.default_rng(5 + n).geometric(p, size=(samples, n)).astype(float)
    first = cycle_timeline(chain, k, np.zeros_like(k))["delivered"]
    expected = shchukin_expected_max(n, p) * period
    se = first.std(ddof=1) / math.sqrt(samples)
    assert abs(first.mean() - expected) < Z * se


@pytest.mark.parametrize("n", [2, 3, 4])
def test_event_engine_cycle_time_matches_shchukin(n: int) -> None:
    # The simpy engine with sure swaps and zero message delays restarts every hop at the
    # delivery, so every cycle is a fresh "first pair": mean cycle = Shchukin et al. (2019).
    p, period, pairs = 0.2, 1e-3, 3_000
    chain = line_chain(n, p, period)
    (run,), _ = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(20 + n)])
    mean_cycle = run.simulated_time_s / run.metrics.n
    sd = math.sqrt(max(run.intervals_sum_sq_s / run.intervals_n - mean_cycle**2, 0.0))
    expected = shchukin_expected_max(n, p) * period
    assert abs(mean_cycle - expected) < Z * sd / math.sqrt(pairs)


def test_failed_swaps_slow_delivery_by_the_success_probability() -> None:
    # Two hops that always succeed in their first round (p = 1), one swap with success q: each
    # try takes one period and succeeds with q, so the rate is q / T (geometric number of tries;
    # common practice). A failed swap frees both pairs.
    q, period, pairs = 0.5, 1e-3, 6_000
    chain = line_chain(2, 1.0, period, bsm_success_probability=q)
    (run,), _ = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(3)])
    rate = run.metrics.n / run.simulated_time_s
    assert rate == pytest.approx(q / period, rel=Z * math.sqrt(1 - q) / math.sqrt(pairs))
    assert run.swap_failures[1] / (run.swap_failures[1] + pairs) == pytest.approx(1 - q, abs=Z * 0.5 / math.sqrt(2 * pairs))


def test_classical_delays_add_to_delivery() -> None:
    # Three hops of 20 km, p = 1: every hop heralds after one period T; the swap outcomes of
    # the inner sites must still reach the far user: 40 km at c / 1.468 (common practice,
    # 4.9 us/km). Delivery = T + 40 km * 1.468 / c.
    period = 1e-3
    chain = line_chain(3, 1.0, period, length_km=20.0)
    run = simulate_chain_vector(chain, StopRule(pairs=10), np.random.default_rng(0))
    expected = period + 40.0 * 1.468 / 299_792.458
    assert run.metrics.first_delivery_s == pytest.approx(expected, rel=1e-12)
    (des,), _ = simulate_des([chain], StopRule(pairs=10), [np.random.default_rng(0)])
    assert des.metrics.first_delivery_s == pytest.approx(expected, rel=1e-12)


def test_time_stop_rule_reports_the_requested_time() -> None:
    chain = line_chain(2, 0.1, 1e-3)
    run = simulate_chain_vector(chain, StopRule(time_s=2.0), np.random.default_rng(1))
    assert run.simulated_time_s == 2.0
    (des,), _ = simulate_des([chain], StopRule(time_s=0.5), [np.random.default_rng(1)], DesOptions())
    assert des.simulated_time_s == 0.5
    assert des.metrics.n > 0


@pytest.mark.slow
@pytest.mark.parametrize("p", [0.05, 0.5])
def test_event_engine_cycle_time_matches_shchukin_large_sample(p: float) -> None:
    # As above with 20,000 cycles of a 4-link chain, at a low and a high success probability
    # (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019).
    period, pairs = 1e-3, 20_000
    chain = line_chain(4, p, period)
    (run,), _ = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(99)])
    mean_cycle = run.simulated_time_s / run.metrics.n
    sd = math.sqrt(max(run.intervals_sum_sq_s / run.intervals_n - mean_cycle**2, 0.0))
    assert abs(mean_cycle - shchukin_expected_max(4, p) * period) < Z * sd / math.sqrt(pairs)


def test_swap_outcomes_reach_both_users_in_any_swap_order() -> None:
    # Four hops of 30 km (message time d each), p = 1, heralds: hops 2 and 3 at a, hops 0 and 1
    # at a + d/2. Swaps: site 3 at a, sites 1 and 2 at a + d/2. The last user hears site 1's
    # outcome after 3 d: delivery at a + 3.5 d (worked by hand from the delivery rule).
    length = 30.0
    d = length * 1.468 / 299_792.458
    a = 1e-3
    heralds = (a + d / 2, a + d / 2, a, a)
    sites = tuple(Site(f"Kell{k}", "user" if k in (0, 4) else "repeater", memory_slots=1 if k in (0, 4) else 2,
                       t1_s=math.inf, t2_s=math.inf, **IDEAL) for k in range(5))
    hops = tuple(HopSpec(f"Kell{k}-Kell{k + 1}", synthetic_physics(1.0, 1e-2, herald_s=h, length_km=length))
                 for k, h in enumerate(heralds))
    chain = Chain("Kell0-Kell4", sites, hops)
    expected = a + 3.5 * d
    vec = simulate_chain_vector(chain, StopRule(pairs=1), np.random.default_rng(0))
    (des,), _ = simulate_des([chain], StopRule(pairs=1), [np.random.default_rng(0)])
    assert vec.metrics.first_delivery_s == pytest.approx(expected, rel=1e-12)
    assert des.metrics.first_delivery_s == pytest.approx(expected, rel=1e-12)


def test_offset_solver_is_exact_and_quick_at_the_extreme(monkeypatch: pytest.MonkeyPatch) -> None:
    """Zero-length hops, a 1 ns herald and p = 0.999: consecutive cycles stay coupled for a long
    run of cycles (each next round waits for the period after delivery). The solver must give
    the cycle-by-cycle timeline of the model (written out here one cycle at a time) and must not
    need a pass per cycle (review finding: 5,052 passes and 10 s before)."""
    from netsim.engine import vector

    passes = []
    monkeypatch.setattr(vector, "cycle_timeline", lambda *a: passes.append(len(a[1])) or cycle_timeline(*a))
    chain = line_chain(3, 0.999, 1e-5, herald_s=1e-9, length_km=0.0)
    k = np.random.default_rng(5).geometric(chain.p, size=(2_000, chain.n_hops)).astype(float)
    tl = vector._solve_offsets(chain, k, np.zeros(chain.n_hops))
    whole = [n for n in passes if n > 1]
    assert len(whole) <= vector.VECTOR_PASSES + 1  # whole-array passes are bounded, not one per cycle
    assert 0 < len(passes) - len(whole) <= len(k)  # the cycle-by-cycle tail ran, one step per cycle at most
    # the model cycle by cycle: herald H_i = o_i + (K_i - 1) T_i + h_i; delivery at the last
    # herald (zero-length hops: messages take no time); next offsets o'_i = max(0, o_i + K_i T_i - t_D)
    o, born, delivered = np.zeros(chain.n_hops), np.empty_like(k), np.empty(len(k))
    for c in range(len(k)):
        born[c] = o + (k[c] - 1) * chain.period_s
        delivered[c] = (born[c] + chain.herald_s).max()
        o = np.maximum(0.0, born[c] + chain.period_s - delivered[c])
    np.testing.assert_allclose(tl["delivered"], delivered, rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(tl["born"], born, rtol=1e-12, atol=1e-18)


def test_one_hop_chain_with_a_cutoff_takes_the_fast_path_with_the_same_statistics() -> None:
    """A lone heralded pair is delivered at its herald, so a cut-off never acts on a one-hop chain:
    the vectorised engine serves it and agrees with the event engine. Rate check: one cycle is
    (K - 1) T + h with K ~ Geometric(p), so the rate is 1 / ((1/p - 1) T + h) (geometric mean,
    common practice)."""
    from netsim.engine import simulate

    p, period, herald = 0.05, 1e-4, 1e-4
    chain = line_chain(1, p, period, herald_s=herald, t1_s=10.0, t2_s=1.0)
    (fast,) = simulate([chain], rule=StopRule(pairs=20_000), seed=1, options=DesOptions(cutoff_s=1e-4))
    (slow,), _ = simulate_des([chain], StopRule(pairs=4_000), [np.random.default_rng(2)], DesOptions(cutoff_s=1e-4))
    assert fast.engine == "vector" and slow.engine == "des"
    expected = 1.0 / ((1 / p - 1) * period + herald)
    for run in (fast, slow):
        rate = run.metrics.n / run.simulated_time_s
        assert rate == pytest.approx(expected, rel=4 * run.rate_relative_halfwidth() / 1.96)
