"""Vectorised engine for a lone chain: one demand alone on its sites and fibres, sure swaps, no
purification; with or without a cut-off.

With a cut-off (two hops or more) the cycles are run by :func:`netsim.network.cutoff.run_cycles`
(the swap-asap timeline with discards and restarts, the same code that samples the planning
estimate), many cycles at once, with attempt counts drawn ahead per cycle
(:class:`netsim.network.cutoff.AttemptTable`) so that the coupled start offsets of consecutive
cycles can be settled by running only the cycles whose offset changed again
(:func:`_solve_cutoff_cycles`); states, intervals and per-hop and per-site figures as below
(discarded pairs add their attempts, discards and memory occupancy);
``tests/test_engine_vector_cutoff.py`` checks it against the event engine on 2-4 hops.

Without a cut-off (or on one hop, where it never acts) nothing during a run depends on a quantum state, and the timeline of one
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
from typing import Any

import numpy as np
from numpy.typing import NDArray

from netsim.engine.chain import Chain
from netsim.engine.history import History, pair_states, rounds_between
from netsim.engine.metrics import ChainRun, StopRule
from netsim.network.cutoff import AttemptTable, CycleRun, deliverable, run_cycles

__all__ = ["cycle_timeline", "simulate_chain_vector", "vector_applicable"]

CHUNK = 20_000
#: Whole-array passes of the offset solver before it finishes cycle by cycle.
VECTOR_PASSES = 6


def vector_applicable(chain: Chain, cutoff_s: float | None, purification_rounds: int) -> bool:
    """Whether the vectorised engine reproduces the event engine for this lone chain.

    Sure swaps and no purification. A cut-off is taken too: its discard rule is a function of
    the cycle's own timeline, which :func:`netsim.network.cutoff.run_cycles` runs for many
    cycles at once (on a one-hop chain it never acts: the pair is delivered at its herald). The
    chain's hops must use distinct fibre links (a link carries one attempt sequence at a time,
    which only the event engine models).
    """
    sure_swaps = all(chain.swap_success(j) >= 1.0 for j in range(1, chain.n_hops))
    names = [name for hop in chain.hops for name in hop.links]
    ok = sure_swaps and purification_rounds == 0 and len(names) == len(set(names))
    if ok and cutoff_s is not None and chain.n_hops > 1:
        args = _cutoff_args(chain, cutoff_s)
        ok = deliverable(args[0], args[2], cutoff_s, args[6])  # else the event engine (and its guards)
    return ok


def _cutoff_args(chain: Chain, cutoff_s: float) -> tuple[Any, ...]:
    """The chain as :func:`netsim.network.cutoff.run_cycles` takes it."""
    n, pos = chain.n_hops, chain.position_s
    tell = tuple(float(max(pos[j] - pos[0], pos[-1] - pos[j])) for j in range(1, n))
    shared = tuple(chain.sites[j].communication_qubits == 1 for j in range(1, n))
    swaps = tuple(chain.swap_success(j) for j in range(1, n))
    return (tuple(map(float, chain.p)), tuple(map(float, chain.period_s)), tuple(map(float, chain.ready_s)), tell,
            float(cutoff_s), shared, swaps)


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


def simulate_chain_vector(chain: Chain, rule: StopRule, rng: np.random.Generator,
                          cutoff_s: float | None = None) -> ChainRun:
    """Run one lone chain with the vectorised engine until ``rule`` is met.

    ``cutoff_s``: the protocol's cut-off (None: none; on one hop it never acts). Stopping by
    time keeps only the pairs delivered by ``rule.time_s`` and reports that time; stopping by
    pairs or precision reports the time of the last delivery.
    """
    if cutoff_s is not None and chain.n_hops > 1:
        return _simulate_with_cutoff(chain, rule, rng, float(cutoff_s))
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
    return _finish(run, rule, now)


def _finish(run: ChainRun, rule: StopRule, now: float) -> ChainRun:
    """Set the run's simulated time: the stop rule's time, or (interrupted, or stopped by pairs)
    the clock at the last delivery."""
    if run.interrupted:
        last = run.metrics.last_delivery_s
        now = max(now, last) if math.isfinite(last) else now
    run.simulated_time_s = rule.time_s if (rule.time_s is not None and not run.interrupted) else now
    return run


# -- with a cut-off ------------------------------------------------------------------------------

def _cutoff_offsets(out: CycleRun, carry: NDArray[np.float64]) -> NDArray[np.float64]:
    """Each cycle's start offsets from the one before: o' = max(0, next round - t_D)."""
    new = np.empty_like(out.next_round_s)
    new[0] = carry
    prev = np.maximum(0.0, out.next_round_s[:-1] - out.delivered_s[:-1, None])
    new[1:] = np.where(out.finished[:-1, None], prev, 0.0)
    return new


def _solve_cutoff_cycles(args: tuple[Any, ...], table: AttemptTable, carry: NDArray[np.float64],
                         horizon_s: float) -> CycleRun:
    """Run the chunk's cycles with their coupled offsets (exact).

    Cycle c's offsets depend only on cycle c - 1's timeline, and a cycle run again with another
    offset uses the same attempt counts (``table``). Every cycle is first run with offset zero
    (the first with ``carry``); then only the cycles whose offset changed are run again, until
    none changes. Each pass makes at least the first changed cycle exact (its predecessor is), so
    this ends by construction; a pass costs in proportion to the cycles it reruns.
    """
    cycles = table.table.shape[0]
    offset = np.zeros((cycles, len(carry)))
    offset[0] = carry
    out = run_cycles(*args, cycles=cycles, draws=table, offset_s=offset, horizon_s=horizon_s)
    while True:
        new = _cutoff_offsets(out, carry)
        changed = np.flatnonzero((new != offset).any(axis=1))
        if len(changed) == 0:
            return out
        offset[changed] = new[changed]
        part = run_cycles(*args, cycles=len(changed), draws=table, offset_s=offset[changed], table_rows=changed,
                          horizon_s=horizon_s)
        out.put(changed, part)


def _simulate_with_cutoff(chain: Chain, rule: StopRule, rng: np.random.Generator, cutoff_s: float) -> ChainRun:
    """The vectorised engine with a cut-off: chunks of cycles run by
    :func:`netsim.network.cutoff.run_cycles` (the rules of the event engine for a lone chain:
    turns at one-interface repeaters, memory transfer, discard and restart at the cut-off, the
    next round of a hop not before one period after its last success), states as without one."""
    args = _cutoff_args(chain, cutoff_s)
    n = chain.n_hops
    run = ChainRun.zeros(n, engine="vector", min_fidelity=chain.min_fidelity)
    carry = np.zeros(n)
    now = 0.0
    try:
        while not rule.done(run, now):
            size = _chunk_size(rule, run, now)
            horizon = rule.time_s - now if rule.time_s is not None else np.inf
            out = _solve_cutoff_cycles(args, AttemptTable(rng, chain.p, size), carry, horizon)
            done = int(np.argmin(out.finished)) if not out.finished.all() else size
            delivered = now + np.cumsum(out.delivered_s[:done])
            keep = done
            if rule.time_s is not None:
                keep = int(np.searchsorted(delivered, rule.time_s, side="right"))
            if keep:
                _record_cutoff_chunk(run, chain, out, slice(0, keep), delivered[:keep], now)
            if keep < size:  # the time limit falls inside this chunk
                now = float(rule.time_s) if rule.time_s is not None else now
                break
            carry = np.maximum(0.0, out.next_round_s[-1] - out.delivered_s[-1])
            now = float(delivered[-1])
    except KeyboardInterrupt:
        run.interrupted = True
    return _finish(run, rule, now)


def _record_cutoff_chunk(run: ChainRun, chain: Chain, out: CycleRun, rows: slice, delivered: NDArray[np.float64],
                         start_s: float) -> None:
    """Add delivered cycles ``rows`` of ``out`` (absolute delivery times ``delivered``) to ``run``."""
    left, right = out.store_left_s[rows], out.store_right_s[rows]
    hist = History(delivered, left, right, np.zeros(left.shape, dtype=np.int64), [])
    if any(s.attempt_dephasing > 0 for s in chain.sites):
        hist.attempts_left, hist.attempts_right = out.attempts_left[rows], out.attempts_right[rows]
    run.metrics.add(pair_states(chain, hist), delivered)
    run.add_intervals(delivered, start_s)
    rounds = out.rounds[rows]
    run.hop_attempts += rounds.sum(axis=0)
    run.hop_successes += out.sequences[rows].sum(axis=0)
    run.hop_busy_s += (rounds * chain.period_s).sum(axis=0)
    run.hop_discards += out.discarded[rows].sum(axis=0)
    run.site_qubit_s[:-1] += left.sum(axis=0)
    run.site_qubit_s[1:] += right.sum(axis=0)
    run.site_qubit_s += out.lost_qubit_s[rows].sum(axis=0)
