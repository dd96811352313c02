"""The vectorised engine with a cut-off on multi-hop chains (netsim.engine.vector with
netsim.network.cutoff.run_cycles): against the event engine, and against the closed-form
waiting time when the cut-off cannot act."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from netsim import engine
from netsim.engine.api import chains_from_scenario, demand_row
from netsim.engine.chain import Chain, line_chain
from netsim.engine.des import DesOptions, simulate_des
from netsim.engine.metrics import ChainRun, StopRule
from netsim.engine.vector import simulate_chain_vector, vector_applicable
from netsim.network.bounds import expected_rounds
from netsim.scenario import load_data

#: Two independent runs agree when their difference is within this many combined standard errors.
Z = 4.0


def _se(ci: list[float]) -> float:
    return (ci[1] - ci[0]) / 2 / 1.96


def _agree(chain: Chain, a: ChainRun, b: ChainRun) -> None:
    """Rate, mean fidelity, discards per pair and site occupancy of two runs of ``chain`` agree."""
    ra, rb = demand_row(chain, a), demand_row(chain, b)
    for key, ci in (("rate_per_s", "rate_ci95"), ("fidelity_mean", "fidelity_ci95")):
        se = math.hypot(_se(ra[ci]), _se(rb[ci]))
        assert abs(ra[key] - rb[key]) <= Z * se, (key, ra[key], rb[key], se)
    rel = max(_se(r["rate_ci95"]) / r["rate_per_s"] for r in (ra, rb))
    # discards per delivered pair: about geometric per cycle, variance d (1 + d) (common practice)
    da, db = a.hop_discards.sum() / a.metrics.n, b.hop_discards.sum() / b.metrics.n
    se_d = math.hypot(math.sqrt(da * (1 + da) / a.metrics.n), math.sqrt(db * (1 + db) / b.metrics.n))
    assert abs(da - db) <= Z * se_d + 1e-9, (da, db, se_d)
    occ_a, occ_b = a.site_qubit_s / a.simulated_time_s, b.site_qubit_s / b.simulated_time_s
    assert np.allclose(occ_a, occ_b, rtol=2 * Z * rel, atol=1e-3), (occ_a, occ_b)


def _chain(n: int, p: float, comm: int | None, transfer_s: float = 0.0, dephasing: float = 0.0) -> Chain:
    # herald delay 0.73 periods: event times do not fall on one lattice, so no two events of the
    # engines' timelines coincide (at exactly equal times the two engines may order them differently)
    return line_chain(n, p, 1e-4, herald_s=0.73e-4, t1_s=20.0, t2_s=0.5, communication_qubits=comm,
                      memory_transfer_s=transfer_s, memory_transfer_error=0.02 if transfer_s else 0.0,
                      attempt_dephasing=dephasing, gate_error=0.01)


CASES = [  # hops, per-round success, cut-off (s), communication qubits, transfer (s), attempt dephasing
    (2, 2e-3, 0.0123, 1, 0.0, 0.0),       # tight: about one expected hop time
    (3, 2e-3, 0.0517, None, 2.1e-4, 0.0),  # memory transfer time and error
    (3, 2e-3, 0.0217, 1, 0.0, 2e-3),      # turns at one-interface repeaters, attempt dephasing
    (4, 5e-3, 0.0911, 1, 1.3e-4, 1e-3),   # loose: the cut-off seldom acts
]


@pytest.mark.parametrize(("n", "p", "cutoff_s", "comm", "transfer_s", "dephasing"), CASES)
def test_vector_engine_with_a_cut_off_follows_the_event_engine(n: int, p: float, cutoff_s: float, comm: int | None,
                                                              transfer_s: float, dephasing: float) -> None:
    """The event engine (checked against QuTiP in tests/test_engine_states.py and against the
    published experiments) and the vectorised engine run the same chain with independent streams:
    rate, mean fidelity, discards and memory occupancy agree within their intervals."""
    chain = _chain(n, p, comm, transfer_s, dephasing)
    assert vector_applicable(chain, cutoff_s, 0)
    des = simulate_des([chain], StopRule(pairs=1500), [np.random.default_rng(1)], DesOptions(cutoff_s=cutoff_s))[0][0]
    vec = simulate_chain_vector(chain, StopRule(pairs=6000), np.random.default_rng(2), cutoff_s)
    assert vec.engine == "vector" and des.engine == "des"
    assert vec.hop_discards.sum() > 0  # the cut-off acts
    _agree(chain, des, vec)


def test_a_cut_off_that_cannot_act_gives_the_closed_form_waiting_time() -> None:
    """Two hops whose herald arrives one period after the round starts, no signalling time: with
    no cut-off, or one longer than any wait that occurs, a pair is delivered when both hops hold
    one, after max(K1, K2) periods, and the next cycle starts at once (each hop's next round is
    due by then). E[max(K1, K2)] = (3 - 2p) / (p (2 - p)) rounds (Shchukin, Schmidt & van Loock,
    PRA 100, 032322 (2019))."""
    p, period = 0.05, 1e-3
    chain = line_chain(2, p, period)
    rounds = (3 - 2 * p) / (p * (2 - p))
    assert rounds == pytest.approx(expected_rounds([p, p]))
    for cutoff in (None, 10.0):
        run = simulate_chain_vector(chain, StopRule(pairs=40_000), np.random.default_rng(5), cutoff)
        rate = run.metrics.n / run.simulated_time_s
        rel = run.rate_relative_halfwidth()
        assert rate == pytest.approx(1.0 / (rounds * period), rel=2.5 * rel), cutoff
        assert run.hop_discards.sum() == 0


def _scenario(cutoff_s: float, shared: bool = False) -> dict[str, Any]:
    """An invented three-hop line (Brannock Lab - Ewle Relay - Fosk Relay - Gantry Lab), demo
    values; emission and coherence stated, the other node keys from the built-in defaults (one
    communication qubit, memory transfer time and error, attempt dephasing, photon
    indistinguishability, phase noise)."""
    names = ["Brannock Lab", "Ewle Relay", "Fosk Relay", "Gantry Lab"]
    sites = [{"name": s, "role": "user" if s.endswith("Lab") else "repeater"} for s in names]
    sites.append({"name": "Hesket Lab", "role": "user"})
    links = [{"ends": [a, b], "length_km": km} for a, b, km in zip(names, names[1:], (2.0, 2.5, 1.5))]
    links.append({"ends": ["Hesket Lab", "Ewle Relay"], "length_km": 1.0})
    demands: list[dict[str, Any]] = [{"users": ["Brannock Lab", "Gantry Lab"], "pairs": 400}]
    if shared:
        demands.append({"users": ["Hesket Lab", "Gantry Lab"], "pairs": 400})
    return {"network": {"name": "Brannock line"}, "defaults": {"site": {"emission_efficiency": 0.6, "t1_s": 10.0,
                                                                         "t2_s": 1.0}},
            "sites": sites, "links": links, "demands": demands,
            "protocol": {"cutoff_s": cutoff_s}, "encoding": {"states": "bb84"}}


def test_run_sends_a_lone_chain_with_a_cut_off_to_the_fast_path_and_says_so(tmp_path: Path) -> None:
    """engine.run: a lone three-hop demand with a cut-off runs on the vectorised engine (run.json
    names it), agrees with the event engine on the same chain, and a demand sharing its sites
    and fibres with another still runs on the event engine."""
    scenario = load_data(_scenario(1.5e-3))
    result = engine.run(scenario, pairs=400, seed=3, ensembles=False)
    row = result.demands[0]
    assert row["engine"] == "vector" and row["hops"] == 3
    result.write(tmp_path / "out")
    assert json.loads((tmp_path / "out" / "run.json").read_text())["demands"][0]["engine"] == "vector"
    chain = chains_from_scenario(scenario)[0]
    des = simulate_des([chain], StopRule(pairs=800), [np.random.default_rng(8)], DesOptions(cutoff_s=1.5e-3))[0][0]
    vec = simulate_chain_vector(chain, StopRule(pairs=3200), np.random.default_rng(9), 1.5e-3)
    _agree(chain, des, vec)
    shared = engine.run(load_data(_scenario(1.5e-3, shared=True)), pairs=50, seed=3, ensembles=False)
    assert {r["engine"] for r in shared.demands} == {"des"}


def test_same_seed_same_numbers_and_a_time_limit_is_kept() -> None:
    chain = _chain(3, 2e-3, 1, 1e-4, 1e-3)
    a = simulate_chain_vector(chain, StopRule(pairs=500), np.random.default_rng(4), 0.02)
    b = simulate_chain_vector(chain, StopRule(pairs=500), np.random.default_rng(4), 0.02)
    assert a.metrics.n == b.metrics.n == 500
    assert a.simulated_time_s == b.simulated_time_s and np.array_equal(a.hop_attempts, b.hop_attempts)
    timed = simulate_chain_vector(chain, StopRule(time_s=3.0), np.random.default_rng(4), 0.02)
    assert timed.simulated_time_s == 3.0 and timed.metrics.last_delivery_s <= 3.0 and timed.metrics.n > 0


def test_a_cut_off_shorter_than_a_pair_needs_to_become_usable_goes_to_the_event_engine() -> None:
    """No pair can ever be swapped: the fast path declines (the event engine and its guards decide)."""
    chain = _chain(2, 2e-3, None, transfer_s=5e-3)
    assert not vector_applicable(chain, 1e-3, 0)
    assert vector_applicable(chain, 1e-2, 0)
