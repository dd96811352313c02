"""Speed of the quantum-information core: entanglement of formation, entropy, Holevo capacity,
swapping and memory decoherence.

Each figure is the best of three timed passes over 10^5 states (one core), with the ratio
against a plain reference measured in the same run: a per-state Python loop of the textbook
formula (for EoF and entropy) or the general path (for the X-state fast path).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

import numpy as np
import scipy.linalg

from netsim import qinfo
from netsim.qinfo import capacity
from netsim.qinfo.entanglement import concurrence_general
from netsim.qinfo.states import random_density_matrices, random_xstates

N_STATES = 100_000
N_REFERENCE = 2_000
_YY = np.kron([[0, -1j], [1j, 0]], [[0, -1j], [1j, 0]])


def _best_time(fn: Callable[[], Any], repeats: int = 3) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def _reference_eof(rho: np.ndarray) -> float:
    """Textbook Wootters, one state at a time: sqrtm, eigenvalues, binary entropy."""
    root = scipy.linalg.sqrtm(rho)
    lam = np.sqrt(np.clip(np.sort(np.linalg.eigvals(root @ _YY @ rho.conj() @ _YY @ root).real)[::-1], 0, None))
    c = max(0.0, lam[0] - lam[1] - lam[2] - lam[3])
    x = (1 + np.sqrt(1 - c * c)) / 2
    return 0.0 if x >= 1 else float(-x * np.log2(x) - (1 - x) * np.log2(1 - x))


def eof_general() -> list[dict[str, Any]]:
    """Entanglement of formation of 10^5 random full-rank two-qubit states (no X structure)."""
    rho = random_density_matrices(N_STATES, 4, seed=1)
    rate = N_STATES / _best_time(lambda: qinfo.entanglement_of_formation(rho))
    sub = rho[:N_REFERENCE]
    ref_rate = N_REFERENCE / _best_time(lambda: [_reference_eof(r) for r in sub], repeats=1)
    return [{"name": "eof_general_states_per_s", "value": rate, "unit": "states/s", "target": 200_000.0,
             "higher_is_better": True, "baseline": "per-state sqrtm Wootters loop", "ratio": rate / ref_rate}]


def eof_xstate() -> list[dict[str, Any]]:
    """Entanglement of formation of 10^5 X-shaped states (closed-form path, detected per state)."""
    rho = random_xstates(N_STATES, seed=2)
    rate = N_STATES / _best_time(lambda: qinfo.entanglement_of_formation(rho))
    general_rate = N_STATES / _best_time(lambda: concurrence_general(rho), repeats=1)
    return [{"name": "eof_xstate_states_per_s", "value": rate, "unit": "states/s", "target": 2_000_000.0,
             "higher_is_better": True, "baseline": "general Wootters path on the same states",
             "ratio": rate / general_rate}]


def entropy() -> list[dict[str, Any]]:
    """Von Neumann entropy of 10^5 random two-qubit states, and of 10^5 X-shaped ones."""
    rho = random_density_matrices(N_STATES, 4, seed=3)
    rate = N_STATES / _best_time(lambda: qinfo.von_neumann_entropy(rho))
    sub = rho[:N_REFERENCE]

    def loop() -> None:
        for r in sub:
            lam = scipy.linalg.eigvalsh(r)
            lam = lam[lam > 0]
            float(-(lam * np.log2(lam)).sum())

    ref_rate = N_REFERENCE / _best_time(loop, repeats=1)
    xs = random_xstates(N_STATES, seed=4)
    x_rate = N_STATES / _best_time(lambda: qinfo.von_neumann_entropy(xs))
    return [{"name": "entropy_states_per_s", "value": rate, "unit": "states/s", "target": None,
             "higher_is_better": True, "baseline": "per-state scipy eigvalsh loop", "ratio": rate / ref_rate},
            {"name": "entropy_xstate_states_per_s", "value": x_rate, "unit": "states/s", "target": None,
             "higher_is_better": True, "baseline": "general entropy on random states", "ratio": x_rate / rate}]


def holevo_capacity_time() -> list[dict[str, Any]]:
    """Seconds per uncached Holevo capacity of a damping-then-depolarizing span channel."""
    channels = [qinfo.compose(qinfo.amplitude_damping(1 - eta), qinfo.depolarizing(0.02))
                for eta in np.linspace(0.05, 0.95, 10)]
    capacity._capacity_cached.cache_clear()
    start = time.perf_counter()
    for ch in channels:
        qinfo.holevo_capacity(ch)
    seconds = (time.perf_counter() - start) / len(channels)
    return [{"name": "holevo_capacity_s_per_call", "value": seconds, "unit": "s", "target": 0.1,
             "higher_is_better": False, "baseline": "", "ratio": None}]


def pair_operations() -> list[dict[str, Any]]:
    """Entanglement swapping and memory decoherence of 10^5 random pairs (engine inner loops)."""
    a = random_density_matrices(N_STATES, 4, seed=5)
    b = random_density_matrices(N_STATES, 4, seed=6)
    swap_rate = N_STATES / _best_time(lambda: qinfo.entanglement_swap(a, b, bsm_depolarizing=0.01))
    times = np.linspace(0.0, 1.0, N_STATES)
    decohere_rate = N_STATES / _best_time(lambda: qinfo.decohere(a, times, 2.0, 1.0, qubit=1))
    return [{"name": "swap_pairs_per_s", "value": swap_rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "", "ratio": None},
            {"name": "decohere_pairs_per_s", "value": decohere_rate, "unit": "pairs/s", "target": None,
             "higher_is_better": True, "baseline": "", "ratio": None}]


BENCHMARKS = [eof_general, eof_xstate, entropy, holevo_capacity_time, pair_operations]
