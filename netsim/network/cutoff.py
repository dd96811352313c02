"""Timeline of a lone chain under swap-asap with a cut-off: the planning estimate's sample and
the vectorised engine's cycles (one implementation, :func:`run_cycles`).

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

The cycles are stepped event by event, all at once on (hops, cycles) planes, except those that
lose no pair when every draw is an attempt count (sure swaps; the draws then come from an
:class:`AttemptTable`, per cycle, hop and sequence): such a cycle's timeline follows from its
first draws in closed form (:func:`_quiet_cycles`), with the same numbers as stepping it. On
chains whose cut-off seldom acts, as on the generated metro grids, that is every cycle.

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
  message time is left out here; the vectorised engine takes only chains with sure swaps).
- A hop's next round starts no earlier than one period after the start of its last successful
  round (also across cycles: ``offset_s``, the carry the engine passes from one cycle to the next).
- At exactly equal times a pair becoming usable is taken before a run's cut-off (the event
  engine orders such ties by when the events were scheduled; only event times on one lattice,
  e.g. a cut-off a whole number of periods beyond the herald delay, meet exactly).
- The pair is delivered at t_D = max(R_0, R_{n-1}, max_j (s_j + d_j)) (s_j the last swap time at
  site j, d_j its signalling time to the farther user); the next cycle starts then.

Storage times of the delivered pairs: hop i's left qubit from b_i to s_i (t_D at the first
user), its right qubit from b_i to s_{i+1} (t_D at the last user).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["CYCLES", "SEED", "AttemptTable", "CycleRun", "CycleSample", "run_cycles", "sample_cycles"]

#: Cycles sampled per estimate: the standard error of a mean fidelity is about 0.1 / sqrt(N).
CYCLES = 1200
#: Fixed seed: the estimate is deterministic.
SEED = 20230523
#: Steps (events per cycle) after which the estimate gives up on a cycle (no delivery).
ESTIMATE_STEPS = 100_000

_WAIT, _TRY, _HELD = 0, 1, 2


@dataclass(frozen=True)
class CycleSample:
    """Sampled cycles of a lone chain with a cut-off (module docstring).

    ``delivered_s`` (N,) is each cycle's duration; ``store_left_s`` and ``store_right_s`` (N, n)
    the storage times of the delivered pairs' qubits; ``discards`` (N,) the runs discarded by
    the cut-off in each cycle; ``attempts_left`` and ``attempts_right`` (N, n) the attempt rounds
    the neighbouring hop starts at the same site while each of those qubits waits there (in a
    lone chain the only attempts at that site while the qubit waits).
    """

    delivered_s: NDArray[np.float64]
    store_left_s: NDArray[np.float64]
    store_right_s: NDArray[np.float64]
    discards: NDArray[np.float64]
    attempts_left: NDArray[np.float64]
    attempts_right: NDArray[np.float64]


@dataclass
class CycleRun:
    """Per cycle (rows) of :func:`run_cycles`; times relative to the cycle's start.

    ``finished`` (M,): the cycle delivered (within the step limit and the horizon); the other
    fields of an unfinished cycle are meaningless. ``delivered_s`` (M,) the delivery time;
    ``born_s`` (M, n) when each hop's delivered pair's successful round started;
    ``next_round_s`` (M, n) the earliest start of each hop's next round (born + period);
    ``store_left_s``, ``store_right_s`` (M, n) the delivered pairs' storage times;
    ``attempts_left``, ``attempts_right`` (M, n) the attempt rounds the neighbouring hop started
    at the same site while each of those qubits waited there; ``rounds`` and ``sequences``
    (M, n) attempt rounds and attempt sequences (= heralded pairs) per hop; ``discarded`` (M, n)
    pairs per hop discarded by the cut-off or lost in a failed swap; ``discards`` (M,) runs
    discarded by the cut-off; ``lost_qubit_s`` (M, n + 1) the qubit-seconds the discarded or lost
    pairs spent in each site's memory.
    """

    finished: NDArray[np.bool_]
    delivered_s: NDArray[np.float64]
    born_s: NDArray[np.float64]
    next_round_s: NDArray[np.float64]
    store_left_s: NDArray[np.float64]
    store_right_s: NDArray[np.float64]
    attempts_left: NDArray[np.float64]
    attempts_right: NDArray[np.float64]
    rounds: NDArray[np.float64]
    sequences: NDArray[np.float64]
    discarded: NDArray[np.float64]
    discards: NDArray[np.float64]
    lost_qubit_s: NDArray[np.float64]

    @classmethod
    def empty(cls, cycles: int, n: int) -> CycleRun:
        def z(*shape: int) -> NDArray[np.float64]:
            return np.zeros(shape)
        return cls(np.zeros(cycles, dtype=bool), np.full(cycles, np.inf), z(cycles, n), z(cycles, n), z(cycles, n),
                   z(cycles, n), z(cycles, n), z(cycles, n), z(cycles, n), z(cycles, n), z(cycles, n), z(cycles),
                   z(cycles, n + 1))

    def put(self, rows: NDArray[np.int64], other: CycleRun) -> None:
        """Overwrite ``rows`` with the cycles of ``other`` (in order)."""
        for name in self.__dataclass_fields__:
            getattr(self, name)[rows] = getattr(other, name)


class AttemptTable:
    """Attempt counts drawn ahead per cycle and hop, so that a cycle run again (with another
    start offset) uses the same draws: ``table[c, i, m]`` is the number of rounds of hop i's
    m-th attempt sequence in cycle c, Geometric(q_i). More columns are drawn from ``rng`` when a
    cycle needs them; the columns already drawn never change."""

    def __init__(self, rng: np.random.Generator, q: NDArray[np.float64], cycles: int, columns: int = 2) -> None:
        self.rng, self.q = rng, np.asarray(q, dtype=float)
        self.table = self._draw(cycles, columns)

    def _draw(self, cycles: int, columns: int) -> NDArray[np.float64]:
        q = np.broadcast_to(self.q[None, :, None], (cycles, len(self.q), columns))
        return _geometric(self.rng, q.ravel()).reshape(q.shape)   # rng.geometric(q), as floats

    def take(self, cycle: NDArray[np.int64], hop: NDArray[np.int64], used: NDArray[np.int64]) -> NDArray[np.float64]:
        """Rounds of the ``used``-th sequence (0-based) of ``hop`` in ``cycle`` (arrays)."""
        while len(used) and int(used.max()) >= self.table.shape[2]:
            self.table = np.concatenate([self.table, self._draw(self.table.shape[0], self.table.shape[2])], axis=2)
        return self.table[cycle, hop, used]


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


def deliverable(q: tuple[float, ...], ready_s: tuple[float, ...], cutoff_s: float, swap_p: tuple[float, ...]) -> bool:
    """Whether a chain of two hops or more can deliver at all with this cut-off: every hop can
    succeed, every swap can, and every pair is usable before the cut-off removes it."""
    return all(r < cutoff_s for r in ready_s) and all(p > 0 for p in q) and all(p > 0 for p in swap_p)


@functools.lru_cache(maxsize=256)
def _sample(q: tuple[float, ...], period: tuple[float, ...], ready: tuple[float, ...], tell: tuple[float, ...],
            cutoff: float, shared: tuple[bool, ...], swap_p: tuple[float, ...], cycles: int,
            seed: int) -> CycleSample | None:
    if len(q) < 2 or not deliverable(q, ready, cutoff, swap_p):
        return None  # one hop: the cut-off never acts (callers use the closed form); else no delivery
    if math.prod(swap_p) * ESTIMATE_STEPS < 10.0:
        # a delivery needs every swap to succeed in one cycle, 1 / prod(p) tries on average: far
        # beyond the steps allowed, no cycle would finish (swap success 1e-308 ran for minutes)
        return None
    rng = np.random.default_rng(seed)
    # with sure swaps every draw is an attempt count: drawn per cycle, hop and sequence (an
    # attempt table), so that the cycles that lose no pair are finished in closed form
    draws = AttemptTable(rng, np.array(q), cycles, columns=1) if all(p >= 1.0 for p in swap_p) else rng
    out = run_cycles(q, period, ready, tell, cutoff, shared, swap_p, cycles=cycles, draws=draws,
                     max_steps=ESTIMATE_STEPS)
    if not out.finished.all():
        return None  # cycles that never finish: treat as no delivery
    return CycleSample(out.delivered_s, out.store_left_s, out.store_right_s, out.discards,
                       out.attempts_left, out.attempts_right)


def run_cycles(q: tuple[float, ...], period: tuple[float, ...], ready: tuple[float, ...], tell: tuple[float, ...],
               cutoff: float, shared: tuple[bool, ...], swap_p: tuple[float, ...], *, cycles: int,
               draws: np.random.Generator | AttemptTable, offset_s: NDArray[np.float64] | None = None,
               table_rows: NDArray[np.int64] | None = None, max_steps: int | None = None,
               horizon_s: float = np.inf, closed_form: bool = True) -> CycleRun:
    """Run ``cycles`` independent cycles of the chain under the rules of the module docstring.

    ``draws``: a generator (attempt counts and swap outcomes drawn as the cycles need them; the
    estimate with swaps that can fail) or an :class:`AttemptTable` (rows ``table_rows`` of it,
    default 0 .. cycles - 1; sure swaps only; the estimate, and the vectorised engine, which may
    run a cycle again with another offset). With a table the cycles that lose no pair are
    finished in closed form (:func:`_quiet_cycles`) and only the others are stepped
    (``closed_form=False``: every cycle stepped, the same numbers; for checks).
    ``offset_s`` (cycles, n): per cycle and hop, the earliest start of the first round after the
    cycle's start (the carry of the previous cycle; default 0). A cycle still running after
    ``max_steps`` events or past ``horizon_s`` is left unfinished.
    """
    n = len(q)
    qa, ta, ra = np.array(q, dtype=float), np.array(period, dtype=float), np.array(ready, dtype=float)
    tell_a = np.array(tell, dtype=float)
    sure = all(p >= 1.0 for p in swap_p)
    table = draws if isinstance(draws, AttemptTable) else None
    rng = draws if isinstance(draws, np.random.Generator) else None
    if table is not None and not sure:
        raise ValueError("an attempt table serves chains with sure swaps only")
    swap_pa = np.array((1.0,) + tuple(swap_p) + (1.0,))
    out = CycleRun.empty(cycles, n)

    ids = np.arange(cycles)
    t_rows = np.arange(cycles) if table_rows is None else np.asarray(table_rows)
    offsets = None if offset_s is None else np.array(offset_s, dtype=float).reshape(cycles, n)
    if closed_form and table is not None and n >= 2 and (max_steps is None or max_steps >= n):
        # the cycles that lose no pair are finished at once (_quiet_cycles); the others are
        # stepped below, drawing the same table entries they would have drawn anyway
        ids = _quiet_cycles(out, table, t_rows, offsets, ta, ra, tell_a, shared[: n - 1], cutoff, horizon_s)
    m = len(ids)
    # The per-cycle state, hop-major: every field is a (hops, cycles) plane whose rows are
    # contiguous, so that a step works on whole planes with a few dozen numpy calls whatever the
    # number of cycles (reductions over the few hops are then cheap, and the run's tail, where few
    # cycles remain, costs little per step); packed so that dropping finished cycles takes a few copies.
    per_hop: NDArray[Any] = np.zeros((_PER_HOP, n, m))
    per_site: NDArray[Any] = np.zeros((2, n + 1, m))     # swap_t, lost_q
    per_cycle: NDArray[Any] = np.zeros((2, m))           # now, disc
    mode: NDArray[Any] = np.zeros((n, m), dtype=np.int8)
    used: NDArray[Any] = np.zeros((n, m), dtype=np.int64)
    #: per cycle, its hops in priority order (priorities are distinct within a cycle and change only
    #: when a hop is lost, to values above all others): a waiting hop's turn is then the number of
    #: waiting hops before it in this order, O(n) per cycle rather than n^2 comparisons
    order: NDArray[Any] = np.repeat(np.arange(n)[:, None], m, axis=1)
    reordered = False   # whether any cycle's order has changed (else a turn is a plain running count)
    per_hop[_RDY] = np.inf
    per_hop[_PRIO] = np.arange(n, dtype=float)[:, None]
    if offsets is not None:
        per_hop[_NEXT] = offsets[ids].T
    pair_shared = np.array(shared[: n - 1], dtype=bool)[:, None]   # the site between hops j and j + 1
    any_shared = bool(pair_shared.any())
    counter = float(n)
    # Attempt counts (_count_attempts) and the rounds and sequences per hop are kept step by step
    # only once some cycle has lost a pair: until then every hop has had at most one sequence in
    # its cycle, and they follow from the current sequences (_attempts_now; the rounds are the
    # current sequence's, the sequences one where a hop has one) when a cycle leaves or the first
    # pair is lost (the same numbers; most chains that deliver never lose one).
    counting = False
    cols = np.arange(n)
    hop_col = cols[:, None]
    step = 0
    rows = np.arange(m)
    while m and (max_steps is None or step < max_steps):
        step += 1
        (born, rdy, first, cur, next_ok, prio, rounds, seqs, dropped, acc_left, acc_right) = per_hop
        swap_t, lost_q = per_site
        now, disc = per_cycle
        if len(rows) != m:
            rows = np.arange(m)
        # 1. grant waiting requests in request order (module docstring): a cycle's waiting hops
        # are taken one by one by priority (turn 0 its first, turn 1 its second, ...); attempt
        # counts are drawn by turn, and within a turn by cycle
        pending = mode == _WAIT
        if pending.any():
            turns = int(pending.sum(axis=0).max())
            rank = None
            if turns > 1 and not reordered:  # every cycle's hops still in chain order
                rank = _running_count(pending) - 1
            elif turns > 1:  # priorities differ within a cycle: a hop's turn is the number of waiting hops before it
                at = (order * m + rows).ravel()  # flat positions, in priority order per cycle
                flat = np.empty(n * m, dtype=np.int64)   # meaningful for the waiting hops only
                np.put(flat, at, _running_count(np.take(pending, at).reshape(n, m)) - 1)
                rank = flat.reshape(n, m)
            if any_shared:
                trying = mode == _TRY
                if rank is not None and (pending[:-1] & pending[1:] & pair_shared).any():
                    # two waiting neighbours at a shared site: the one granted first blocks the other
                    granted = np.zeros((n, m), dtype=bool)
                    for turn in range(turns):
                        go = pending & (rank == turn)
                        go[1:] &= ~(trying[:-1] & pair_shared)
                        go[:-1] &= ~(trying[1:] & pair_shared)
                        trying |= go
                        granted |= go
                else:  # the shared neighbours of a waiting hop keep their mode during the grants
                    granted = pending.copy()
                    granted[1:] &= ~(trying[:-1] & pair_shared)
                    granted[:-1] &= ~(trying[1:] & pair_shared)
            else:
                granted = pending
            if rank is None:
                r, h = _nonzero(np.ascontiguousarray(granted.T))      # by cycle
            else:
                h, r = _nonzero(granted)
                by_turn = np.argsort(rank[h, r] * m + r, kind="stable")
                h, r = h[by_turn], r[by_turn]
            if len(r):
                if table is not None:
                    k = table.take(t_rows[ids[r]], h, used[h, r])
                    used[h, r] += 1
                else:
                    assert rng is not None
                    k = _geometric(rng, qa[h])
                # written at the granted hops only (after the first step a few per cent of the
                # plane), through flat positions: every plane is C-contiguous
                at = h * m + r
                start = np.maximum(now[r], _flat(next_ok).take(at))
                b = start + (k - 1) * ta[h]
                for plane, values in ((first, start), (cur, k), (born, b), (rdy, b + ra[h]), (next_ok, b + ta[h])):
                    _flat(plane).put(at, values)
                if counting:
                    _flat(rounds).put(at, _flat(rounds).take(at) + k)
                    _flat(seqs).put(at, _flat(seqs).take(at) + 1.0)
                _flat(mode).put(at, _TRY)
                if counting:
                    _count_attempts(granted, pending, first, cur, born, ta, acc_left, acc_right, m)
        # 2. the next event: a hop's pair becomes usable, or a run's cut-off
        t_ready = np.where(mode == _TRY, rdy, np.inf)
        hop_r = t_ready.argmin(axis=0)
        t_r = t_ready.min(axis=0)
        held = mode == _HELD
        # the earliest cut-off: a run's is the least of its pairs' (b + cutoff), so the earliest of
        # all runs is the least over all held pairs, and the first pair reaching it lies in the
        # first run that does (the run is then found from it, step 3b). No cycle needs it when
        # even the least birth in the plane (held or not) reaches its cut-off after every cycle's
        # next pair is usable (float addition is monotone: the test is exact)
        if float(born.min()) + cutoff >= float(t_r.max()):
            hop_d = None
            np.maximum(now, t_r, out=now)
            is_ready = np.ones(m, dtype=bool)
            r, h = rows, hop_r
        else:
            dl = np.where(held, born + cutoff, np.inf)
            hop_d = dl.argmin(axis=0)
            t_d = dl.min(axis=0)
            is_ready = t_r <= t_d
            np.maximum(now, np.where(is_ready, t_r, t_d), out=now)
            r, h = rows[is_ready], hop_r[is_ready]
        lost = None
        # 3a. a pair becomes usable: swap with held neighbours (left first, as the engine does)
        mode[h, r] = _HELD
        if sure:  # both swaps at once: the swap times are all they change
            new = np.zeros((n, m), dtype=bool)
            new[h, r] = True
            held_now = mode == _HELD
            swapped = (new[1:] & held_now[:-1]) | (new[:-1] & held_now[1:])
            np.copyto(swap_t[1:n], now, where=swapped)
        else:
            for side in (0, 1):
                ok = h > 0 if side == 0 else h < n - 1
                ok[ok] = mode[h[ok] + (-1 if side == 0 else 1), r[ok]] == _HELD
                if lost is not None:
                    ok &= ~lost[h, r]
                rr = r[ok]
                if not len(rr):
                    continue
                ss = h[ok] + side
                swap_t[ss, rr] = now[rr]
                assert rng is not None
                fail = rng.random(len(rr)) >= swap_pa[ss]
                if fail.any():
                    rf, hf = rr[fail], h[ok][fail]
                    both = mode[:, rf].T == _HELD
                    if side == 0:  # the left swap fails before the right one is made
                        both &= cols[None, :] <= hf[:, None]
                    if lost is None:
                        lost = np.zeros((n, m), dtype=bool)
                    lost[:, rf] |= _run_mask(both, hf, cols).T
        # 3b. a run reaches its cut-off: its hops request again
        cut = ~is_ready
        if hop_d is not None and cut.any():
            # the run of held hops around hop_d: the held hops with as many gaps before them
            gaps = _running_count(~held)
            run = held & (gaps == gaps[hop_d, rows]) & cut
            lost = run if lost is None else lost | run
            disc += cut
        if lost is not None:
            if not counting:
                acc_left[:], acc_right[:] = _attempts_now(first, cur, born, ta)
                rounds[:], seqs[:] = cur, cur > 0
                counting = True
            lo = np.where(lost, hop_col, n).min(axis=0)
            hi = np.where(lost, hop_col, -1).max(axis=0)
            # qubit-seconds of the lost pairs: to the swap that joined them, or to now at the run's ends
            left_end = np.where(hop_col > lo, swap_t[:n], now)
            right_end = np.where(hop_col < hi, swap_t[1:], now)
            np.add(lost_q[:n], left_end - born, out=lost_q[:n], where=lost)
            np.add(lost_q[1:], right_end - born, out=lost_q[1:], where=lost)
            dropped += lost
            # request order: the run's inner hops, then its left end, then its right end
            rank_lost = np.where(hop_col == lo, n, np.where(hop_col == hi, n + 1, hop_col))
            np.copyto(prio, counter + rank_lost, where=lost)
            moved = np.flatnonzero(lost.any(axis=0))
            order[:, moved] = np.argsort(prio[:, moved], axis=0)
            reordered = True
            counter += n + 2
            np.copyto(mode, _WAIT, where=lost)
            np.copyto(rdy, np.inf, where=lost)
        # 4. delivered cycles leave; so do cycles past the horizon
        done = (mode == _HELD).all(axis=0)
        gone = done | (now > horizon_s) if math.isfinite(horizon_s) else done
        if gone.any():
            if done.any():
                d = rows[done]
                sw = swap_t[1:n, d]
                t_del = np.maximum(np.maximum(rdy[0, d], rdy[n - 1, d]), (sw + tell_a[:, None]).max(axis=0))
                end_left = np.concatenate([t_del[None, :], sw])
                end_right = np.concatenate([sw, t_del[None, :]])
                born_d = born[:, d]
                o = ids[d]
                out.finished[o] = True
                out.delivered_s[o] = t_del
                out.born_s[o], out.next_round_s[o] = born_d.T, next_ok[:, d].T
                out.store_left_s[o] = (end_left - born_d).T
                out.store_right_s[o] = (end_right - born_d).T
                if counting:
                    out.attempts_left[o], out.attempts_right[o] = acc_left[:, d].T, acc_right[:, d].T
                else:  # on the whole planes: cheaper than gathering four of them first
                    left_all, right_all = _attempts_now(first, cur, born, ta)
                    out.attempts_left[o], out.attempts_right[o] = left_all[:, d].T, right_all[:, d].T
            g = rows[gone]
            o = ids[g]
            if counting:
                out.rounds[o], out.sequences[o] = rounds[:, g].T, seqs[:, g].T
            else:
                out.rounds[o], out.sequences[o] = cur[:, g].T, (cur[:, g] > 0).T
            out.discarded[o] = dropped[:, g].T
            out.discards[o], out.lost_qubit_s[o] = disc[g], lost_q[:, g].T
            keep = ~gone
            ids = ids[keep]
            per_hop, per_site, per_cycle, mode, used, order = (   # compress keeps them C-contiguous
                np.compress(keep, a, axis=-1) for a in (per_hop, per_site, per_cycle, mode, used, order))
            m = len(ids)
    return out


def _quiet_cycles(out: CycleRun, table: AttemptTable, t_rows: NDArray[np.int64], offsets: NDArray[np.float64] | None,
                  ta: NDArray[np.float64], ra: NDArray[np.float64], tell: NDArray[np.float64],
                  shared: tuple[bool, ...], cutoff: float, horizon_s: float) -> NDArray[np.int64]:
    """Finish in closed form, in ``out``, every cycle of :func:`run_cycles` (attempt-table draws:
    sure swaps) that loses no pair, and return the indices of the others.

    With no pair lost each hop makes one attempt sequence in its cycle, the first of its table
    row. At the start every hop requests in chain order and is granted unless its left
    neighbour shares their site and was granted: a hop so held back ("late") waits for that
    neighbour, and for its right one if they share a site (which was granted, as the late hop was
    not), and is granted when the later of them has its pair usable. Two late hops are never
    neighbours, so nothing else orders the grants. The pairs are then swapped as they become
    usable, each site at the later of its two hops' times, and the cycle ends as in step 4 of
    :func:`run_cycles`. No pair is lost when the last pair is usable no later than the earliest
    pair's cut-off (the test of step 2 then takes a usable pair at every step; float addition is
    monotone). The arithmetic is the stepped run's, value for value: the same numbers."""
    n = len(ta)
    cycles = len(t_rows)
    k = table.table[t_rows, :, 0].T             # (hops, cycles): the first sequence's rounds
    next_ok = np.zeros((n, cycles)) if offsets is None else offsets.T
    first, born, usable = np.empty((n, cycles)), np.empty((n, cycles)), np.empty((n, cycles))
    early = [True] * n
    for i in range(1, n):
        early[i] = not (shared[i - 1] and early[i - 1])
    for late in (False, True):   # the early hops first: a late hop's start reads its neighbours'
        for i in range(n):
            if early[i] == late:
                continue
            now = np.zeros(cycles) if not late else (
                np.maximum(usable[i - 1], usable[i + 1]) if i + 1 < n and shared[i] else usable[i - 1])
            first[i] = np.maximum(now, next_ok[i])
            born[i] = first[i] + (k[i] - 1) * ta[i]
            usable[i] = born[i] + ra[i]
    last = usable.max(axis=0)
    quiet = last <= born.min(axis=0) + cutoff
    if math.isfinite(horizon_s):
        quiet &= last <= horizon_s
    q = np.flatnonzero(quiet)
    if len(q):
        b, r = born[:, q], usable[:, q]
        sw = np.maximum(r[:-1], r[1:])
        t_del = np.maximum(np.maximum(r[0], r[n - 1]), (sw + tell[:, None]).max(axis=0))
        left, right = _attempts_now(first[:, q], k[:, q], b, ta)
        out.finished[q] = True
        out.delivered_s[q] = t_del
        out.born_s[q], out.next_round_s[q] = b.T, (b + ta[:, None]).T
        out.store_left_s[q] = (np.concatenate([t_del[None, :], sw]) - b).T
        out.store_right_s[q] = (np.concatenate([sw, t_del[None, :]]) - b).T
        out.attempts_left[q], out.attempts_right[q] = left.T, right.T
        out.rounds[q], out.sequences[q] = k[:, q].T, 1.0
    return np.flatnonzero(~quiet)


#: Rows of the packed per-hop state of :func:`run_cycles`: born, ready, first round of the last
#: sequence, rounds of the last sequence, earliest next round, request priority, rounds, sequences,
#: discarded pairs, attempts counted at the left and at the right site.
_BORN, _RDY, _FIRST, _CUR, _NEXT, _PRIO, _ROUNDS, _SEQS, _DROPPED, _ACC_LEFT, _ACC_RIGHT = range(11)
_PER_HOP = 11


def _flat(plane: NDArray[Any]) -> NDArray[Any]:
    """A (hops, cycles) plane as one flat view: the planes are C-contiguous (they are made so and
    kept so by ``np.compress``), so values put through the view land in the plane."""
    assert plane.flags.c_contiguous
    return plane.ravel()


def _geometric(rng: np.random.Generator, p: NDArray[np.float64]) -> NDArray[np.float64]:
    """``rng.geometric(p)`` as floats. Where every p < 1/3 numpy draws by inversion,
    ceil(-E / log(1 - p)) with E a standard exponential (capped at the largest int64); the same
    draws taken here from one vector of exponentials, without numpy's per-element parameter
    handling (twice as fast; the same numbers from the same generator)."""
    if len(p) and float(p.max()) < _INVERSION_BELOW:
        return np.minimum(np.ceil(-rng.standard_exponential(len(p)) / np.log1p(-p)), _INT64_MAX)
    return rng.geometric(p).astype(float)


#: numpy's switch from a search to inversion in its geometric draws, and the cap of its int64 result.
_INVERSION_BELOW = 0.333333333333333333333333
_INT64_MAX = float(np.iinfo(np.int64).max)


def _running_count(plane: NDArray[np.bool_]) -> NDArray[np.int64]:
    """``np.cumsum(plane, axis=0)`` of a (hops, cycles) boolean plane, a row at a time (numpy's
    cumsum along the first axis of a C-contiguous plane takes three times as long)."""
    out = plane.astype(np.intp)
    for i in range(1, len(out)):
        out[i] += out[i - 1]
    return out


def _nonzero(plane: NDArray[np.bool_]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """``np.nonzero`` of a C-contiguous 2-d plane, through its flat positions (a third of the time)."""
    at = np.flatnonzero(plane)
    row = at // plane.shape[1]
    return row, at - row * plane.shape[1]


def _count_attempts(granted: NDArray[np.bool_], pending: NDArray[np.bool_], first: NDArray[np.float64],
                    cur: NDArray[np.float64], born: NDArray[np.float64], ta: NDArray[np.float64],
                    acc_left: NDArray[np.float64], acc_right: NDArray[np.float64], m: int) -> None:
    """The ``granted`` hops ((hops, cycles) planes, C-contiguous, ``m`` cycles) have just started
    a sequence (``first``, ``cur`` rounds; their pairs born at ``born``); ``pending`` the hops
    that waited for a grant; ``ta`` (hops,) the periods.

    ``acc_left[i, r]`` counts the rounds hop i - 1 starts at site i after hop i's current pair's
    round began (``acc_right`` those of hop i + 1 at site i + 1). A new pair counts the
    neighbour's current sequence; the counts of a neighbour's live pair (waiting for a herald,
    or stored) grow by the new sequence. A neighbour that waited has no round after the new pair's
    birth from its last sequence (that ended before its pair was stored, and so before now): two
    neighbours granted in one step count each other's new sequence, whichever was granted first.
    The counts stop by themselves: once the two pairs are swapped, neither hop attempts again
    before both are delivered or discarded. Only the inner sites next to a granted hop change.
    """
    at = np.flatnonzero(granted[:-1] | granted[1:])   # inner site j (joining hops j and j + 1), cycle r: j * m + r
    nb = at + m                                       # the same cycle's right hop
    site = at // m
    left_new, right_new = _flat(granted).take(at), _flat(granted).take(nb)
    first_f, cur_f, born_f = _flat(first), _flat(cur), _flat(born)
    # the right hop's rounds after the left hop's pair began, and the left hop's after the right's
    x = _rounds_after(first_f.take(nb), ta[site + 1], cur_f.take(nb), born_f.take(at))
    y = _rounds_after(first_f.take(at), ta[site], cur_f.take(at), born_f.take(nb))
    right = _flat(acc_right)
    old = right.take(at)
    right.put(at, np.where(left_new, x, np.where(right_new & ~_flat(pending).take(at), old + x, old)))
    left = _flat(acc_left)
    old = left.take(nb)
    left.put(nb, np.where(right_new, y, np.where(left_new & ~_flat(pending).take(nb), old + y, old)))


def _attempts_now(first: NDArray[np.float64], cur: NDArray[np.float64], born: NDArray[np.float64],
                  ta: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The counts of :func:`_count_attempts` ((left, right), (hops, cycles) planes) for cycles in
    which no pair has been lost: each hop has then started at most one sequence, the current one
    (``first``, ``cur`` rounds, its pair born at ``born``; no rounds: none yet), and a qubit's
    count is its neighbour's rounds after its birth, whichever hop was granted first (a hop with
    no sequence yet counts none)."""
    left, right = np.zeros_like(born), np.zeros_like(born)
    has = cur > 0
    np.copyto(right[:-1], _rounds_after(first[1:], ta[1:, None], cur[1:], born[:-1]), where=has[:-1])
    np.copyto(left[1:], _rounds_after(first[:-1], ta[:-1, None], cur[:-1], born[1:]), where=has[1:])
    return left, right


def _rounds_after(start_s: NDArray[np.float64], period_s: NDArray[np.float64], k: NDArray[np.float64],
                  after_s: NDArray[np.float64]) -> NDArray[np.float64]:
    """How many of the rounds start + m period (m = 0 .. k - 1) begin strictly after ``after``
    (a round starting with it, to 1e-9 of a period, does not count: the qubit's own round)."""
    t = np.subtract(after_s, start_s)   # in place from here: the same operations, fewer temporaries
    t /= period_s
    t += 1e-9
    np.floor(t, out=t)
    t += 1.0
    np.maximum(0.0, t, out=t)
    np.subtract(k, t, out=t)
    return np.maximum(0.0, t, out=t)


def _run_mask(held: NDArray[np.bool_], hop: NDArray[np.int64], cols: NDArray[np.int64]) -> NDArray[np.bool_]:
    """Per row, the maximal run of held hops containing ``hop`` (rows of ``held``, (M, n); ``cols`` 0 .. n - 1)."""
    n = len(cols)
    gap = ~held
    left_gap = np.where(gap & (cols < hop[:, None]), cols, -1).max(axis=1)
    right_gap = np.where(gap & (cols > hop[:, None]), cols, n).min(axis=1)
    return (cols > left_gap[:, None]) & (cols < right_gap[:, None])
