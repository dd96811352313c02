"""Requirements answered by a run: useful pairs, their rate and interval, and the verdicts."""

from __future__ import annotations

import copy
import dataclasses
import json
import math
from pathlib import Path

import pytest

from netsim.engine import run, simulate
from netsim.engine.chain import line_chain
from netsim.engine.metrics import StopRule
from netsim.scenario import load, load_data

CHAIN3 = Path(__file__).resolve().parent.parent / "scenarios" / "chain3.toml"


def _chain3(**demand: object) -> object:
    data = copy.deepcopy(load(CHAIN3).data)
    data["demands"][0].update(demand)
    return load_data(data, source=str(CHAIN3))


def test_a_threshold_above_every_pair_gives_no_useful_pair_and_fails() -> None:
    """No delivered pair reaches fidelity 0.999 on chain3 (its heralded single-photon pairs have
    F ~ 1 - alpha = 0.9 per hop; Cabrillo et al., PRA 59, 1025, 1999): useful rate 0, the rule
    of three bounds it by 3/t (Hanley & Lippman-Hand, JAMA 249, 1743, 1983), both verdicts false."""
    row = run(_chain3(min_fidelity=0.999, min_rate_per_s=1.0), pairs=300, ensembles=False).demands[0]
    assert row["delivered_pairs"] == 300
    assert row["useful_pairs"] == 0 and row["useful_rate_per_s"] == 0.0 and row["useful_fraction"] == 0.0
    assert row["useful_rate_ci95"] == [0.0, pytest.approx(3.0 / row["simulated_time_s"])]
    assert row["meets_fidelity"] is False and row["meets_rate"] is False


def test_a_threshold_below_every_pair_gives_the_full_rate() -> None:
    """Every pair is entangled above F = 0.5 here, so with min_fidelity 0.3 every pair is useful:
    the useful rate is the delivered rate (common practice: a threshold below all values keeps all).
    The rate requirement, 0.5 pairs/s, is one chain3 meets on its demonstrated trapped-ion
    hardware (it delivers ~0.7 pairs/s, 95 % interval ~0.67-0.82 in this run)."""
    row = run(_chain3(min_fidelity=0.3, min_rate_per_s=0.5), pairs=300, ensembles=False).demands[0]
    assert row["useful_pairs"] == row["delivered_pairs"] == 300
    assert row["useful_rate_per_s"] == pytest.approx(row["rate_per_s"], rel=1e-12)
    assert row["useful_fraction"] == 1.0
    low, high = row["useful_rate_ci95"]
    assert low < row["useful_rate_per_s"] < high
    assert row["meets_fidelity"] is True and row["meets_rate"] is True


def test_verdicts_are_null_without_a_rate_requirement_and_follow_the_requirement() -> None:
    scenario = _chain3(min_fidelity=0.3)
    result = run(scenario, pairs=200, ensembles=False)
    row = result.demands[0]
    assert row["meets_rate"] is None and row["min_rate_per_s"] is None
    just_above = row["useful_rate_per_s"] * 1.01
    row2 = run(_chain3(min_fidelity=0.3, min_rate_per_s=just_above), pairs=200, ensembles=False).demands[0]
    assert row2["meets_rate"] is False  # same seed, same rate, 1 % short
    data = json.loads(json.dumps(result.to_dict()))["demands"][0]
    for key in ("useful_rate_per_s", "useful_rate_ci95", "useful_fraction", "meets_fidelity", "meets_rate", "route"):
        assert key in data
    assert data["route"] == ["Alder Row Lab", "Brackwater Relay", "Cindermoss Campus"]


def _p_abs_difference_at_most(p: float, m: int) -> float:
    """P(|K1 - K2| <= m) for independent K ~ Geometric(p) on {1, 2, ...}: P(0) = p / (2 - p),
    P(+-j) = 2 p (1 - p)^j / (2 - p) (sum of the joint geometric law; common practice)."""
    return p / (2 - p) + sum(2 * p * (1 - p) ** j / (2 - p) for j in range(1, m + 1))


def test_the_useful_fraction_follows_the_law_of_the_waiting_difference() -> None:
    """Two hops of perfect pairs, dephasing memories (T1 = inf): a delivered pair's qubits wait
    2T|K1 - K2| + 4T in total, so F = (1 + exp(-(2T|dK| + 4T)/T2)) / 2 (phase damping; Nielsen &
    Chuang 2010, Sec. 8.3.6). A threshold between |dK| = 3 and 4 keeps the pairs with |dK| <= 3."""
    p, period, t2 = 0.1, 1e-3, 0.05
    chain = line_chain(2, p, period, t1_s=math.inf, t2_s=t2)

    def fid(dk: float) -> float:
        return (1 + math.exp(-(2 * period * dk + 4 * period) / t2)) / 2

    chain = dataclasses.replace(chain, min_fidelity=(fid(3) + fid(4)) / 2)
    n = 20_000
    result = simulate([chain], rule=StopRule(pairs=n), seed=11)[0]
    expected = _p_abs_difference_at_most(p, 3)
    sigma = math.sqrt(expected * (1 - expected) / n)
    assert result.metrics.n_useful / n == pytest.approx(expected, abs=4.5 * sigma)
    rate, (low, high) = result.metrics.useful_rate(result.simulated_time_s)
    assert low < rate < high
    assert rate == pytest.approx(result.metrics.n_useful / result.simulated_time_s)


def test_useful_rate_interval_covers_the_true_rate() -> None:
    """Coverage of the useful-rate interval: one perfect hop with success p per period T delivers
    at p / T (common practice); all pairs useful. Of 60 short runs, a 95 % interval should miss
    about 3; more than 9 misses has probability below 1e-3 (binomial)."""
    p, period = 0.2, 1e-3
    chain = dataclasses.replace(line_chain(1, p, period, herald_s=0.0), min_fidelity=0.5)
    truth = p / period
    misses = 0
    for seed in range(60):
        r = simulate([chain], rule=StopRule(pairs=200), seed=seed)[0]
        _, (low, high) = r.metrics.useful_rate(r.simulated_time_s)
        misses += not (low <= truth <= high)
    assert misses <= 9
