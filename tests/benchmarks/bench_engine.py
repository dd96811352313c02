"""Speed of the event engine on a 4-link chain (5 sites) with T1/T2 memories and full states.

- ``engine_pairs_per_s``: delivered end-to-end pairs per wall second, 25 km links, including the
  full 4x4 density matrix of every pair and its fidelity, EoF and coherent information
  (target >= 50,000).
- ``loss_independence_ratio``: wall time per delivered pair at 100 km links over that at 5 km
  (target <= 1.3): the attempt count is sampled, never stepped through.
- ``speedup_vs_per_attempt``: against :func:`reference_per_attempt`, a plain simpy engine that
  makes one event per attempt round and computes each pair's state one by one with Kraus
  channels, at 50 km links (target >= 100). The two must agree statistically (rate and mean
  fidelity within 4.5 standard errors); the record carries ``statistics_match`` and the ratio is
  withheld (None) when they do not.

Link model of the chain (demo numbers): midpoint heralding, success 0.2 x eta(L/2) per round
with 0.2 dB/km and 1 dB extra loss, round period = herald delay = L / (c / 1.468) + 1 us.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from typing import Any

import numpy as np
import simpy

from netsim import qinfo
from netsim.engine import StopRule, simulate_chain_vector, simulate_des
from netsim.engine.chain import Chain, line_chain
from netsim.engine.metrics import phi_plus_fidelity

FIBRE_KM_PER_S = 299_792.458 / 1.468
PAIRS = 100_000
REFERENCE_PAIRS = 300


def bench_chain(length_km: float) -> Chain:
    """The benchmark's 4-link chain with links of ``length_km``."""
    eta_half = 10 ** (-(0.2 * length_km / 2 + 0.5) / 10)
    period = length_km / FIBRE_KM_PER_S + 1e-6
    return line_chain(4, 0.2 * eta_half, period, qinfo.werner_state(0.95), length_km=length_km,
                      t1_s=10.0, t2_s=1.0, name="bench")


def _best_time(fn: Callable[[], Any], repeats: int = 3) -> tuple[float, Any]:
    best, out = math.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def _fast(chain: Chain, pairs: int = PAIRS, seed: int = 1) -> Any:
    return simulate_chain_vector(chain, StopRule(pairs=pairs), np.random.default_rng(seed))


def engine_pairs_per_s() -> list[dict[str, Any]]:
    """Delivered pairs per wall second on the 25 km chain."""
    wall, _ = _best_time(lambda: _fast(bench_chain(25.0)))
    return [{"name": "engine_pairs_per_s", "value": PAIRS / wall, "unit": "pairs/s", "target": 50_000,
             "higher_is_better": True, "baseline": "", "ratio": None}]


def event_engine_pairs_per_s() -> list[dict[str, Any]]:
    """The simpy engine on the same chain (the path taken under contention, cut-offs or
    purification); reported beside the fast path, no target."""
    pairs = 5_000
    wall, _ = _best_time(lambda: simulate_des([bench_chain(25.0)], StopRule(pairs=pairs), [np.random.default_rng(1)]),
                         repeats=1)
    fast_wall, _ = _best_time(lambda: _fast(bench_chain(25.0)))
    rate = pairs / wall
    return [{"name": "event_engine_pairs_per_s", "value": rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "vectorised engine on the same chain",
             "ratio": rate / (PAIRS / fast_wall)}]


def loss_independence_ratio() -> list[dict[str, Any]]:
    """Wall time per pair at 100 km over 5 km links (interleaved runs, best of five each, so
    that load from other processes hits both alike)."""
    chains = {5.0: bench_chain(5.0), 100.0: bench_chain(100.0)}
    best = {5.0: math.inf, 100.0: math.inf}
    for _ in range(5):
        for length, chain in chains.items():
            wall, _ = _best_time(lambda chain=chain: _fast(chain), repeats=1)  # type: ignore[misc]
            best[length] = min(best[length], wall)
    ratio = best[100.0] / best[5.0]
    return [{"name": "loss_independence_ratio", "value": ratio, "unit": "x", "target": 1.3,
             "higher_is_better": False, "baseline": "5 km links", "ratio": ratio}]


def reference_per_attempt(chain: Chain, pairs: int, seed: int) -> tuple[float, np.ndarray]:
    """Plain reference: one simpy event per attempt round, states one pair at a time.

    Same model as the engine (path reservation per cycle, herald after ``herald_s``, next round
    one period after the successful one started, swap when a site holds both qubits, delivery
    when both users have every outcome), written the obvious way. Returns (simulated time,
    fidelities of the delivered pairs).
    """
    env, rng = simpy.Environment(), np.random.default_rng(seed)
    n, fidelities = chain.n_hops, []
    next_round = np.zeros(n)

    def hop(i: int, born: list[float], heralded: simpy.Event) -> Any:
        yield env.timeout(max(0.0, next_round[i] - env.now))
        while rng.random() >= chain.p[i]:
            yield env.timeout(chain.period_s[i])
        born[i] = env.now
        next_round[i] = env.now + chain.period_s[i]
        yield env.timeout(chain.herald_s[i])
        heralded.succeed(env.now)

    def swap(j: int, left: simpy.Event, right: simpy.Event, told: list[simpy.Event], times: list[float]) -> Any:
        yield left & right
        times[j] = env.now
        yield env.timeout(max(chain.delay_s(j, 0), chain.delay_s(j, n)))
        told[j].succeed()

    def cycles() -> Any:
        while len(fidelities) < pairs:
            born, times = [0.0] * n, [0.0] * (n + 1)
            heralds = [env.event() for _ in range(n)]
            told = [env.event() for _ in range(n + 1)]
            for i in range(n):
                env.process(hop(i, born, heralds[i]))
            for j in range(1, n):
                env.process(swap(j, heralds[j - 1], heralds[j], told, times))
            yield env.all_of(heralds + told[1:n])
            fidelities.append(_reference_state_fidelity(chain, born, times, env.now))

    env.run(until=env.process(cycles()))
    return env.now, np.array(fidelities)


def _reference_state_fidelity(chain: Chain, born: list[float], swaps: list[float], delivered: float) -> float:
    n = chain.n_hops
    state = None
    for i in range(n):
        end_left = delivered if i == 0 else swaps[i]
        end_right = delivered if i == n - 1 else swaps[i + 1]
        a, b = chain.sites[i], chain.sites[i + 1]
        rho = qinfo.memory_decoherence(end_left - born[i], a.t1_s, a.t2_s).apply(chain.link_states[i], qubit=0)
        rho = qinfo.memory_decoherence(end_right - born[i], b.t1_s, b.t2_s).apply(rho, qubit=1)
        state = rho if state is None else qinfo.entanglement_swap(state, rho, a.gate_error)
    return float(phi_plus_fidelity(state))


def speedup_vs_per_attempt() -> list[dict[str, Any]]:
    """Engine vs the per-attempt reference at 50 km links, with a statistical match check."""
    chain = bench_chain(50.0)
    ref_wall, (ref_time, ref_fid) = _best_time(lambda: reference_per_attempt(chain, REFERENCE_PAIRS, 3), repeats=1)
    fast_wall, run = _best_time(lambda: _fast(chain))
    match = _statistics_match(run, ref_time, ref_fid)
    speedup = (PAIRS / fast_wall) / (REFERENCE_PAIRS / ref_wall)
    return [{"name": "speedup_vs_per_attempt", "value": speedup if match else math.nan, "unit": "x",
             "target": 100, "higher_is_better": True, "baseline": "per-attempt simpy reference",
             "ratio": speedup if match else None, "statistics_match": match,
             "reference_pairs_per_s": REFERENCE_PAIRS / ref_wall}]


def _statistics_match(run: Any, ref_time: float, ref_fid: np.ndarray) -> bool:
    m = run.metrics
    rate, ref_rate = m.n / run.simulated_time_s, len(ref_fid) / ref_time
    cv = run.rate_relative_halfwidth() / 1.96 * math.sqrt(m.n / len(ref_fid))  # cycle CV / sqrt(n_ref)
    rate_ok = abs(rate - ref_rate) < 4.5 * math.hypot(cv * rate, run.rate_relative_halfwidth() / 1.96 * rate)
    fid, ci = m.mean_ci(m.sum_fidelity, m.sum_fidelity_sq)
    se_ref = ref_fid.std(ddof=1) / math.sqrt(len(ref_fid))
    fid_ok = abs(fid - ref_fid.mean()) < 4.5 * math.hypot(se_ref, (ci[1] - fid) / 1.96)
    return bool(rate_ok and fid_ok)


BENCHMARKS = [engine_pairs_per_s, event_engine_pairs_per_s, loss_independence_ratio, speedup_vs_per_attempt]
