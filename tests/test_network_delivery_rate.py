"""The exact expected delivery rate of swap-as-soon-as-possible chains whose Bell measurements
can fail (netsim.network.bounds.expected_delivery_rounds), against closed forms and the event
engine."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netsim.engine.chain import line_chain
from netsim.engine.des import simulate_des
from netsim.engine.metrics import StopRule
from netsim.network.bounds import (
    MAX_EXACT_SWAP_HOPS,
    expected_delivery_rounds,
    expected_delivery_s,
    expected_rounds,
    expected_wait_s,
)


@pytest.mark.parametrize("n", range(1, 9))
def test_sure_swaps_reduce_to_the_waiting_time(n: int) -> None:
    """With s = 1 the delivery time is the wait for all hops: E[N] = sum_k C(n, k) (-1)^(k + 1) /
    (1 - (1 - p)^k) (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019)."""
    p = 0.27
    expected = sum(math.comb(n, k) * (-1) ** (k + 1) / (1 - (1 - p) ** k) for k in range(1, n + 1))
    assert expected_delivery_rounds([p] * n, [1.0] * (n - 1)) == pytest.approx(expected, rel=1e-10)


def test_two_hops_is_the_renewal_form() -> None:
    """Two hops: a failed swap empties the chain, so E[N] = E[max of two geometrics] / s with
    E[max] = (3 - 2p) / (p (2 - p)) (Shchukin, Schmidt & van Loock 2019; renewal argument,
    (common practice))."""
    p, s = 0.3, 0.55
    assert expected_delivery_rounds([p, p], [s]) == pytest.approx((3 - 2 * p) / (p * (2 - p)) / s, rel=1e-12)


def test_three_hops_that_always_succeed() -> None:
    """Three hops with q = 1, worked by hand (derived here): from the empty chain, hop 0 arrives,
    hop 1 joins it (s1) and hop 2 joins that (s2): delivered with s1 s2; a failure at site 1
    leaves hop 2 alone, a failure at site 2 empties the chain, and from 'hop 2 alone' the next
    round has the same outcomes. So E[N] = 1 / (s1 s2) rounds."""
    assert expected_delivery_rounds([1.0, 1.0, 1.0], [0.6, 0.7]) == pytest.approx(1 / 0.42, rel=1e-12)


def test_three_hops_worked_by_hand_with_one_uncertain_swap() -> None:
    """Three hops, q = 1 at hops 0 and 2 and q at hop 1, s1 = 1, s2 = s (derived here): from the
    empty chain hops 0 and 2 always hold pairs after round 1; hop 1 arrives with q per round and
    then joins both (success s) or empties the chain (1 - s). Rounds per try: 1 + (1 - q) / q
    (hop 1 may arrive in round 1); E[N] = (1 / q) / s + (1 - s) / s x (restart costs 1/q again):
    E[N] = 1 / (q s)."""
    q, s = 0.4, 0.65
    assert expected_delivery_rounds([1.0, q, 1.0], [1.0, s]) == pytest.approx(1 / (q * s), rel=1e-12)


def test_the_old_product_form_was_low_for_three_hops() -> None:
    """The product of swap successes over the wait is exact for two hops only (Shchukin, Schmidt
    & van Loock 2019 treat the general case by a Markov chain): for three hops it is too slow,
    here by more than 15 %."""
    q, s = 0.3, 0.6
    product = s * s / expected_rounds([q] * 3)
    exact = 1 / expected_delivery_rounds([q] * 3, [s, s])
    assert exact > 1.15 * product


def test_periods_and_limits() -> None:
    """Unequal periods use the slow clock of expected_wait_s; with sure swaps the two agree."""
    assert expected_delivery_s([0.2, 0.3], [1e-3, 2e-3], [1.0]) == pytest.approx(
        expected_wait_s([0.2, 0.3], [1e-3, 2e-3]), rel=1e-12)
    assert math.isfinite(expected_delivery_rounds([0.1] * MAX_EXACT_SWAP_HOPS, [0.5] * (MAX_EXACT_SWAP_HOPS - 1)))
    with pytest.raises(ValueError, match="exact delivery time"):
        expected_delivery_rounds([0.1] * (MAX_EXACT_SWAP_HOPS + 1), [0.5] * MAX_EXACT_SWAP_HOPS)
    assert expected_delivery_rounds([0.1, 0.1], [0.0]) == math.inf


def _simulated_rate(n: int, q: float, s: float, pairs: int, seed: int) -> tuple[float, float]:
    chain = line_chain(n, q, 1e-3, bsm_success_probability=s)
    (run,), _ = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(seed)])
    return run.intervals_n / run.intervals_sum_s, run.rate_relative_halfwidth()


def _check_against_engine(n: int, q: float, s: float, pairs: int) -> None:
    exact = 1 / expected_delivery_s([q] * n, [1e-3] * n, [s] * (n - 1))
    rate, halfwidth = _simulated_rate(n, q, s, pairs, seed=100 * n + int(100 * s))
    assert halfwidth < 0.0125  # long enough for a 2 % comparison (about 3 standard errors)
    assert rate == pytest.approx(exact, rel=0.02)


@pytest.mark.parametrize(("n", "q", "s"), [(3, 0.3, 0.6), (4, 0.5, 0.8)])
def test_matches_the_event_engine(n: int, q: float, s: float) -> None:
    """The event engine (simpy; zero-length hops so no signalling time) delivers at the exact
    rate within 2 %. Three hops at s = 0.6 was the audit's example, where the product form was
    low by about a quarter."""
    _check_against_engine(n, q, s, pairs=20_000)


@pytest.mark.slow
@pytest.mark.timeout(3600)  # six hops at s = 0.5: many failed swaps per delivered pair
@pytest.mark.parametrize("s", [0.5, 0.7, 0.85, 1.0])
@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_matches_the_event_engine_grid(n: int, s: float) -> None:
    """Two to six hops, BSM success 0.5-1: the event engine within 2 % of the exact rate."""
    _check_against_engine(n, 0.35, s, pairs=20_000)


def _line_scenario(n: int, bsm: float) -> dict[str, object]:
    return {"network": {"name": "line"},
            "defaults": {"site": {"bsm_success_probability": bsm, "memory_slots": 2}, "link": {"scheme": "two_photon"}},
            "sites": [{"name": f"Quarry {i}", "role": "user" if i in (0, n) else "repeater"} for i in range(n + 1)],
            "links": [{"ends": [f"Quarry {i}", f"Quarry {i + 1}"], "length_km": 2.0} for i in range(n)],
            "demands": [{"users": ["Quarry 0", f"Quarry {n}"]}]}


def test_budget_uses_the_exact_rate_and_says_when_it_cannot() -> None:
    """The budget's expected rate is 1 / expected_delivery_s for three hops at s = 0.6; beyond
    MAX_EXACT_SWAP_HOPS hops with uncertain swaps it gives no figure and a warning (sure swaps
    stay exact at any length)."""
    from netsim.network import budget
    from netsim.network.graph import build_graph
    from netsim.network.routing import find_route, route_hops
    from netsim.scenario import load_data

    scenario = load_data(_line_scenario(3, 0.6))
    hops = route_hops(build_graph(scenario), find_route(build_graph(scenario), "Quarry 0", "Quarry 3"))
    q = [h.physics.round_success_probability for h in hops]
    tau = [h.physics.attempt_period_s for h in hops]
    row = budget(scenario).demands[0]
    assert row["expected_rate_per_s"] == pytest.approx(1 / expected_delivery_s(q, tau, [0.6, 0.6]), rel=1e-12)
    long = budget(load_data(_line_scenario(MAX_EXACT_SWAP_HOPS + 2, 0.6)))
    assert long.demands[0]["expected_rate_per_s"] is None
    assert any("no expected rate" in w and f"exact up to {MAX_EXACT_SWAP_HOPS}" in w for w in long.warnings)
    sure = budget(load_data(_line_scenario(MAX_EXACT_SWAP_HOPS + 2, 1.0)))
    assert sure.demands[0]["expected_rate_per_s"] > 0
