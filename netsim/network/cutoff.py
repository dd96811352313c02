"""Sampled timeline of a lone chain under swap-asap with a cut-off (for the planning estimate).

With a cut-off the cycle time has no closed form beyond small cases (Kamin, Shchukin, Schmidt &
van Loock, PRR 5, 023086 (2023) derive generating functions for the waiting time with a cut-off;
Brand, Coopmans & Elkouss, IEEE JSAC 38, 619 (2020) compute waiting time and fidelity of
swap-asap with cut-offs by iterating probability distributions, both (memory)). This module
does not compute the distribution: it SAMPLES the timeline -- a seeded, vectorised numpy run of
many independent end-to-end cycles, one array row per cycle -- and returns each delivered
cycle's storage times. The states then follow in closed form from those times
(:func:`netsim.network.estimate.estimate_hops`: the delivered state is multilinear in the hop
states, each hop state linear in its memory channel, so the mean delivered state is the mean
over the sampled cycles of the swapped, decohered hop states). A fixed seed makes every call
with the same inputs return the same figures.

The rules sampled (those of the event engine for one demand alone, swap-asap, path reservation)
--------------------------------------------------------------------------------------------
- A cycle starts with every hop needing a pair. A hop that needs a pair requests the optical
  interfaces of its two sites; at an inner site with a single communication qubit the two hops
  take turns: a request is granted once neither neighbour sharing such a site is attempting,
  earlier requests first, and a request that fits is granted even when an earlier one waits.
- An attempting hop i succeeds after K ~ Geometric(q_i) rounds of period T_i: its pair is valid
  from b = start + (K - 1) T_i and usable (heralded and moved to memory) at R = b + h_i + tau_i.
- Held pairs of neighbouring hops are swapped at once (swap-asap); a run of joined pairs that
  does not yet span the chain is discarded at min over its pairs of b + cutoff, and all of its
  hops request again (the inner ones first, then its two end hops, as the engine frees slots).
- A swap at site j fails with probability 1 - p_j; both segments are then lost and their hops
  request again at once (the engine frees the far ends when the failure message arrives; the
  message time is left out here).
- The pair is delivered at t_D = max(R_0, R_{n-1}, max_j (s_j + d_j)) (s_j the last swap time at
  site j, d_j its signalling time to the farther user); the next cycle starts then. The carry of
  at most one attempt period from one cycle to the next is left out.

Storage times of the delivered pairs: hop i's left qubit from b_i to s_i (t_D at the first
user), its right qubit from b_i to s_{i+1} (t_D at the last user).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = ["CYCLES", "SEED", "CycleSample", "sample_cycles"]

#: Cycles sampled per estimate: the standard error of a mean fidelity is about 0.1 / sqrt(N).
CYCLES = 1200
#: Fixed seed: the estimate is deterministic.
SEED = 20230523

_WAIT, _TRY, _HELD = 0, 1, 2
#: Events sampled at most; cycles unfinished by then count as no delivery.
_STEPS = 100_000


@dataclass(frozen=True)
class CycleSample:
    """Sampled cycles of a lone chain with a cut-off (module docstring).

    ``delivered_s`` (N,) is each cycle's duration; ``store_left_s`` and ``store_right_s`` (N, n)
    the storage times of the delivered pairs' qubits; ``discards`` (N,) the runs discarded by
    the cut-off in each cycle; ``attempts_left`` and ``attempts_right`` (N, n) the attempt rounds
    the neighbouring hop starts at the same site while each of those qubits waits there (the
    only attempts at that site in a lone chain: while hop i's pair waits unswapped at a site, its
    neighbour there holds no pair, so they all belong to the neighbour's last sequence).
    """

    delivered_s: NDArray[np.float64]
    store_left_s: NDArray[np.float64]
    store_right_s: NDArray[np.float64]
    discards: NDArray[np.float64]
    attempts_left: NDArray[np.float64]
    attempts_right: NDArray[np.float64]


def sample_cycles(q: tuple[float, ...], period_s: tuple[float, ...], ready_s: tuple[float, ...],
                  tell_s: tuple[float, ...], cutoff_s: float, shared: tuple[bool, ...],
                  swap_p: tuple[float, ...], cycles: int = CYCLES, seed: int = SEED) -> CycleSample | None:
    """Sample ``cycles`` cycles of the chain (module docstring); None when no pair can be delivered.

    Per hop: ``q`` success probability per round, ``period_s``, ``ready_s`` (herald delay plus
    memory transfer time). Per inner site (n - 1 values): ``tell_s`` signalling time to the
    farther user, ``shared`` whether it has a single communication qubit, ``swap_p`` the Bell
    measurement success. Cached: the timeline does not depend on the memories' coherence.
    """
    return _sample(tuple(map(float, q)), tuple(map(float, period_s)), tuple(map(float, ready_s)),
                   tuple(map(float, tell_s)), float(cutoff_s), tuple(map(bool, shared)),
                   tuple(map(float, swap_p)), int(cycles), int(seed))


@functools.lru_cache(maxsize=256)
def _sample(q: tuple[float, ...], period: tuple[float, ...], ready: tuple[float, ...], tell: tuple[float, ...],
            cutoff: float, shared: tuple[bool, ...], swap_p: tuple[float, ...], cycles: int,
            seed: int) -> CycleSample | None:
    n = len(q)
    if n < 2 or any(r >= cutoff for r in ready) or any(p <= 0 for p in q) or any(p <= 0 for p in swap_p):
        return None  # one hop: the cut-off never acts (callers use the closed form); else no delivery
    if math.prod(swap_p) * _STEPS < 10.0:
        # a delivery needs every swap to succeed in one cycle, 1 / prod(p) tries on average: far
        # beyond the steps below, no cycle would finish (swap success 1e-308 ran for minutes)
        return None
    rng = np.random.default_rng(seed)
    qa, ta, ra = np.array(q), np.array(period), np.array(ready)
    tell_a = np.array(tell)
    # blocks[i]: neighbours of hop i it must not attempt beside (a shared inner site between them)
    left_shared = np.array([i > 0 and shared[i - 1] for i in range(n)])
    right_shared = np.array([i < n - 1 and shared[i] for i in range(n)])
    sure = all(p >= 1.0 for p in swap_p)
    swap_pa = np.array((1.0,) + swap_p + (1.0,))

    out_t = np.empty(cycles)
    out_left = np.empty((cycles, n))
    out_right = np.empty((cycles, n))
    out_disc = np.empty(cycles)
    out_att_left = np.zeros((cycles, n))
    out_att_right = np.zeros((cycles, n))

    ids = np.arange(cycles)
    m = cycles
    now = np.zeros(m)
    mode = np.zeros((m, n), dtype=np.int8)
    born = np.zeros((m, n))
    rdy = np.full((m, n), np.inf)
    first = np.zeros((m, n))
    rounds = np.ones((m, n))
    prio = np.tile(np.arange(n, dtype=float), (m, 1))
    swap_t = np.zeros((m, n + 1))
    disc = np.zeros(m)
    counter = float(n)
    cols = np.arange(n)
    for _step in range(_STEPS):
        if m == 0:
            break
        rows = np.arange(m)
        # 1. grant waiting requests in request order
        pending = mode == _WAIT
        while pending.any():
            key = np.where(pending, prio, np.inf)
            i = key.argmin(axis=1)
            has = np.isfinite(key[rows, i])
            lb = left_shared[i] & (mode[rows, np.maximum(i - 1, 0)] == _TRY)
            rb = right_shared[i] & (mode[rows, np.minimum(i + 1, n - 1)] == _TRY)
            go = has & ~lb & ~rb
            if go.any():
                r, h = rows[go], i[go]
                k = rng.geometric(qa[h])
                first[r, h], rounds[r, h] = now[r], k
                born[r, h] = now[r] + (k - 1) * ta[h]
                rdy[r, h] = born[r, h] + ra[h]
                mode[r, h] = _TRY
            pending[rows[has], i[has]] = False
        # 2. the next event: a hop's pair becomes usable, or a run's cut-off
        t_ready = np.where(mode == _TRY, rdy, np.inf)
        hop_r = t_ready.argmin(axis=1)
        t_r = t_ready[rows, hop_r]
        held = mode == _HELD
        dl = np.where(held, born + cutoff, np.inf)
        run_dl = dl.copy()
        for j in range(1, n):  # min over the run to the left ...
            joined = held[:, j] & held[:, j - 1]
            run_dl[:, j] = np.where(joined, np.minimum(run_dl[:, j], run_dl[:, j - 1]), run_dl[:, j])
        for j in range(n - 2, -1, -1):  # ... and to the right
            joined = held[:, j] & held[:, j + 1]
            run_dl[:, j] = np.where(joined, np.minimum(run_dl[:, j], run_dl[:, j + 1]), run_dl[:, j])
        hop_d = run_dl.argmin(axis=1)
        t_d = run_dl[rows, hop_d]
        is_ready = t_r <= t_d
        now = np.maximum(now, np.where(is_ready, t_r, t_d))
        lost = np.zeros((m, n), dtype=bool)
        # 3a. a pair becomes usable: swap with held neighbours (left first, as the engine does)
        r, h = rows[is_ready], hop_r[is_ready]
        mode[r, h] = _HELD
        for side in (0, 1):
            nb = h - 1 if side == 0 else h + 1
            site = h if side == 0 else h + 1
            ok = (nb >= 0) & (nb < n)
            ok[ok] = mode[r[ok], nb[ok]] == _HELD
            ok &= ~lost[r, h]
            rr, ss = r[ok], site[ok]
            swap_t[rr, ss] = now[rr]
            if not sure:
                fail = rng.random(len(rr)) >= swap_pa[ss]
                if fail.any():
                    rf, hf = rr[fail], h[ok][fail]
                    both = mode[rf] == _HELD
                    if side == 0:  # the left swap fails before the right one is made
                        both &= cols[None, :] <= hf[:, None]
                    lost[rf] |= _run_mask(both, hf, n)
        # 3b. a run reaches its cut-off: its hops request again
        cut = ~is_ready
        if cut.any():
            rc = rows[cut]
            lost[rc] |= _run_mask(held[rc], hop_d[cut], n)
            disc[rc] += 1
        if lost.any():
            lo = np.where(lost, cols, n).min(axis=1)
            hi = np.where(lost, cols, -1).max(axis=1)
            inner = lost & (cols > lo[:, None]) & (cols < hi[:, None])
            rank = np.where(inner, cols, np.where(cols == lo[:, None], n, n + 1))
            prio = np.where(lost, counter + rank, prio)
            counter += n + 2
            mode[lost] = _WAIT
            rdy[lost] = np.inf
        # 4. delivered cycles leave the sample
        done = (mode == _HELD).all(axis=1)
        if done.any():
            d = rows[done]
            sw = swap_t[d, 1:n]
            t_del = np.maximum(np.maximum(rdy[d, 0], rdy[d, n - 1]), (sw + tell_a).max(axis=1))
            end_left = np.concatenate([t_del[:, None], sw], axis=1)
            end_right = np.concatenate([sw, t_del[:, None]], axis=1)
            out_t[ids[d]] = t_del
            out_left[ids[d]] = end_left - born[d]
            out_right[ids[d]] = end_right - born[d]
            out_disc[ids[d]] = disc[d]
            for i in range(n):
                if i > 0:
                    out_att_left[ids[d], i] = _rounds_between(first[d, i - 1], ta[i - 1], rounds[d, i - 1],
                                                              born[d, i], end_left[:, i])
                if i < n - 1:
                    out_att_right[ids[d], i] = _rounds_between(first[d, i + 1], ta[i + 1], rounds[d, i + 1],
                                                               born[d, i], end_right[:, i])
            keep = ~done
            ids, now, mode, born, rdy, prio, swap_t, disc, first, rounds = (
                ids[keep], now[keep], mode[keep], born[keep], rdy[keep], prio[keep], swap_t[keep], disc[keep],
                first[keep], rounds[keep])
            m = len(ids)
    if m:
        return None  # cycles that never finish: treat as no delivery
    return CycleSample(out_t, out_left, out_right, out_disc, out_att_left, out_att_right)


def _rounds_between(start_s: NDArray[np.float64], period_s: float, k: NDArray[np.float64],
                    after_s: NDArray[np.float64], until_s: NDArray[np.float64]) -> NDArray[np.float64]:
    """How many of the rounds start + m period (m = 0 .. k - 1) begin strictly inside (after, until)."""
    lo = np.maximum(0.0, np.floor((after_s - start_s) / period_s + 1e-9) + 1.0)
    hi = np.minimum(k - 1.0, np.ceil((until_s - start_s) / period_s - 1e-9) - 1.0)
    return np.maximum(0.0, hi - lo + 1.0)


def _run_mask(held: NDArray[np.bool_], hop: NDArray[np.int64], n: int) -> NDArray[np.bool_]:
    """Per row, the maximal run of held hops containing ``hop`` (rows of ``held``, (M, n))."""
    cols = np.arange(n)
    gap = ~held
    left_gap = np.where(gap & (cols < hop[:, None]), cols, -1).max(axis=1)
    right_gap = np.where(gap & (cols > hop[:, None]), cols, n).min(axis=1)
    return (cols > left_gap[:, None]) & (cols < right_gap[:, None])

