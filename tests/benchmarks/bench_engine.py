"""Speed of the engines on what users run. Every record says which engine it timed.

Every bundled scenario sets a cut-off, so every demand of them runs on the event engine
(``des``); that engine is what these figures time, with the physics the bundled scenarios use
(memory decay with T1/T2, cut-off, swaps, shared fibres and contention for memory slots), and the
full 4x4 state, fidelity, EoF and coherent information of every delivered pair.

Chain figures (4 links, 5 memory sites, T1 = 100 s, T2 = 10 s, cut-off 5 s):

- ``chain_event_pairs_per_s``: delivered pairs per wall second at 25 km links (no target).
- ``speedup_vs_per_attempt``: the event engine against :class:`PerAttemptDes`, the same engine
  (same cycles, swaps, cut-off, the same batched state work) except that it simulates every
  attempt round as its own event, at 50 km links. Both run as plain Python (a compiled class
  cannot be subclassed from Python), so the ratio is what event skipping buys; the record also
  carries the installed build's speed-up over the same reference. The two must agree statistically (rate and mean
  fidelity within 4.5 standard errors); the ratio is withheld (None) when they do not.
- ``loss_independence_ratio``: event-engine wall time per delivered pair when the per-round
  success probability is 150 times smaller (0.3 -> 0.002, 25 km links, as a detector-efficiency
  or emission sweep would make it), target <= 1.3; the baseline is the same ratio for the
  per-attempt reference, which grows with the attempt count. The cut-off is long enough to discard
  few pairs at either end, so both runs do the same work per delivered pair.
- ``vector_chain_pairs_per_s``: the vectorised engine on the same chain without a cut-off; ratio
  to the event engine on that chain.
- ``vector_cutoff_pairs_per_s``: the vectorised engine on a 4-link chain with a cut-off that acts
  (T2 = 1 s, cut-off 0.05 s, about one discard per delivered pair), the fast path a lone chain of
  a bundled-style scenario takes; ratio to the event engine on the same chain and cut-off, whose
  rate and mean fidelity it must match within 4.5 standard errors (else the ratio is withheld).

Metro figures (``engine.run`` on generated grids, see ``metro.py``; timed end to end as ``netsim
run`` does it: routing, budget bounds, simulation, states, figures; ensembles off). Every timed
run starts with the package's result caches empty (``metro.clear_result_caches``), as a fresh
``netsim run`` process does: a second run of the same network in one process would otherwise
reuse the budget's cut-off timeline samples and the light paths' physics.

- ``mesh_event_pairs_per_s``: 7x7 grid, 24 demands, 4 slots per site, 200 pairs per demand,
  target >= 10,000 delivered pairs per wall second (best of five runs); ratio to the event
  engine on the lone chain.
  The generator states emission, coherence, gates and fibre; the node keys it does not state
  come from the built-in defaults (demonstrated NV values: one communication qubit per site,
  0.5 ms / 3 % memory transfer, 1e-3 attempt dephasing, indistinguishability 0.8), so this
  figure already carries the node physics users run with.
- ``mesh_event_compiled_speedup``: wall time of the grid above on the plain-Python engine over
  that on the compiled one (``netsim.engine.build``; the same code, the same numbers), best of
  two each, interleaved. Not recorded where the compiled engine is not installed.
- ``mesh_event_pairs_per_s_node_physics``: the same grid with the node physics written out at
  colour-centre values of their own (one communication qubit, 0.1 ms / 1 % transfer, 1e-3
  attempt dephasing; no target); ratio to the grid above.
- ``demand_scaling_ratio``: wall time per delivered pair per hop with 100 demands over that with
  10 demands, 10x10 grid (target <= 1.5; best of five runs of each, interleaved). It also
  carries ``marginal_ratio`` (the same for each extra pair-hop, from runs at 20 pairs per
  demand) and the cost per demand in each run, ``s_per_demand_10`` and ``s_per_demand_100``.
- ``site_scaling_ratio``: the same on a 20x20 grid over a 5x5 grid, 10 demands (target <= 1.5;
  best of five runs of each, interleaved).
  Both scaling records also carry ``simulation_only_ratio``: the same ratio for the time spent in
  the simulation itself (``engine.api.simulate``), without routing and the budget's bounds.
- ``metro_peak_memory_mib``: peak resident memory of a fresh process running a 20x20 grid with
  100 demands and 1,000 pairs per demand (target < 1024 MiB); the record carries its wall time.

- ``mesh_purified_pairs_per_s``: the bundled Vellmoor mesh with one DEJMPS round per link (no
  target; see the function); ratio to the same mesh without purification.

``engine_scaling`` also writes ``results/benchmarks/engine_scaling.png`` (run time against sites
and against demands).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from metro import clear_result_caches, grid_metro, metro_scenario  # noqa: E402

from netsim import qinfo  # noqa: E402
from netsim.engine import DesOptions, StopRule, simulate_chain_vector  # noqa: E402
from netsim.engine import api as engine_api  # noqa: E402
from netsim.engine import run as engine_run  # noqa: E402
from netsim.engine.chain import Chain, line_chain  # noqa: E402
from netsim.engine.build import BUILD, plain_engine  # noqa: E402
from netsim.engine.des import _Des  # noqa: E402
from netsim.engine.metrics import ChainRun  # noqa: E402

FIBRE_KM_PER_S = 299_792.458 / 1.468
CUTOFF_S = 5.0
CHAIN_PAIRS = 3_000
REFERENCE_PAIRS = 300
FIGURE = HERE.parent.parent / "results" / "benchmarks" / "engine_scaling.png"


def bench_chain(length_km: float, p: float | None = None) -> Chain:
    """The 4-link chain: midpoint heralding, success 0.2 x eta(L/2) per round (0.2 dB/km, 1 dB
    extra), or ``p`` when given; period = herald delay = L / (c / 1.468) + 1 us; Werner 0.95 links."""
    eta_half = 10 ** (-(0.2 * length_km / 2 + 0.5) / 10)
    period = length_km / FIBRE_KM_PER_S + 1e-6
    return line_chain(4, 0.2 * eta_half if p is None else p, period, qinfo.werner_state(0.95),
                      length_km=length_km, t1_s=100.0, t2_s=10.0, name="bench")


#: the plain-Python engine (the compiled one, where installed, cannot be subclassed from Python)
PLAIN = plain_engine()


class PerAttemptDes(PLAIN._Des):  # type: ignore[name-defined,misc]
    """The event engine with event skipping turned off: one simpy event per attempt round.

    Everything else (reservations, swaps, cut-off, shared-fibre rule, the batched states) is the
    engine's own plain-Python code, so against the plain engine the comparison isolates what event
    skipping buys.
    """

    def attempt(self, lane: Any, i: int) -> None:
        hop = lane.hops[i]
        hop.attempting = True
        start = max(self.now, hop.next_round, *(self.link_free[n] for n in hop.links))
        self.at(start, self._round, lane, i, start, 1)

    def _round(self, lane: Any, i: int, t: float, k: int) -> None:
        hop = lane.hops[i]
        for link in hop.links:
            self.link_free[link] = t + hop.period
        if lane.rng.random() < hop.p:
            hop.next_round = t + hop.period
            hop.flight_born, hop.flight_k = t, k
            self.at(t + hop.ready, self.transferred, lane, i)  # (reads flight_born, flight_k)
        else:
            self.at(t + hop.period, self._round, lane, i, t + hop.period, k + 1)


def _des(chain: Chain, pairs: int, seed: int, engine: Any = _Des, cutoff_s: float = CUTOFF_S) -> ChainRun:
    rule = StopRule(pairs=pairs)
    sim = engine([chain], [np.random.default_rng(seed)], {s.name: s.memory_slots for s in chain.sites},
                 [rule], DesOptions(cutoff_s=cutoff_s))
    return sim.run()[0]


def _best_time(fn: Callable[[], Any], repeats: int = 3) -> tuple[float, Any]:
    best, out = math.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def chain_event_pairs_per_s() -> list[dict[str, Any]]:
    """Event engine on the 25 km chain with cut-off and memory decay."""
    wall, run = _best_time(lambda: _des(bench_chain(25.0), CHAIN_PAIRS, 1))
    return [{"name": "chain_event_pairs_per_s", "value": run.metrics.n / wall, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "", "ratio": None, "engine": run.engine}]


def vector_chain_pairs_per_s() -> list[dict[str, Any]]:
    """Vectorised engine on the same chain without a cut-off, beside the event engine."""
    pairs = 100_000
    chain = bench_chain(25.0)
    wall, run = _best_time(lambda: simulate_chain_vector(chain, StopRule(pairs=pairs), np.random.default_rng(1)))
    des_wall, des_run = _best_time(lambda: _des(chain, CHAIN_PAIRS, 1))
    rate, des_rate = run.metrics.n / wall, des_run.metrics.n / des_wall
    return [{"name": "vector_chain_pairs_per_s", "value": rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "event engine on the chain with a cut-off",
             "ratio": rate / des_rate, "engine": run.engine}]


def vector_cutoff_pairs_per_s() -> list[dict[str, Any]]:
    """Vectorised engine vs event engine on a lone 4-link chain with a cut-off that acts."""
    chain = line_chain(4, 0.02, 25.0 * 2 / FIBRE_KM_PER_S, herald_s=25.0 / FIBRE_KM_PER_S, length_km=25.0,
                       t1_s=10.0, t2_s=1.0, name="cutoff-chain")
    cutoff = 0.05
    wall, run = _best_time(lambda: simulate_chain_vector(chain, StopRule(pairs=20_000), np.random.default_rng(1),
                                                         cutoff))
    des_wall, des_run = _best_time(lambda: _des(chain, CHAIN_PAIRS, 1, cutoff_s=cutoff))
    match = _statistics_match(run, des_run)
    rate, des_rate = run.metrics.n / wall, des_run.metrics.n / des_wall
    return [{"name": "vector_cutoff_pairs_per_s", "value": rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "event engine on the same chain and cut-off",
             "ratio": rate / des_rate if match else None, "statistics_match": match, "engine": run.engine,
             "event_pairs_per_s": des_rate, "discards_per_pair": float(run.hop_discards.sum() / run.metrics.n)}]


def speedup_vs_per_attempt() -> list[dict[str, Any]]:
    """Event engine vs the per-attempt event engine at 50 km links, with a statistical match check."""
    chain = bench_chain(50.0)
    ref_wall, ref = _best_time(lambda: _des(chain, REFERENCE_PAIRS, 3, PerAttemptDes), repeats=1)
    wall, run = _best_time(lambda: _des(chain, CHAIN_PAIRS, 1, PLAIN._Des))  # the same build as the reference
    compiled_wall, compiled = _best_time(lambda: _des(chain, CHAIN_PAIRS, 1))
    match = _statistics_match(run, ref)
    speedup = (run.metrics.n / wall) / (ref.metrics.n / ref_wall)
    return [{"name": "speedup_vs_per_attempt", "value": speedup if match else math.nan, "unit": "x",
             "target": None, "higher_is_better": True, "baseline": "per-attempt event engine (both plain Python)",
             "ratio": speedup if match else None, "statistics_match": match, "engine": run.engine,
             f"{BUILD}_build_speedup": (compiled.metrics.n / compiled_wall) / (ref.metrics.n / ref_wall),
             "reference_pairs_per_s": ref.metrics.n / ref_wall,
             "attempts_per_pair": float(run.hop_attempts.sum() / run.metrics.n)}]


def _se(ci: list[float]) -> float:
    return (ci[1] - ci[0]) / 2 / 1.96


def _statistics_match(run: ChainRun, ref: ChainRun) -> bool:
    def rate_se(r: ChainRun) -> tuple[float, float]:
        rate = r.metrics.n / r.simulated_time_s
        return rate, rate * r.rate_relative_halfwidth() / 1.96

    (a, sa), (b, sb) = rate_se(run), rate_se(ref)
    fa, ca = run.metrics.mean_ci(run.metrics.sum_fidelity, run.metrics.sum_fidelity_sq)
    fb, cb = ref.metrics.mean_ci(ref.metrics.sum_fidelity, ref.metrics.sum_fidelity_sq)
    return bool(abs(a - b) < 4.5 * math.hypot(sa, sb) and abs(fa - fb) < 4.5 * math.hypot(_se(ca), _se(cb)))


def loss_independence_ratio() -> list[dict[str, Any]]:
    """Wall time per pair at per-round success 0.002 over 0.3 (interleaved, best of three each)."""
    high, low = bench_chain(25.0, p=0.3), bench_chain(25.0, p=0.002)
    best = {"high": math.inf, "low": math.inf, "ref_high": math.inf, "ref_low": math.inf}
    discards = 0.0
    for _ in range(3):
        for key, chain in (("high", high), ("low", low)):
            wall, run = _best_time(lambda chain=chain: _des(chain, 1_000, 2), repeats=1)  # type: ignore[misc]
            best[key] = min(best[key], wall / run.metrics.n)
            discards = max(discards, float(run.hop_discards.sum() / run.hop_successes.sum()))
    for key, chain in (("ref_high", high), ("ref_low", low)):
        wall, run = _best_time(lambda chain=chain: _des(chain, 100, 2, PerAttemptDes), repeats=1)  # type: ignore[misc]
        best[key] = wall / run.metrics.n
    ratio, ref_ratio = best["low"] / best["high"], best["ref_low"] / best["ref_high"]
    return [{"name": "loss_independence_ratio", "value": ratio, "unit": "x", "target": 1.3,
             "higher_is_better": False, "baseline": "per-attempt event engine's ratio", "ratio": ratio / ref_ratio,
             "success_probability_range": 150.0, "per_attempt_ratio": ref_ratio, "engine": "des",
             "largest_discard_fraction": discards}]


_SIMULATE_S: list[float] = []


def _timed_simulate(*args: Any, **kwargs: Any) -> Any:
    start = time.perf_counter()
    try:
        return _API_SIMULATE(*args, **kwargs)
    finally:
        _SIMULATE_S.append(time.perf_counter() - start)


_API_SIMULATE = engine_api.simulate
engine_api.simulate = _timed_simulate  # type: ignore[assignment]  # times the simulation inside run()


def _metro_run(rows: int, cols: int, demands: int, slots: int = 4, pairs: int = 200,
               seed: int = 1) -> tuple[float, int, int, str, float]:
    """(wall s, delivered pairs, delivered pair-hops, engines, of which wall s in the simulation
    itself) of ``engine.run`` on a grid; the rest is routing, budget bounds and figures."""
    scenario = metro_scenario(grid_metro(rows, cols, demands, slots, seed=seed))
    _SIMULATE_S.clear()
    clear_result_caches()  # every timed run computes what a fresh process would
    start = time.perf_counter()
    # the large grids are above the default limit on link pairs on purpose (as --max-link-pairs)
    result = engine_run(scenario, pairs=pairs, seed=seed, ensembles=False, max_link_pairs=1e12)
    wall = time.perf_counter() - start
    pairs_done = sum(int(d["delivered_pairs"]) for d in result.demands)
    pair_hops = sum(int(d["delivered_pairs"]) * int(d["hops"]) for d in result.demands)
    engines = ",".join(sorted({str(d["engine"]) for d in result.demands}))
    return wall, pairs_done, pair_hops, engines, sum(_SIMULATE_S)


def mesh_event_pairs_per_s() -> list[dict[str, Any]]:
    """7x7 grid, 24 demands, 4 slots, 200 pairs each, end to end (best of five: this shared
    machine's speed drifts by up to 1.7x between runs; two whole benchmark runs 20 minutes apart
    on one commit gave 12,630 and 9,008 pairs/s, and a chain figure of the same runs moved 17 %)."""
    _metro_run(2, 2, 2, pairs=10)  # imports warm (the result caches are emptied before every timed run)
    best, pairs, engines, sim, cpu = math.inf, 0, "", math.inf, math.inf
    for _ in range(5):
        cpu_start = time.process_time()
        wall, pairs, _, engines, sim_s = _metro_run(7, 7, 24)
        best, sim, cpu = min(best, wall), min(sim, sim_s), min(cpu, time.process_time() - cpu_start)
    chain_wall, chain = _best_time(lambda: _des(bench_chain(25.0), CHAIN_PAIRS, 1), repeats=1)
    rate = pairs / best
    return [{"name": "mesh_event_pairs_per_s", "value": rate, "unit": "pairs/s", "target": 10_000,
             "higher_is_better": True, "baseline": "event engine on the lone 4-link chain",
             "ratio": rate / (chain.metrics.n / chain_wall), "engine": engines, "wall_s": best,
             "simulation_wall_s": sim, "simulation_pairs_per_s": pairs / sim, "delivered_pairs": pairs,
             "cpu_s": cpu, "pairs_per_cpu_s": pairs / cpu}]  # CPU time shows what a loaded machine hides


def mesh_event_compiled_speedup() -> list[dict[str, Any]]:
    """The 7x7 / 24-demand grid: plain-Python engine wall time over compiled engine wall time."""
    if BUILD != "compiled":
        print("mesh_event_compiled_speedup: the compiled engine is not installed; nothing to compare",
              file=sys.stderr)
        return []
    _metro_run(2, 2, 2, pairs=10)
    compiled_simulate = engine_api.simulate_des
    best = {"compiled": math.inf, "plain": math.inf}
    pairs = {}
    try:
        for _ in range(2):
            for build, simulate in (("compiled", compiled_simulate), ("plain", PLAIN.simulate_des)):
                engine_api.simulate_des = simulate  # type: ignore[attr-defined]
                wall, pairs[build], _, _, _ = _metro_run(7, 7, 24)
                best[build] = min(best[build], wall)
    finally:
        engine_api.simulate_des = compiled_simulate  # type: ignore[attr-defined]
    assert pairs["compiled"] == pairs["plain"]  # the same seeds give the same run
    return [{"name": "mesh_event_compiled_speedup", "value": best["plain"] / best["compiled"], "unit": "x",
             "target": None, "higher_is_better": True, "baseline": "the same engine run as plain Python",
             "ratio": best["plain"] / best["compiled"], "engine": "des", "compiled_wall_s": best["compiled"],
             "plain_wall_s": best["plain"], "plain_pairs_per_s": pairs["plain"] / best["plain"]}]


#: Colour-centre node physics for the full-physics variant: one optical interface (the electron
#: spin) per site, transfer to a nuclear-spin memory of ~0.1 ms with 1 % error, and 1e-3
#: dephasing of stored qubits per attempt (Kalb et al., Nat. Commun. 9, 1089 (2018), memory).
NODE_PHYSICS = {"communication_qubits": 1, "memory_transfer_s": 1e-4, "memory_transfer_error": 0.01,
                "attempt_dephasing": 1e-3}


def mesh_event_pairs_per_s_node_physics() -> list[dict[str, Any]]:
    """The 7x7 / 24-demand / 4-slot grid with communication qubits, memory transfer and attempt
    dephasing written out at every site (no target; ratio to the grid on the built-in node
    defaults, which carry the same mechanisms at demonstrated NV values)."""
    scenario = metro_scenario(grid_metro(7, 7, 24, 4, seed=1, physics=NODE_PHYSICS))
    clear_result_caches()
    start = time.perf_counter()
    result = engine_run(scenario, pairs=200, seed=1, ensembles=False)
    wall = time.perf_counter() - start
    pairs = sum(int(d["delivered_pairs"]) for d in result.demands)
    plain_wall, plain_pairs, _, _, _ = _metro_run(7, 7, 24)
    rate = pairs / wall
    return [{"name": "mesh_event_pairs_per_s_node_physics", "value": rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "the same grid on the built-in node defaults",
             "ratio": rate / (plain_pairs / plain_wall), "engine": ",".join(sorted({str(d["engine"]) for d in result.demands})),
             "wall_s": wall, "delivered_pairs": pairs}]


def _per_pair_hop(rows: int, cols: int, demands: int, pairs: int = 200) -> tuple[float, str, float]:
    """(wall s per delivered pair-hop of the whole run, engines, the same for the simulation alone)."""
    wall, _, pair_hops, engines, sim = _metro_run(rows, cols, demands, pairs=pairs)
    return wall / pair_hops, engines, sim / pair_hops


def demand_scaling_ratio() -> list[dict[str, Any]]:
    """Time per delivered pair per hop, 100 over 10 demands on a 10x10 grid (best of five, the
    two interleaved: single runs of each gave 1.09 to 1.74 on one commit on this shared machine,
    best of three 1.22 to 1.68 on another).

    The record also splits each run into a cost per demand and a cost per pair-hop, from the
    same grids at 20 pairs per demand (best of three): ``marginal_ratio`` is the ratio of the
    costs per extra pair-hop. The 10-demand runs deliver more pairs per demand (every demand runs
    until the slowest has its 200), so what each demand costs once (routing, the budget columns,
    the final flush) weighs less per pair-hop there; the split shows how much of the figure that
    is. It is a difference of noisy times: read it across runs.
    """
    best: dict[tuple[int, int], tuple[float, float, int]] = {}
    engines = ""
    for round_ in range(5):
        for demands in (10, 100):
            for pairs in ((200, 20) if round_ < 3 else (200,)):
                wall, _, pair_hops, engines, sim = _metro_run(10, 10, demands, pairs=pairs)
                old = best.get((demands, pairs), (math.inf, math.inf, 0))
                best[(demands, pairs)] = (min(old[0], wall), min(old[1], sim), pair_hops)
    few, many = (best[(d, 200)][0] / best[(d, 200)][2] for d in (10, 100))
    few_sim, many_sim = (best[(d, 200)][1] / best[(d, 200)][2] for d in (10, 100))
    split = {}
    for d in (10, 100):
        (w2, _, h2), (w1, _, h1) = best[(d, 200)], best[(d, 20)]
        marginal = (w2 - w1) / (h2 - h1)
        split[d] = (marginal, (w1 - marginal * h1) / d)
    return [{"name": "demand_scaling_ratio", "value": many / few, "unit": "x", "target": 1.5,
             "higher_is_better": False, "baseline": "10 demands", "ratio": many / few, "engine": engines,
             "s_per_pair_hop_10": few, "s_per_pair_hop_100": many, "simulation_only_ratio": many_sim / few_sim,
             "pair_hops_per_demand_10": best[(10, 200)][2] / 10, "pair_hops_per_demand_100": best[(100, 200)][2] / 100,
             "marginal_ratio": split[100][0] / split[10][0], "s_per_demand_10": split[10][1],
             "s_per_demand_100": split[100][1]}]


def site_scaling_ratio() -> list[dict[str, Any]]:
    """Time per delivered pair per hop, 20x20 over 5x5 grid, 10 demands each (best of five,
    the two sizes interleaved: on a shared machine one run of each swings the ratio by +-0.3)."""
    small, large, small_sim, large_sim, engines = math.inf, math.inf, math.inf, math.inf, ""
    for _ in range(5):
        s, engines, s_sim = _per_pair_hop(5, 5, 10)
        g, _, g_sim = _per_pair_hop(20, 20, 10)
        small, small_sim, large, large_sim = min(small, s), min(small_sim, s_sim), min(large, g), min(large_sim, g_sim)
    return [{"name": "site_scaling_ratio", "value": large / small, "unit": "x", "target": 1.5,
             "higher_is_better": False, "baseline": "5x5 grid", "ratio": large / small, "engine": engines,
             "s_per_pair_hop_5x5": small, "s_per_pair_hop_20x20": large,
             "simulation_only_ratio": large_sim / small_sim}]


_PEAK_SCRIPT = """
import json, resource, sys, time
sys.path.insert(0, {here!r})
from metro import grid_metro, metro_scenario
from netsim.engine import run
scenario = metro_scenario(grid_metro(20, 20, 100, 4, seed=1))
start = time.perf_counter()
result = run(scenario, pairs=1000, seed=1, ensembles=False, max_link_pairs=1e12)  # a large run, on purpose
wall = time.perf_counter() - start
peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({{"peak_mib": peak_kib / 1024, "wall_s": wall,
                  "pairs": sum(d["delivered_pairs"] for d in result.demands)}}))
"""


def metro_peak_memory_mib() -> list[dict[str, Any]]:
    """Peak resident memory of a fresh process: 20x20 grid, 100 demands, 1,000 pairs each."""
    done = subprocess.run([sys.executable, "-c", _PEAK_SCRIPT.format(here=str(HERE))], capture_output=True,
                          text=True, check=True, cwd=HERE.parent.parent)
    out = json.loads(done.stdout.strip().splitlines()[-1])
    return [{"name": "metro_peak_memory_mib", "value": out["peak_mib"], "unit": "MiB", "target": 1024,
             "higher_is_better": False, "baseline": "", "ratio": None, "engine": "des", "wall_s": out["wall_s"],
             "delivered_pairs": out["pairs"]}]


def engine_scaling() -> list[dict[str, Any]]:
    """Run time against sites (10 demands) and demands (10x10 grid); writes the figure."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    sides = [5, 10, 15, 20]
    by_sites = [_metro_run(n, n, 10)[0] for n in sides]
    counts = [10, 30, 60, 100]
    by_demands = [_metro_run(10, 10, d)[0] for d in counts]
    fig, (left, right) = plt.subplots(1, 2, figsize=(8, 3.2))
    left.plot([2 * n * n for n in sides], by_sites, "o-")
    left.set_xlabel("memory sites (grid of exchanges + users)")
    left.set_ylabel("wall time (s), 200 pairs per demand")
    left.set_title("10 demands")
    right.plot(counts, by_demands, "o-")
    right.set_xlabel("demands")
    right.set_title("10x10 grid")
    fig.suptitle(f"netsim event engine ({BUILD} build): run time (netsim.engine.run, ensembles off)")
    fig.tight_layout()
    FIGURE.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(FIGURE, dpi=100)
    plt.close(fig)
    return [{"name": "engine_scaling_figure_points", "value": len(sides) + len(counts), "unit": "runs",
             "target": None, "higher_is_better": True, "baseline": "", "ratio": None, "engine": "des",
             "figure": str(FIGURE.relative_to(HERE.parent.parent)),
             "wall_s_by_grid_side": dict(zip(map(str, sides), by_sites)),
             "wall_s_by_demands": dict(zip(map(str, counts), by_demands))}]


def mesh_purified_pairs_per_s() -> list[dict[str, Any]]:
    """The bundled Vellmoor mesh with one DEJMPS round on every link (12 slots per site, Bell
    measurements succeeding with 0.9), 2 pairs per demand, end to end; no target. Each
    purification step brings both stored pairs up to date (memory decay and the attempts their
    sites started meanwhile), so this times the engine's per-step state work and attempt log.
    ``baseline``: the same mesh without purification, same settings; ``ratio``: this over that."""
    import dataclasses

    from netsim.scenario import load

    plain = load(HERE.parent.parent / "scenarios" / "vellmoor-mesh.toml")
    plain = dataclasses.replace(plain, sites=[dataclasses.replace(s, memory_slots=max(s.memory_slots, 12),
                                                                  bsm_success_probability=0.9) for s in plain.sites])
    purified = dataclasses.replace(plain, protocol=dataclasses.replace(plain.protocol, purification="dejmps",
                                                                       purification_rounds=1))
    rates = []
    for scenario in (purified, plain):
        clear_result_caches()
        start = time.perf_counter()
        result = engine_run(scenario, pairs=2, seed=7, ensembles=False)
        wall = time.perf_counter() - start
        rates.append(sum(int(d["delivered_pairs"]) for d in result.demands) / wall)
    return [{"name": "mesh_purified_pairs_per_s", "value": rates[0], "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "the same mesh without purification", "ratio": rates[0] / rates[1],
             "engine": "des"}]


BENCHMARKS = [chain_event_pairs_per_s, vector_chain_pairs_per_s, vector_cutoff_pairs_per_s, speedup_vs_per_attempt, loss_independence_ratio,
              mesh_event_pairs_per_s, mesh_event_compiled_speedup, mesh_event_pairs_per_s_node_physics, demand_scaling_ratio, site_scaling_ratio, metro_peak_memory_mib,
              mesh_purified_pairs_per_s, engine_scaling]
