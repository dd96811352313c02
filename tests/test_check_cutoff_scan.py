"""The cut-off advice of ``netsim check`` (engine.advice.best_cutoff) runs on the sampled
timeline estimate, not on simulations: its figures and its choice against simulations of the
demand alone at the same cut-offs, by the event engine (not the vectorised engine, which shares
the estimate's timeline code)."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import pytest

import numpy as np

from netsim.engine.advice import CUTOFF_FACTORS, best_cutoff
from netsim.engine.api import chains_from_scenario, demand_row
from netsim.engine.des import DesOptions, simulate_des
from netsim.engine.metrics import StopRule
from netsim.network import build_graph, find_route, route_hops
from netsim.network.estimate import cutoff_scan_point, estimate_hops
from netsim.scenario import load
from netsim.scenario.model import Scenario

ROOT = Path(__file__).resolve().parent.parent


def _simulate(scenario: Scenario, index: int, cutoff_s: float, pairs: int = 1500) -> dict[str, Any]:
    """The demand alone on the event engine at ``cutoff_s``: its run row (useful rate, fidelity)."""
    chain = chains_from_scenario(scenario)[index]
    run = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(5)], DesOptions(cutoff_s=cutoff_s))[0][0]
    return demand_row(chain, run)


@pytest.mark.parametrize("index", [0, 1])
def test_the_scan_follows_simulations_of_the_demand_alone(index: int) -> None:
    """Bundled mesh (invented sites), demands below their min_fidelity: at each scanned cut-off the
    estimate's useful rate is within 15 % (plus the simulation's own 95 % interval) of a 1500-pair
    simulation and its mean fidelity within 0.01; the cut-off the scan names gives, in simulation,
    at least 85 % of the best simulated useful rate of the scan (the useful-pair count of a
    simulation is binomial: its relative error is about that of the rate, (common practice))."""
    scenario = load(ROOT / "scenarios" / "vellmoor-mesh.toml")
    graph = build_graph(scenario)
    demand = scenario.demands[index]
    hops = route_hops(graph, find_route(graph, demand.a, demand.b, scenario.protocol.routing))
    assert len(hops) > 1
    est = estimate_hops(graph, hops)
    assert est.fidelity < demand.min_fidelity
    simulated = {}
    for factor in CUTOFF_FACTORS[1:5]:
        cutoff = factor * est.wait_s
        point = cutoff_scan_point(graph, hops, cutoff, demand.min_fidelity)
        assert point is not None
        row = _simulate(scenario, index, cutoff)
        low, high = row["useful_rate_ci95"]
        half = (high - low) / 2 if math.isfinite(high - low) else 0.0
        assert abs(point[1] - row["useful_rate_per_s"]) <= 0.15 * row["useful_rate_per_s"] + half, (cutoff, point, row["useful_rate_per_s"])
        assert abs(point[2] - row["fidelity_mean"]) < 0.01
        simulated[cutoff] = row["useful_rate_per_s"]
    best = best_cutoff(graph, hops, est.wait_s, demand.min_fidelity)
    assert best is not None
    chosen = simulated.get(best[0])
    if chosen is None:  # the scan chose an end point not simulated here: simulate it
        chosen = _simulate(scenario, index, best[0])["useful_rate_per_s"]
    assert chosen >= 0.85 * max(simulated.values())
