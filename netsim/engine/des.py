"""The simpy event engine: demands contending for memory slots, swap failures, cut-offs,
purification.

Model (every rule here is mirrored by :mod:`netsim.engine.vector` where that engine applies):

- **Cycles and reservations.** Each demand runs in cycles under a path reservation granted by
  the :class:`SlotBroker` (see :mod:`netsim.engine.policies`).
- **Heralded generation with event skipping.** A hop with free slots at both ends draws the
  number of rounds K ~ Geometric(p_round) (p_round = 1 - (1 - p)^M) and the clock jumps to the
  herald: its successful round starts at b = start + (K - 1) T and both ends know at b + h. Its
  next round may not start before b + T. One event per success, none per failed attempt.
- **Shared fibre.** A fibre link carries one attempt sequence at a time (all of its modes serve
  that sequence): a hop whose light path uses a link another demand is attempting on starts once
  that sequence has heralded, first come, first served. A link's busy time therefore never
  exceeds the simulated time.
- **Communication qubits.** A site with ``communication_qubits`` c has c optical interfaces: a
  hop attempts only while it holds one at each such end, from the start of its attempts until
  its pair is heralded and moved to memory (``memory_transfer_s``, the larger of the two ends;
  the pair is usable from then on). Interfaces are granted atomically (all of a hop's ends at
  once, so no deadlock), greedily in request order: a request that fits is granted at once even
  when an earlier one still waits.
- **Attempt dephasing.** Every attempt sequence is logged at its two sites; a qubit stored at a
  site with ``attempt_dephasing`` is dephased per attempt started there while it waits, by any
  hop of any demand (:mod:`netsim.engine.history`).
- **Storage.** A qubit's storage time runs from the start of its successful round (the memory
  holds it while the herald travels) until it is Bell-measured or delivered. Decoherence is
  lazy: only the times are recorded and states are computed once, in
  :func:`netsim.engine.history.pair_states` -- except for purification, which needs the state
  and brings both pairs up to date exactly (:func:`netsim.qinfo.decohere`) when it happens.
- **Swapping.** An inner site swaps (after the swap policy's delay) as soon as it holds both of its
  qubits; with the site's ``bsm_success_probability`` the two segments join, else both are lost:
  the site's slots free at once, the far ends' slots when the failure message reaches them
  (c / 1.468). Sites decide on what they know at the moment (a site does not swap a segment whose
  failure message is still travelling to it; documented simplification).
- **Delivery.** A segment spanning both users is delivered when both know every herald and swap
  outcome: max over its swaps of (swap time + message time to each user), messages relayed along
  the chain. Users consume on delivery; their qubits decohere until then.
- **Cut-off.** A segment whose oldest link pair started more than ``cutoff_s`` ago, and that is not
  yet complete, is discarded; each site runs the same timer, so its slots free at that moment.
- **Purification.** With ``rounds`` r >= 1 a hop keeps one stored pair per level (binary
  recurrence, r + 1 slots per hop end); two pairs of one level are purified (BBPSSW or DEJMPS)
  when the second arrives, the outcome is known at both ends one message time later, the kept
  pair rises a level on success and both are lost on failure. The hop hands a level-r pair to the
  chain. Stored lower-level pairs are not subject to the cut-off.
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Callable, Generator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import simpy
from numpy.typing import NDArray

from netsim import qinfo
from netsim.engine.chain import Chain
from netsim.engine.history import History, dephase, pair_states, rounds_between
from netsim.engine.metrics import ChainRun, StopRule
from netsim.engine.policies import (
    SchedulingPolicy,
    SlotBroker,
    SwapPolicy,
    scheduling_policy,
    swap_policy,
)

__all__ = ["DesOptions", "simulate_des"]

LEFT, RIGHT = 0, 1
#: Recorded histories are turned into states in batches of this many (bounded memory).
FLUSH_ROWS = 20_000
#: The attempt log of sites with attempt dephasing is pruned at a flush once it holds this many.
PRUNE_SEQUENCES = 50_000


@dataclass(frozen=True)
class DesOptions:
    """Protocol choices of an event-engine run (from :class:`netsim.scenario.model.Protocol`)."""

    cutoff_s: float | None = None
    purification: str = "none"
    purification_rounds: int = 0
    scheduling: str | SchedulingPolicy = "fair"
    swap_policy: str | SwapPolicy = "asap"
    log_pairs: bool = False


@dataclass
class _Pair:
    """A heralded link pair of hop ``hop`` whose state is valid from ``start``."""

    hop: int
    start: float
    herald: float
    state_id: int = 0
    end: list[float] = field(default_factory=lambda: [math.nan, math.nan])
    fate: str = ""


@dataclass
class _Seg:
    """A run of joined link pairs from site ``lo`` to site ``hi``."""

    lo: int
    hi: int
    pairs: list[_Pair]
    info_lo: float
    info_hi: float
    deadline: float
    alive: bool = True


class _Lane:
    """One demand's state inside an event-engine run."""

    def __init__(self, chain: Chain, rng: np.random.Generator, slots_per_end: int) -> None:
        n = chain.n_hops
        self.chain, self.rng = chain, rng
        self.run = ChainRun.zeros(n, engine="des")
        self.next_round = np.zeros(n)
        self.busy = [[False, False] for _ in range(n)]
        self.attempting = [False] * n
        self.need_pair = [True] * n
        self.last_delivery_s = 0.0
        self.left_seg: list[_Seg | None] = [None] * (n + 1)
        self.right_seg: list[_Seg | None] = [None] * (n + 1)
        self.cycle_done: simpy.Event | None = None
        self.rows: list[tuple[float, list[float], list[float], list[int], list[float]]] = []
        self.extra: list[list[NDArray[np.complex128]]] = [[] for _ in range(n)]
        self.log: list[_Pair] = []
        self.need = _path_need(chain, slots_per_end)
        self.stacks: list[dict[int, tuple[_Pair, NDArray[np.complex128]]]] = [{} for _ in range(n)]


def _path_need(chain: Chain, per_end: int) -> dict[str, int]:
    need: dict[str, int] = {}
    for i in range(chain.n_hops):
        for site in (chain.sites[i], chain.sites[i + 1]):
            need[site.name] = need.get(site.name, 0) + per_end
    return need


class _Des:
    """One event-engine run over a group of demands that share memory sites."""

    def __init__(self, chains: list[Chain], rngs: list[np.random.Generator], capacity: dict[str, int],
                 rules: list[StopRule], options: DesOptions) -> None:
        self.env = simpy.Environment()
        self.rules, self.opt = rules, options
        self.cutoff = math.inf if options.cutoff_s is None else float(options.cutoff_s)
        self.rounds = int(options.purification_rounds) if options.purification != "none" else 0
        self.purify: Callable[..., Any] | None = (
            qinfo.purify_dejmps if options.purification == "dejmps" else qinfo.purify_bbpssw) if self.rounds else None
        self.swapping = swap_policy(options.swap_policy)
        self.broker = SlotBroker(self.env, capacity, scheduling_policy(options.scheduling))
        self.lanes = [_Lane(c, r, self.rounds + 1) for c, r in zip(chains, rngs)]
        self.link_free_s: dict[str, float] = {}
        self.finished = self.env.event()
        sites = {site.name: site for lane in self.lanes for site in lane.chain.sites}
        self.iface_free = {name: int(site.communication_qubits) for name, site in sites.items()
                           if site.communication_qubits is not None}
        self.iface_queue: list[tuple[list[str], simpy.Event]] = []
        #: per site with attempt dephasing: sorted (start, period, rounds) of its attempt sequences
        self.sequences: dict[str, list[tuple[float, float, int]]] = {
            name: [] for name, site in sites.items() if site.attempt_dephasing > 0}
        self.longest_s: dict[str, float] = dict.fromkeys(self.sequences, 0.0)

    # -- cycles -----------------------------------------------------------------------------
    def demand(self, lane: _Lane) -> Generator[simpy.Event, Any, None]:
        while True:
            yield self.broker.request(lane.chain.index, lane.need)
            lane.cycle_done = self.env.event()
            lane.busy = [[False, False] for _ in range(lane.chain.n_hops)]
            lane.need_pair = [True] * lane.chain.n_hops
            for i in range(lane.chain.n_hops):
                self.maybe_start(lane, i)
            yield lane.cycle_done
            self.broker.release(lane.need)

    def hop(self, lane: _Lane, i: int) -> Generator[simpy.Event, Any, None]:
        """Generate (and purify) until hop ``i`` hands a pair to the chain."""
        lane.attempting[i] = True
        stack: dict[int, tuple[_Pair, NDArray[np.complex128]]] = {}
        lane.stacks[i] = stack
        pair: _Pair | None = None
        ends = [site.name for site in lane.chain.sites[i:i + 2] if site.name in self.iface_free]
        while pair is None:
            if ends:
                yield self.acquire(ends)
            raw = yield from self.attempt(lane, i)
            if lane.chain.transfer_s[i] > 0:
                yield self.env.timeout(float(lane.chain.transfer_s[i]))
            if ends:
                self.release(ends)
            pair = raw if not self.rounds else (yield from self.climb(lane, i, raw, stack))
        lane.attempting[i] = False
        lane.need_pair[i] = False
        lane.busy[i] = [True, True]
        seg = _Seg(i, i + 1, [pair], self.env.now, self.env.now, pair.start + self.cutoff)
        self.add_segment(lane, seg)

    def attempt(self, lane: _Lane, i: int) -> Generator[simpy.Event, Any, _Pair]:
        c = lane.chain
        links = c.hops[i].links
        start = max(self.env.now, float(lane.next_round[i]), *(self.link_free_s.get(name, 0.0) for name in links))
        k = int(lane.rng.geometric(c.p[i]))
        born = start + (k - 1) * float(c.period_s[i])
        for name in links:
            self.link_free_s[name] = born + float(c.period_s[i])
        for site in c.sites[i:i + 2]:
            if site.name in self.sequences:
                bisect.insort(self.sequences[site.name], (start, float(c.period_s[i]), k))
                self.longest_s[site.name] = max(self.longest_s[site.name], (k - 1) * float(c.period_s[i]))
        yield self.env.timeout(born + float(c.herald_s[i]) - self.env.now)
        lane.next_round[i] = born + float(c.period_s[i])
        lane.run.hop_attempts[i] += k
        lane.run.hop_successes[i] += 1
        lane.run.hop_busy_s[i] += k * float(c.period_s[i])
        pair = _Pair(i, born, self.env.now)
        if self.opt.log_pairs:
            lane.log.append(pair)
        return pair

    # -- optical interfaces and attempt counts -------------------------------------------------
    def acquire(self, ends: list[str]) -> simpy.Event:
        """An event granted when one interface at every site of ``ends`` is free (atomically)."""
        event = self.env.event()
        self.iface_queue.append((ends, event))
        self._grant()
        return event

    def release(self, ends: list[str]) -> None:
        for name in ends:
            self.iface_free[name] += 1
        self._grant()

    def _grant(self) -> None:
        waiting = []
        for ends, event in self.iface_queue:
            if all(self.iface_free[name] > 0 for name in ends):
                for name in ends:
                    self.iface_free[name] -= 1
                event.succeed()
            else:
                waiting.append((ends, event))
        self.iface_queue = waiting

    def attempts_at(self, site: str, after_s: float, until_s: float) -> int:
        """Attempts started at ``site`` in (after_s, until_s) by any hop of any demand."""
        seqs = self.sequences.get(site)
        if not seqs:
            return 0
        lo = bisect.bisect_left(seqs, (after_s - self.longest_s[site] - 1e-9,))
        hi = bisect.bisect_right(seqs, (until_s, math.inf, math.inf))
        if hi <= lo:
            return 0
        arr = np.array(seqs[lo:hi], dtype=float)
        return int(rounds_between(arr[:, 0], arr[:, 1], arr[:, 2], after_s, until_s).sum())

    # -- segments, swaps, delivery ------------------------------------------------------------
    def add_segment(self, lane: _Lane, seg: _Seg) -> None:
        lane.right_seg[seg.lo] = seg
        lane.left_seg[seg.hi] = seg
        if seg.lo == 0 and seg.hi == lane.chain.n_hops:
            self.deliver(lane, seg)
            return
        if math.isfinite(seg.deadline):
            self.env.process(self.cutoff_watch(lane, seg))
        for j in (seg.lo, seg.hi):
            if 0 < j < lane.chain.n_hops and lane.left_seg[j] and lane.right_seg[j]:
                delay = self.swapping.swap_delay_s(j, lane.chain.n_hops, self.env.now)
                self.env.process(self.swap(lane, j, delay))

    def swap(self, lane: _Lane, j: int, delay: float) -> Generator[simpy.Event, Any, None]:
        if delay > 0:
            yield self.env.timeout(delay)
        left, right = lane.left_seg[j], lane.right_seg[j]
        if not (left and right and left.alive and right.alive):
            return
        now, c = self.env.now, lane.chain
        left.alive = right.alive = False
        lane.left_seg[j] = lane.right_seg[j] = None
        left.pairs[-1].end[RIGHT] = right.pairs[0].end[LEFT] = now
        success = bool(lane.rng.random() < c.swap_success(j))
        if not success:
            self.mark_lost(lane, left.pairs + right.pairs)
        self.free_slot(lane, j - 1, RIGHT, now)
        self.free_slot(lane, j, LEFT, now)
        if success:
            left.pairs[-1].fate = right.pairs[0].fate = "swapped"
            # outcomes known at j (this swap, and what j learnt of each side) travel on to the
            # far ends: the joined pair's ends know everything at these times
            to_lo, to_hi = c.delay_s(j, left.lo), c.delay_s(j, right.hi)
            joined = _Seg(left.lo, right.hi, left.pairs + right.pairs,
                          max(left.info_lo, now + to_lo, right.info_lo + to_lo),
                          max(right.info_hi, now + to_hi, left.info_hi + to_hi),
                          min(left.deadline, right.deadline))
            self.add_segment(lane, joined)
            return
        lane.run.swap_failures[j] += 1
        for p in left.pairs + right.pairs:
            p.fate = "swap_failed"
        self.drop(lane, left, now + c.delay_s(j, left.lo), None)
        self.drop(lane, right, None, now + c.delay_s(j, right.hi))

    def drop(self, lane: _Lane, seg: _Seg, lo_time: float | None, hi_time: float | None) -> None:
        """Forget ``seg``; its end slots free at the given times (None: not this end)."""
        seg.alive = False
        if lo_time is not None:
            lane.right_seg[seg.lo] = None
            seg.pairs[0].end[LEFT] = lo_time
            self.free_slot(lane, seg.lo, LEFT, lo_time)
        if hi_time is not None:
            lane.left_seg[seg.hi] = None
            seg.pairs[-1].end[RIGHT] = hi_time
            self.free_slot(lane, seg.hi - 1, RIGHT, hi_time)
        for p in seg.pairs:  # lost pairs held their slots too (delivered ones count in flush)
            self.held(lane, p, p.end[LEFT], p.end[RIGHT])

    @staticmethod
    def held(lane: _Lane, pair: _Pair, left_until: float, right_until: float) -> None:
        """Add the qubit-seconds ``pair`` spent in its two memories to the site occupancy."""
        lane.run.site_qubit_s[pair.hop] += left_until - pair.start
        lane.run.site_qubit_s[pair.hop + 1] += right_until - pair.start

    def cutoff_watch(self, lane: _Lane, seg: _Seg) -> Generator[simpy.Event, Any, None]:
        yield self.env.timeout(max(0.0, seg.deadline - self.env.now))
        if not seg.alive:
            return
        for p in seg.pairs:
            p.fate = "discarded"
            lane.run.hop_discards[p.hop] += 1
        self.mark_lost(lane, seg.pairs)
        self.drop(lane, seg, self.env.now, self.env.now)

    def mark_lost(self, lane: _Lane, pairs: list[_Pair]) -> None:
        """The hops of lost pairs must make new ones (once their slots are free)."""
        for p in pairs:
            lane.need_pair[p.hop] = True
            self.maybe_start(lane, p.hop)

    def free_slot(self, lane: _Lane, i: int, side: int, when: float) -> None:
        if when > self.env.now:
            self.env.process(self._free_later(lane, i, side, when))
            return
        lane.busy[i][side] = False
        self.maybe_start(lane, i)

    def maybe_start(self, lane: _Lane, i: int) -> None:
        """Start hop ``i`` if it needs a pair, its slots are free and its cycle is running."""
        active = lane.cycle_done is not None and not lane.cycle_done.triggered
        if active and lane.need_pair[i] and not any(lane.busy[i]) and not lane.attempting[i]:
            self.env.process(self.hop(lane, i))

    def _free_later(self, lane: _Lane, i: int, side: int, when: float) -> Generator[simpy.Event, Any, None]:
        yield self.env.timeout(when - self.env.now)
        self.free_slot(lane, i, side, when)

    def deliver(self, lane: _Lane, seg: _Seg) -> None:
        t_d = max(seg.info_lo, seg.info_hi)
        seg.alive = False
        lane.right_seg[0] = lane.left_seg[lane.chain.n_hops] = None
        seg.pairs[0].end[LEFT] = seg.pairs[-1].end[RIGHT] = t_d
        for p in seg.pairs:
            p.fate = p.fate or "delivered"
        lane.rows.append((t_d, [p.end[LEFT] - p.start for p in seg.pairs],
                          [p.end[RIGHT] - p.start for p in seg.pairs], [p.state_id for p in seg.pairs],
                          [p.start for p in seg.pairs]))
        self.env.process(self._close_cycle(lane, t_d))

    def _close_cycle(self, lane: _Lane, t_d: float) -> Generator[simpy.Event, Any, None]:
        yield self.env.timeout(t_d - self.env.now)
        lane.run.add_intervals(np.array([t_d]), lane.last_delivery_s)
        lane.last_delivery_s = t_d
        if len(lane.rows) >= FLUSH_ROWS:
            limit = self.rules[self.lanes.index(lane)].time_s
            self.flush(lane, min(self.env.now, math.inf if limit is None else float(limit)))
        if lane.cycle_done is not None:
            lane.cycle_done.succeed()
        self.check_finished()

    def check_finished(self) -> None:
        if not self.finished.triggered and all(r.done(ln.run, self.env.now) for r, ln in zip(self.rules, self.lanes)):
            self.finished.succeed()

    def timer(self, t: float) -> Generator[simpy.Event, Any, None]:
        yield self.env.timeout(t)
        self.check_finished()

    # -- purification -------------------------------------------------------------------------
    def climb(self, lane: _Lane, i: int, raw: _Pair,
              stack: dict[int, tuple[_Pair, NDArray[np.complex128]]]) -> Generator[simpy.Event, Any, _Pair | None]:
        """Put a raw pair on hop ``i``'s recurrence stack; return a level-r pair when one forms."""
        c = lane.chain
        item, rho, level = raw, c.link_states[i], 0
        while level in stack:
            other, other_rho = stack.pop(level)
            now = self.env.now
            p, out = self.purify(self.bring(c, i, other_rho, other.start, now),  # type: ignore[misc]
                                 self.bring(c, i, rho, item.start, now))
            yield self.env.timeout(c.delay_s(i, i + 1))
            self.held(lane, item, now, now)  # pair 2 is measured at once
            if lane.rng.random() >= float(p):
                lane.run.purification_failures[i] += 1
                self.held(lane, other, self.env.now, self.env.now)  # pair 1 waits for the outcome
                return None
            self.held(lane, other, now, now)  # the kept pair lives on as a new pair from now
            item, rho, level = _Pair(i, now, self.env.now), np.asarray(out), level + 1
            if level == self.rounds:
                lane.extra[i].append(rho)
                item.state_id = len(lane.extra[i])
                return item
        stack[level] = (item, rho)
        return None

    def bring(self, c: Chain, i: int, rho: NDArray[np.complex128], start_s: float, now_s: float) -> NDArray[np.complex128]:
        """Hop ``i``'s pair, valid from ``start_s``, brought up to date at ``now_s`` (exact): memory
        decay and the attempt dephasing of both ends."""
        left, right = c.sites[i], c.sites[i + 1]
        rho = qinfo.decohere(rho, now_s - start_s, left.t1_s, left.t2_s, qubit=0)
        rho = qinfo.decohere(rho, now_s - start_s, right.t1_s, right.t2_s, qubit=1)
        for qubit, site in ((0, left), (1, right)):
            if site.attempt_dephasing > 0:
                k = self.attempts_at(site.name, start_s, now_s)
                rho = dephase(np.asarray(rho)[None], (1.0 - site.attempt_dephasing) ** k, qubit)[0]
        return rho

    # -- running ------------------------------------------------------------------------------
    def run(self) -> list[ChainRun]:
        for lane in self.lanes:
            self.env.process(self.demand(lane))
        for rule in self.rules:
            if rule.time_s is not None:
                self.env.process(self.timer(float(rule.time_s)))
        interrupted = False
        try:
            self.env.run(until=self.finished)
        except KeyboardInterrupt:
            interrupted = True
        out = []
        for rule, lane in zip(self.rules, self.lanes):
            timed = rule.time_s is not None and not interrupted
            out.append(self.finish(lane, float(rule.time_s) if timed else self.env.now, interrupted))  # type: ignore[arg-type]
        return out

    def finish(self, lane: _Lane, now: float, interrupted: bool) -> ChainRun:
        self.flush(lane, now)
        lane.run.simulated_time_s = now
        lane.run.interrupted = interrupted
        return lane.run

    def flush(self, lane: _Lane, upto: float) -> None:
        """Turn the recorded histories delivered by ``upto`` into states and figures."""
        ready = sorted(r for r in lane.rows if r[0] <= upto)
        lane.rows = [r for r in lane.rows if r[0] > upto]
        n, run = lane.chain.n_hops, lane.run
        for lo in range(0, len(ready), 20_000):
            part = ready[lo:lo + 20_000]
            hist = History(np.array([r[0] for r in part]), np.array([r[1] for r in part]),
                           np.array([r[2] for r in part]), np.array([r[3] for r in part], dtype=np.int64),
                           lane.extra)
            self.count_attempts(lane, hist, [r[4] for r in part])
            run.metrics.add(pair_states(lane.chain, hist), hist.delivered_s)
            run.site_qubit_s[:n] += hist.store_left_s.sum(axis=0)
            run.site_qubit_s[1:] += hist.store_right_s.sum(axis=0)
        self.prune_sequences()


    def count_attempts(self, lane: _Lane, hist: History, starts: list[list[float]]) -> None:
        """Fill ``hist.attempts_left/right`` where a site of the chain has attempt dephasing (at
        flush time every attempt up to the deliveries is logged)."""
        c = lane.chain
        if not any(site.name in self.sequences for site in c.sites):
            return
        left, right = np.zeros(hist.store_left_s.shape), np.zeros(hist.store_right_s.shape)
        for row, begin in enumerate(starts):
            for i, t0 in enumerate(begin):
                left[row, i] = self.attempts_at(c.sites[i].name, t0, t0 + hist.store_left_s[row, i])
                right[row, i] = self.attempts_at(c.sites[i + 1].name, t0, t0 + hist.store_right_s[row, i])
        hist.attempts_left, hist.attempts_right = left, right

    def prune_sequences(self) -> None:
        """Forget attempt sequences that ended before the oldest qubit still stored anywhere
        (in a segment, a purification stack, a row not yet flushed; or between those while it is
        moved to memory or a purification outcome travels: younger than herald + transfer + the
        chain's end-to-end message time)."""
        if not self.sequences or sum(len(v) for v in self.sequences.values()) < PRUNE_SEQUENCES:
            return
        oldest = self.env.now - max(float(ln.chain.ready_s.max() + ln.chain.position_s[-1]) for ln in self.lanes)
        for ln in self.lanes:
            segs = [seg for seg in ln.left_seg + ln.right_seg if seg is not None]
            starts = [p.start for seg in segs for p in seg.pairs]
            starts += [t for row in ln.rows for t in row[4]]
            starts += [item.start for stack in ln.stacks for item, _ in stack.values()]
            oldest = min([oldest, *starts])
        for site, seqs in self.sequences.items():
            self.sequences[site] = [q for q in seqs if q[0] + (q[2] - 1) * q[1] >= oldest - 1e-9]


def simulate_des(chains: list[Chain], rule: StopRule | list[StopRule], rngs: list[np.random.Generator],
                 options: DesOptions | None = None, capacity: dict[str, int] | None = None) -> tuple[list[ChainRun], list[list[Any]]]:
    """Run the event engine on demands that may share memory sites.

    Parameters
    ----------
    chains : list of Chain
    rule : StopRule or list of StopRule (one per chain)
        The run goes on until every demand has met its rule (with ``pairs``, demands that are done
        keep running and contending until the last one has its pairs); a demand stopped by
        ``time_s`` reports the pairs delivered by then.
    rngs : list of numpy.random.Generator
        One stream per chain.
    options : DesOptions
    capacity : dict, optional
        Memory slots per site name; defaults to each site's ``memory_slots``.

    Returns
    -------
    (runs, logs)
        One :class:`ChainRun` per chain, and per chain the list of link pairs made when
        ``options.log_pairs`` (each with ``hop``, ``start``, ``herald``, ``end``, ``fate``).
    """
    options = options or DesOptions()
    if capacity is None:
        capacity = {s.name: int(s.memory_slots) for c in chains for s in c.sites}
    rules = rule if isinstance(rule, list) else [rule] * len(chains)
    sim = _Des(chains, rngs, capacity, rules, options)
    _check_capacity(sim, capacity)
    runs = sim.run()
    return runs, [lane.log for lane in sim.lanes]


def _check_capacity(sim: _Des, capacity: dict[str, int]) -> None:
    from netsim.errors import ParameterError

    for lane in sim.lanes:
        for site, k in lane.need.items():
            if capacity.get(site, 0) < k:
                raise ParameterError(f"sites[{site}].memory_slots", capacity.get(site, 0),
                                     f"at least {k} for demand {lane.chain.name} "
                                     f"({sim.rounds + 1} slot(s) per hop end)")
