"""Vectorised engine for the common case: one demand alone on its sites, sure swaps, no cut-off
(or a single hop, on which a cut-off never acts), no purification.

In that case nothing during a run depends on a quantum state, and the timeline of one
end-to-end cycle is a closed formula of the hops' geometric attempt counts. Many cycles are
sampled at once with numpy:

- hop i needs K_i ~ Geometric(p_i) rounds (p_i the per-round success 1 - (1 - p)^M); it starts
  at s_i = o_i, its successful round starts at b_i = s_i + (K_i - 1) T_i, both ends know at
  b_i + h_i and the pair is usable at H_i = b_i + h_i + tau_i (tau_i the memory transfer time,
  :attr:`Chain.ready_s`);
- communication qubits: where an inner site has one optical interface, its two hops take turns
  (:attr:`Chain.interface_waits`): a waiting hop starts at s_i = max(o_i, H of its neighbours);
- inner site j swaps as soon as it holds both its qubits: t_j = max(H_{j-1}, H_j)
  (swap as soon as possible; the Pauli correction is tracked in a frame);
- the pair is delivered when both users know every herald and outcome:
  t_D = max(H_0, H_{n-1}, max_j (t_j + max(d(j, 0), d(j, n)))), d the classical message time;
- attempt dephasing: the attempts a site starts while a qubit waits there are counted from the
  same rounds (:func:`netsim.engine.history.rounds_between`);
- all slots are free again at t_D; hop i's next round may not start before b_i + T_i, so the next
  cycle's offset is o_i = max(0, b_i + T_i - t_D).

This is exactly the timeline the event engine (:mod:`netsim.engine.des`) produces for one demand
with path reservation; ``tests/test_engine_timing.py`` checks the two agree statistically. The
offsets couple consecutive cycles: a few whole-array passes settle them in the usual case, and
cycles still changing after those are solved one after another (:func:`_solve_offsets`).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from netsim.engine.chain import Chain
from netsim.engine.history import History, pair_states, rounds_between
from netsim.engine.metrics import ChainRun, StopRule

__all__ = ["cycle_timeline", "simulate_chain_vector", "vector_applicable"]

CHUNK = 20_000
#: Whole-array passes of the offset solver before it finishes cycle by cycle.
VECTOR_PASSES = 6


def vector_applicable(chain: Chain, cutoff_s: float | None, purification_rounds: int) -> bool:
    """Whether the vectorised engine reproduces the event engine for this lone chain.

    A cut-off discards only incomplete segments; a one-hop chain's pair is complete (delivered)
    at its herald, so a cut-off never acts on it and such a chain takes the fast path with any
    cut-off. Longer chains with a cut-off stay on the event engine.
    """
    sure_swaps = all(chain.swap_success(j) >= 1.0 for j in range(1, chain.n_hops))
    no_cutoff = cutoff_s is None or chain.n_hops == 1
    return sure_swaps and no_cutoff and purification_rounds == 0


def cycle_timeline(chain: Chain, k: NDArray[np.float64], offset: NDArray[np.float64]) -> dict[str, NDArray[np.float64]]:
    """Timeline of cycles relative to each cycle's start, from attempt counts ``k`` (N, n).

    Returns arrays ``start`` and ``born`` (N, n) (first and successful round of each hop),
    ``delivered`` (N,), ``end_left`` and ``end_right`` (N, n): when hop i's qubit at its left
    (right) site is Bell-measured or delivered.
    """
    start = np.array(offset, dtype=float, copy=True)
    born = start + (k - 1.0) * chain.period_s
    herald = born + chain.ready_s
    for i, nbrs in chain.interface_waits:
        start[:, i] = np.maximum(start[:, i], herald[:, list(nbrs)].max(axis=1))
        born[:, i] = start[:, i] + (k[:, i] - 1.0) * chain.period_s[i]
        herald[:, i] = born[:, i] + chain.ready_s[i]
    if chain.n_hops == 1:
        delivered = herald[:, 0]
        return {"start": start, "born": born, "delivered": delivered, "end_left": delivered[:, None],
                "end_right": delivered[:, None]}
    swap = np.maximum(herald[:, :-1], herald[:, 1:])
    pos = chain.position_s
    tell = np.maximum(pos[1:-1] - pos[0], pos[-1] - pos[1:-1])
    delivered = np.maximum(np.maximum(herald[:, 0], herald[:, -1]), (swap + tell).max(axis=1))
    end_left = np.concatenate([delivered[:, None], swap], axis=1)
    end_right = np.concatenate([swap, delivered[:, None]], axis=1)
    return {"start": start, "born": born, "delivered": delivered, "end_left": end_left, "end_right": end_right}


def _solve_offsets(chain: Chain, k: NDArray[np.float64], carry: NDArray[np.float64]) -> dict[str, NDArray[np.float64]]:
    """Find the coupled offsets of consecutive cycles (exactly, in at most O(N n) work).

    Cycle c's offsets depend only on cycle c - 1's timeline. A few whole-array passes settle the
    usual case (each pass makes at least one more cycle exact, and in practice the coupling dies
    out after a cycle or two). If cycles are still changing after :data:`VECTOR_PASSES` passes
    (short hops whose next round waits long after delivery, e.g. zero-length hops with p near 1),
    the cycles from the first one that changed on are solved one after another with the scalar
    recurrence below, which ends by construction.
    """
    offset = np.zeros_like(k)
    offset[0] = carry
    first = 0
    for _ in range(VECTOR_PASSES):
        tl = cycle_timeline(chain, k, offset)
        new = np.empty_like(offset)
        new[0] = carry
        new[1:] = np.maximum(0.0, tl["born"][:-1] + chain.period_s - tl["delivered"][:-1, None])
        changed = np.flatnonzero((new != offset).any(axis=1))
        if len(changed) == 0:
            return tl
        offset = new
        first = int(changed[0])  # cycles before ``first`` formed a self-consistent (exact) prefix
    offset[first:] = _sequential_offsets(chain, k[first:], offset[first])
    return cycle_timeline(chain, k, offset)


def _sequential_offsets(chain: Chain, k: NDArray[np.float64], start: NDArray[np.float64]) -> NDArray[np.float64]:
    """Offsets cycle by cycle from ``start`` (the first cycle's offsets, exact): the recurrence of
    the whole-array passes, o' = max(0, born + T - t_D), one cycle of :func:`cycle_timeline` at a
    time (linear in the number of cycles)."""
    out = np.empty_like(k)
    o = np.array(start, dtype=float)
    for c in range(len(k)):
        out[c] = o
        tl = cycle_timeline(chain, k[c:c + 1], o[None, :])
        o = np.maximum(0.0, tl["born"][0] + chain.period_s - tl["delivered"][0])
    return out


def _next_carry(chain: Chain, tl: dict[str, NDArray[np.float64]]) -> NDArray[np.float64]:
    return np.maximum(0.0, tl["born"][-1] + chain.period_s - tl["delivered"][-1])


def _record_chunk(run: ChainRun, chain: Chain, k: NDArray[np.float64], tl: dict[str, NDArray[np.float64]],
                  start_s: float) -> NDArray[np.float64]:
    """Add one chunk of cycles to ``run``; returns the absolute delivery times."""
    delivered = start_s + np.cumsum(tl["delivered"])
    left = tl["end_left"] - tl["born"]
    right = tl["end_right"] - tl["born"]
    hist = History(delivered, left, right, np.zeros(k.shape, dtype=np.int64), [])
    hist.attempts_left, hist.attempts_right = _attempts_while_stored(chain, k, tl)
    run.metrics.add(pair_states(chain, hist), delivered)
    run.add_intervals(delivered, start_s)
    run.hop_attempts += k.sum(axis=0)
    run.hop_successes += len(k)
    run.hop_busy_s += (k * chain.period_s).sum(axis=0)
    run.site_qubit_s[:-1] += left.sum(axis=0)
    run.site_qubit_s[1:] += right.sum(axis=0)
    return delivered


def _attempts_while_stored(chain: Chain, k: NDArray[np.float64], tl: dict[str, NDArray[np.float64]]
                           ) -> tuple[NDArray[np.float64] | None, NDArray[np.float64] | None]:
    """Attempts each hop's neighbour at a shared site starts while the hop's qubit waits there.

    In a lone chain only hops i - 1 and i attempt at site i. Returns (left, right), None when no
    site of the chain has ``attempt_dephasing``.
    """
    if not any(s.attempt_dephasing > 0 for s in chain.sites):
        return None, None
    left, right = np.zeros_like(k), np.zeros_like(k)
    start, born, period = tl["start"], tl["born"], chain.period_s
    for i in range(chain.n_hops):
        if i > 0:
            left[:, i] = rounds_between(start[:, i - 1], period[i - 1], k[:, i - 1], born[:, i], tl["end_left"][:, i])
        if i + 1 < chain.n_hops:
            right[:, i] = rounds_between(start[:, i + 1], period[i + 1], k[:, i + 1], born[:, i], tl["end_right"][:, i])
    return left, right


def _chunk_size(rule: StopRule, run: ChainRun, now_s: float) -> int:
    if rule.pairs is not None:
        return max(1, min(CHUNK, rule.pairs - run.metrics.n))
    if rule.time_s is not None and run.metrics.n > 0:
        expected = (rule.time_s - now_s) * run.metrics.n / max(now_s, 1e-300)
        return int(min(CHUNK, max(64, 1.1 * expected + 10)))
    return CHUNK if run.metrics.n >= 1000 else 1000


def _truncate(tl: dict[str, NDArray[np.float64]], k: NDArray[np.float64], keep: int) -> tuple[dict[str, NDArray[np.float64]], NDArray[np.float64]]:
    return {key: v[:keep] for key, v in tl.items()}, k[:keep]


def simulate_chain_vector(chain: Chain, rule: StopRule, rng: np.random.Generator) -> ChainRun:
    """Run one lone chain with the vectorised engine until ``rule`` is met.

    Stopping by time keeps only the pairs delivered by ``rule.time_s`` and reports that time;
    stopping by pairs or precision reports the time of the last delivery.
    """
    run = ChainRun.zeros(chain.n_hops, engine="vector", min_fidelity=chain.min_fidelity)
    carry = np.zeros(chain.n_hops)
    now = 0.0
    try:
        while not rule.done(run, now):
            n = _chunk_size(rule, run, now)
            k = rng.geometric(chain.p, size=(n, chain.n_hops)).astype(float)
            tl = _solve_offsets(chain, k, carry)
            if rule.time_s is not None:
                keep = int(np.searchsorted(now + np.cumsum(tl["delivered"]), rule.time_s, side="right"))
                if keep < n:
                    tl, k = _truncate(tl, k, keep)
                    if keep:
                        _record_chunk(run, chain, k, tl, now)
                    now = rule.time_s
                    break
            delivered = _record_chunk(run, chain, k, tl, now)
            carry = _next_carry(chain, tl)
            now = float(delivered[-1])
    except KeyboardInterrupt:
        run.interrupted = True
        last = run.metrics.last_delivery_s
        now = max(now, last) if math.isfinite(last) else now
    run.simulated_time_s = rule.time_s if (rule.time_s is not None and not run.interrupted) else now
    return run
