"""The simpy event engine: demands contending for memory slots, swap failures, cut-offs,
purification.

Model (every rule here is mirrored by :mod:`netsim.engine.vector` where that engine applies):

- **Cycles and reservations.** Each demand runs in cycles under a path reservation granted by
  the :class:`SlotBroker` (see :mod:`netsim.engine.policies`).
- **Heralded generation with event skipping.** A hop with free slots at both ends draws the
  number of rounds K ~ Geometric(p_round) (p_round = 1 - (1 - p)^M) and the clock jumps to the
  herald: its successful round starts at b = start + (K - 1) T and both ends know at b + h. Its
  next round may not start before b + T. One event per success (at b + h + the memory transfer
  time), none per failed attempt.
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

import gc
import math
import struct
from array import array
from heapq import heappop, heappush
from collections.abc import Callable, Mapping, Sequence
from typing import Any, Final, SupportsInt

import numpy as np
import simpy
from simpy.events import NORMAL
from numpy.typing import NDArray

from netsim import qinfo
from netsim.engine.chain import Chain
from netsim.engine.history import History, pair_states, rounds_between
from netsim.engine.metrics import ChainRun, StopRule, pair_figures
from netsim.engine.options import DesOptions
from netsim.engine.policies import (
    SlotBroker,
    scheduling_policy,
    swap_policy,
)

__all__ = ["DesOptions", "simulate_des"]

LEFT, RIGHT = 0, 1
# The constants are Final: the compiled build reads them as C constants, not from the module's
# dict on every use (the tests that change one patch the plain-Python engine).
#: Recorded histories are turned into states in batches of this many (bounded memory).
FLUSH_ROWS: Final = 20_000
#: States are made in chunks of this many pairs per lane, and their figures computed in batches
#: of about this many pairs across lanes (bounded memory).
STATE_CHUNK: Final = 20_000
#: Per-hop row values a lane stages as boxed lists before packing them into blocks (about 2 kB
#: per lane at most: 100 lanes' stages stay small beside their hops' state in the core's cache;
#: under callgrind's model of a 2 MiB cache, 16 rather than 64 halved the event loop's misses on
#: a 10x10 grid with 100 demands for 1.4 % more instructions)
ROW_STAGE: Final = 16
#: The attempt log of sites with attempt dephasing is pruned at a flush once it holds this many.
PRUNE_SEQUENCES: Final = 50_000
#: Attempt sequences a site's log holds apart from the sorted whole before they are merged in.
RECENT_ROWS: Final = 4096
#: At most this many attempt sequences logged since the last read are counted where they lie.
PENDING_SCAN: Final = 64
#: Uniform draws are taken from a lane's stream this many at a time (the stream gives the same
#: numbers in blocks of any size; a small block keeps 100 lanes' buffered draws in cache).
UNIFORM_BLOCK: Final = 64
#: Attempt sequences not yet filed are moved from a list into an array this many values at a time.
LOG_BLOCK: Final = 4 * 1024


class _Pair:
    """A heralded link pair of hop ``hop`` whose state is valid from ``start``; ``end_left`` and
    ``end_right`` hold the times its left and right qubits were Bell-measured, delivered or
    dropped (``end`` gives both)."""

    __slots__ = ("end_left", "end_right", "fate", "herald", "hop", "start", "state_id")

    def __init__(self, hop: int, start: float, herald: float) -> None:
        self.hop, self.start, self.herald = hop, start, herald
        self.state_id = 0
        self.end_left = self.end_right = math.nan
        self.fate = ""

    @property
    def end(self) -> list[float]:
        """[left, right]: the times its two qubits left memory."""
        return [self.end_left, self.end_right]

    def __repr__(self) -> str:
        return (f"_Pair(hop={self.hop}, start={self.start}, herald={self.herald}, end={self.end}, "
                f"fate={self.fate!r})")


class _Wait:
    """A hop waiting for an optical interface at each site of ``ends``, filed under each of them
    (an entry granted through one site is skipped and dropped at the others)."""

    __slots__ = ("ends", "hop", "lane", "sequence", "waiting")

    def __init__(self, sequence: int, ends: list[int], lane: _Lane, hop: int) -> None:
        self.sequence, self.ends, self.lane, self.hop = sequence, ends, lane, hop
        self.waiting = True


def _merged(a: list[_Wait], b: list[_Wait]) -> list[_Wait]:
    """Two lists in request order merged into one (the order ``sorted`` by sequence gives: from
    ``a`` first on equal sequences, i.e. an entry filed under both sites comes twice)."""
    out: list[_Wait] = []
    i = j = 0
    while i < len(a) and j < len(b):
        if b[j].sequence < a[i].sequence:
            out.append(b[j])
            j += 1
        else:
            out.append(a[i])
            i += 1
    out.extend(a[i:])
    out.extend(b[j:])
    return out


class _Seg:
    """A run of joined link pairs from site ``lo`` to site ``hi``."""

    __slots__ = ("alive", "deadline", "hi", "info_hi", "info_lo", "lo", "pairs")

    def __init__(self, lo: int, hi: int, pairs: list[_Pair], info_lo: float, info_hi: float,
                 deadline: float) -> None:
        self.lo, self.hi, self.pairs = lo, hi, pairs
        self.info_lo, self.info_hi, self.deadline = info_lo, info_hi, deadline
        self.alive = True


class _Call:
    """An engine event: ``fn(*args)`` called at ``time``. The engine keeps these on its own queue
    (:meth:`_Des.schedule`), in the order simpy keeps its events in: by time, then by the event
    counter it shares with simpy (every engine event has simpy's ``NORMAL`` priority). It is also
    a bare simpy event (``callbacks``, ``fire``): put on simpy's queue instead, simpy's own
    ``Environment.step`` processes it with the same outcome (a test runs both). The engine's loop
    calls the handlers of the two commonest kinds directly (``kind``), with no argument tuple."""

    __slots__ = ("args", "callbacks", "fn", "index", "kind", "lane", "owner", "seq", "time")
    _ok = True
    _value = None

    def __init__(self, owner: _Des, fn: Callable[..., None], args: tuple[Any, ...], time: float,
                 kind: int = 0, lane: _Lane | None = None, index: int = 0) -> None:
        self.owner, self.fn, self.args, self.time = owner, fn, args, time
        #: its place among events at the same time: the shared event counter's value when scheduled
        self.seq = 0
        self.callbacks: list[Callable[[Any], None]] | None = _FIRE  # shared: simpy only reads and then drops the list
        #: what the engine's loop calls for it directly (_Des.step_until_finished): 0, ``fn(*args)``;
        #: TRANSFERRED or CLOSING, that handler of ``lane`` (hop ``index``) with no argument tuple
        #: or generic call (``fn`` and ``args`` then make the same call, for a generic simpy step)
        self.kind = kind
        self.lane = lane
        self.index = index

    @staticmethod
    def fire(event: _Call) -> None:
        event.owner.now = event.time
        fn = event.fn  # (read first: a call through the attribute is a generic lookup when compiled)
        fn(*event.args)


def _push_call(heap: list[_Call], event: _Call) -> None:
    """Put ``event`` on the binary heap ``heap`` (ordered by time, then ``seq``). Its ``seq`` is
    the largest yet, so it goes above exactly the events of a later time."""
    heap.append(event)
    when = event.time
    pos = len(heap) - 1
    while pos > 0:
        parent = (pos - 1) >> 1
        above = heap[parent]
        if above.time <= when:
            break
        heap[pos] = above
        pos = parent
    heap[pos] = event


def _pop_call(heap: list[_Call]) -> _Call:
    """Take the first event (least time, then least ``seq``) off the non-empty heap ``heap``."""
    last = heap.pop()
    n = len(heap)
    if n == 0:
        return last
    first = heap[0]
    when, seq = last.time, last.seq
    pos = 0
    child = 1
    while child < n:
        below = heap[child]
        right = child + 1
        if right < n:
            other = heap[right]
            if other.time < below.time or (other.time == below.time and other.seq < below.seq):
                child, below = right, other
        if when < below.time or (when == below.time and seq < below.seq):
            break
        heap[pos] = below
        pos = child
        child = 2 * pos + 1
    heap[pos] = last
    return first


def _simpy_later(entry: Any, call: _Call) -> bool:
    """Whether simpy's queue entry ``entry`` (time, priority, counter, event) comes after ``call``
    (simpy's ``NORMAL`` priority, its own time and ``seq``)."""
    when, priority = float(entry[0]), int(entry[1])
    if when != call.time:
        return when > call.time
    if priority != _NORMAL:
        return priority > _NORMAL
    return int(entry[2]) > call.seq


#: _Call kinds: a hop's pair heralded and in memory (_Des.transferred; args (lane, hop)), a lane's
#: cycle closing after a delivery (_Des.close_cycle; args (lane,))
TRANSFERRED: Final = 1
CLOSING: Final = 2


_FIRE: Final[list[Callable[[Any], None]]] = [_Call.fire]
_PUSH: Final = heappush
_POP: Final = heappop
#: Whether the engine keeps its events on its own heap of :class:`_Call` objects (_push_call,
#: _pop_call): in the compiled build, where comparing two of them reads two unboxed fields, while
#: simpy's 4-tuples go through the interpreter's generic tuple comparison (simpy's heap was 20 % of
#: the event loop on a 10x10 grid with 100 demands, and a larger share the more demands; a pop took
#: about 2,600 instructions and a push 1,200 there, 820 and 320 on this heap). The plain-Python
#: engine puts them on simpy's queue, where heapq's C code orders tuples faster than a heap
#: written in Python would.
OWN_QUEUE: Final = not __file__.endswith(".py")


class _Serial:
    """simpy's event counter (``Environment._eid``, which breaks ties between events at the same
    time and priority) as an object the engine counts with directly: ``next()`` gives 0, 1, 2,
    ... as the ``itertools.count`` it replaces, and the engine takes the next value from
    ``value`` without a call."""

    __slots__ = ("value",)

    def __init__(self) -> None:
        self.value = 0

    def __iter__(self) -> _Serial:
        return self

    def __next__(self) -> object:  # (object: mypyc's slot for an int-returning __next__ does not compile)
        value = self.value
        self.value = value + 1
        return value


_NORMAL: Final = NORMAL  # simpy's priority of an ordinary event


class _Hop:
    """One hop of a lane: what an attempt reads, the hop's state and its counts, in one object.

    The compiled build keeps these fields unboxed in the object itself, so an event touches a few
    cache lines of it; kept as ~20 per-hop lists of boxed numbers, each field cost a line or two,
    and with 100 demands that state no longer fits in the core's cache."""

    __slots__ = ("attempting", "attempts", "busy_left", "busy_right", "busy_s", "discards", "end_set",
                 "flight_born", "flight_k", "herald", "iface_ends", "links", "log_fail", "need_pair",
                 "next_round", "p", "period", "purification_failures", "ready", "successes", "transfer")

    def __init__(self, links: tuple[int, ...], period: float, p: float, herald: float, ready: float,
                 end_set: int, iface_ends: list[int], transfer: _Call) -> None:
        #: indices into _Des.link_free of the fibre links its light path uses
        self.links = links
        # plain floats: numpy scalars are slow in the per-event arithmetic
        self.period, self.p, self.herald, self.ready = period, p, herald, ready
        self.log_fail = math.log1p(-p) if p < 1.0 else 0.0
        #: index of its set of dephasing sites in _Des.end_sets (-1: none)
        self.end_set = end_set
        #: its sites with a limited number of optical interfaces (indices into _Des.iface_free)
        self.iface_ends = iface_ends
        #: the event of its pair in flight (a hop has at most one; simpy is done with an event
        #: once it has called it back, so each attempt reuses it)
        self.transfer = transfer
        self.next_round = 0.0
        self.busy_left = self.busy_right = False  # that end's slot holds a qubit
        self.attempting = False
        self.need_pair = True
        #: a pair not yet heralded and in memory: its successful round and rounds (0: none)
        self.flight_born, self.flight_k = 0.0, 0
        self.attempts = self.successes = self.discards = self.purification_failures = 0
        self.busy_s = 0.0


class _Node:
    """One site of a lane's chain: the live segments ending (``left``) and starting (``right``)
    there, what a swap there reads, and the site's counts."""

    __slots__ = ("left", "pos", "qubit_s", "right", "swap_failures", "swap_p")

    def __init__(self, pos: float, swap_p: float) -> None:
        self.pos, self.swap_p = pos, swap_p
        self.left: _Seg | None = None
        self.right: _Seg | None = None
        self.swap_failures = 0
        self.qubit_s = 0.0


class _Lane:
    """One demand's state inside an event-engine run."""

    def __init__(self, chain: Chain, rng: np.random.Generator, slots_per_end: int, rule: StopRule) -> None:
        n = chain.n_hops
        self.chain, self.rng, self.rule, self.n = chain, rng, rule, n
        self._uniforms: list[float] = []
        self._next_uniform = 0
        self.run = ChainRun.zeros(n, engine="des", min_fidelity=chain.min_fidelity)
        self.last_delivery_s = 0.0
        self.active = False  # a cycle is running under a granted reservation
        #: delivered pairs not yet turned into states, flat: per pair its delivery time, and per
        #: hop (n values a pair) its storage time at the left and right end, its pair's state
        #: index and start. Unboxed: a run may hold every row until its end. The per-hop values
        #: are kept as packed blocks (``d`` and ``q`` native values), joined only when the rows
        #: are read (take_rows): one growing array per lane was copied over and over by realloc
        #: as it grew, which on a 100-demand grid streamed megabytes through the core's cache
        self.row_delivered: array[float] = array("d")
        self.row_left: list[bytes] = []
        self.row_right: list[bytes] = []
        self.row_state: list[bytes] = []
        self.row_start: list[bytes] = []
        #: the per-hop values of the latest rows, boxed, packed into the blocks above ROW_STAGE
        #: at a time (spill_rows): array.extend parses every item as a call argument, which costs
        #: more than a list append and one struct pack per block
        self.stage_left: list[float] = []
        self.stage_right: list[float] = []
        self.stage_state: list[int] = []
        self.stage_start: list[float] = []
        self.extra: list[list[NDArray[np.complex128]]] = [[] for _ in range(n)]
        self.stacks: list[dict[int, tuple[_Pair, NDArray[np.complex128]]]] = [{} for _ in range(n)]
        self.log: list[_Pair] = []
        self.need = path_need(chain, slots_per_end)
        #: ``need`` as the broker's site numbers and counts (SlotBroker.numbered), set by _Des
        self.numbered: tuple[list[int], list[int]] = ([], [])
        self.position = 0
        self.cut_token = 0  # identifies the one pending cut-off timer of this lane
        self.cut_at = math.inf
        #: its cycle's event that closes it after a delivery (made by _Des), and the delivery time
        self.closing: _Call | None = None
        self.delivered_at = 0.0
        #: per hop, its constants, state and counts (made by _Des, which numbers the links and
        #: the limited sites)
        self.hops: list[_Hop] = []
        #: per site of the chain (n + 1)
        self.nodes = [_Node(float(chain.position_s[j]), chain.swap_success(j) if 0 < j < n else 1.0)
                      for j in range(n + 1)]

    def spill_rows(self) -> None:
        """Pack the staged per-hop row values into blocks."""
        k = len(self.stage_left)
        if k:  # struct packs a list of floats about three times faster than numpy or array convert it
            self.row_left.append(struct.pack(f"{k}d", *self.stage_left))
            self.row_right.append(struct.pack(f"{k}d", *self.stage_right))
            self.row_state.append(struct.pack(f"{k}q", *self.stage_state))
            self.row_start.append(struct.pack(f"{k}d", *self.stage_start))
            self.stage_left, self.stage_right, self.stage_state, self.stage_start = [], [], [], []

    def add_counts(self) -> None:
        """Add the hops' and sites' counts to the lane's ChainRun."""
        run = self.run
        run.hop_attempts += [h.attempts for h in self.hops]
        run.hop_successes += [h.successes for h in self.hops]
        run.hop_busy_s += [h.busy_s for h in self.hops]
        run.hop_discards += [h.discards for h in self.hops]
        run.purification_failures += [h.purification_failures for h in self.hops]
        run.swap_failures += [v.swap_failures for v in self.nodes]
        run.site_qubit_s += [v.qubit_s for v in self.nodes]

    def uniform(self) -> float:
        """The lane's next uniform draw in [0, 1) (drawn from its stream in blocks)."""
        if self._next_uniform >= len(self._uniforms):
            self._uniforms = self.rng.random(UNIFORM_BLOCK).tolist()
            self._next_uniform = 0
        self._next_uniform += 1
        return self._uniforms[self._next_uniform - 1]


def _later(a: float, b: float) -> float:
    """``max(a, b)`` of two floats (the builtin goes through generic comparisons when compiled)."""
    return b if b > a else a


def _earlier(a: float, b: float) -> float:
    """``min(a, b)`` of two floats."""
    return b if b < a else a


def _rounds_in(start: float, period: float, k: float, after_s: float, until_s: float) -> int:
    """:func:`netsim.engine.history.rounds_between` for one sequence, in plain Python."""
    lo = max(0.0, math.floor((after_s - start) / period + 1e-9) + 1.0)
    hi = min(k - 1.0, math.ceil((until_s - start) / period - 1e-9) - 1.0)
    return int(max(0.0, hi - lo + 1.0))


def _insert_sorted(filed: NDArray[np.float64], rows: NDArray[np.float64]) -> NDArray[np.float64]:
    """``filed`` and ``rows`` (each sorted by column 0) as one array sorted by column 0, in the
    order of a stable sort of their concatenation (a row of ``rows`` goes after ``filed`` ties)."""
    if not len(filed):
        return rows
    return np.insert(filed, np.searchsorted(filed[:, 0], rows[:, 0], side="right"), rows, axis=0)


def decay_pair(rho: NDArray[np.complex128], gamma_0: float, coherence_0: float, gamma_1: float,
               coherence_1: float) -> NDArray[np.complex128]:
    """A two-qubit state (4, 4) after amplitude damping ``gamma_q`` and a total coherence factor
    ``coherence_q`` on each qubit q (0: the left factor of ``kron``): the closed form of
    :func:`netsim.qinfo.decohere` on both qubits, for one state (no batch, no checks; the
    purification step calls it per pair). A stored qubit's attempt dephasing only multiplies its
    coherences, so it folds into ``coherence_q``."""
    # plain Python on the 16 entries (numpy's per-call cost dominates at this size); entry
    # (r, s) with r = 2a + b, s = 2a' + b' (a, a': qubit 0)
    m = np.asarray(rho, dtype=complex).tolist()
    keep_0, keep_1 = 1.0 - gamma_0, 1.0 - gamma_1
    for s in range(4):  # qubit 0 on rows 0-1 / 2-3 (a = 0 / 1), per column
        for b in (0, 1):
            r0, r1 = b, 2 + b
            if s >> 1 == 0:  # a' = 0: populations of a move down, coherence a = 1 to a' = 0
                m[r0][s] += gamma_0 * m[r1][s + 2]
                m[r1][s] *= coherence_0
            else:
                m[r0][s] *= coherence_0
                m[r1][s] *= keep_0
    for r in range(4):  # qubit 1: the same on columns within each row's b
        row = m[r]
        b = r & 1
        for s in range(4):
            if (s & 1) != b:
                row[s] *= coherence_1
    for r in (0, 2):  # populations of qubit 1: b = b' = 0 gains gamma_1 x (b = b' = 1)
        for s in (0, 2):
            m[r][s] += gamma_1 * m[r + 1][s + 1]
            m[r + 1][s + 1] *= keep_1
    return np.array(m, dtype=complex)


def path_need(chain: Chain, per_end: int) -> dict[str, int]:
    """Memory slots a path reservation of ``chain`` takes per site (``per_end`` per hop end)."""
    need: dict[str, int] = {}
    for i in range(chain.n_hops):
        for site in (chain.sites[i], chain.sites[i + 1]):
            need[site.name] = need.get(site.name, 0) + per_end
    return need


#: A lane's delivered rows in delivery order: delivery times (N,); storage times left and right,
#: state indices and starts (N, n) (see _Lane.row_delivered).
_Rows = tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.int64], NDArray[np.float64]]


def _add_figures(batch: list[tuple[ChainRun, NDArray[np.complex128], NDArray[np.float64]]]) -> None:
    """Add each (run, states, delivery times) of ``batch`` to its run's figures, in order, the
    per-pair figures of all of them found in one pass (:func:`netsim.engine.metrics.pair_figures`)."""
    if not batch:
        return
    figures = pair_figures(np.concatenate([states for _, states, _ in batch]))
    at = 0
    for run, states, delivered_s in batch:
        part = slice(at, at + len(states))
        run.metrics.add_figures(states, delivered_s, *(f[part] for f in figures))
        at += len(states)


class _Des:
    """One event-engine run over a group of demands that share memory sites.

    Every model step is a plain callback on an engine event (:class:`_Call`, a bare simpy event;
    no generator process per hop, swap or timer): the model is the one described above, one event
    per link pair (when it is heralded and in memory), per delivery, per delayed slot release and
    per cut-off deadline of a lane. The events are kept on the engine's own heap in the compiled
    build and on simpy's queue in plain Python (:data:`OWN_QUEUE`), in simpy's order either way.
    """

    def __init__(self, chains: list[Chain], rngs: list[np.random.Generator], capacity: dict[str, int],
                 rules: list[StopRule], options: DesOptions) -> None:
        self.env = simpy.Environment()
        #: simpy's event queue (the same list for the environment's life): the run's ``finished``
        #: event and anything else scheduled through simpy
        self.queue: list[Any] = self.env._queue
        #: the engine's own events (_Call), a binary heap in simpy's order (_push_call, _pop_call)
        self.calls: list[_Call] = []
        #: the event counter, shared with simpy (nothing is scheduled yet: it starts at 0)
        self.eid = _Serial()
        self.env._eid = self.eid  # type: ignore[assignment]  # simpy only calls next() on it
        #: the simulated time, set by every engine event as it fires (_Call.fire)
        self.now = 0.0
        # read untyped and converted: the compiled build would check each field's declared type
        # exactly, and options may hold numpy numbers (options.py)
        opt: Any = options
        self.rules = rules
        self.heralds = 0
        self.log_pairs = bool(opt.log_pairs)
        self.max_link_pairs = float(opt.max_link_pairs)
        self.progress: Callable[[int], None] | None = opt.progress
        self.cutoff = math.inf if opt.cutoff_s is None else float(opt.cutoff_s)
        self.rounds = int(opt.purification_rounds) if opt.purification != "none" else 0
        self.purify: Callable[..., Any] | None = (
            qinfo.purify_dejmps if opt.purification == "dejmps" else qinfo.purify_bbpssw) if self.rounds else None
        self.swapping = swap_policy(opt.swap_policy)
        self.asap = self.swapping.name == "asap"
        self.broker = SlotBroker(capacity, scheduling_policy(opt.scheduling), lambda: self.now)
        self.lanes = [_Lane(c, r, self.rounds + 1, rule) for c, r, rule in zip(chains, rngs, rules)]
        for k, lane in enumerate(self.lanes):
            lane.position = k  # the order ``demand_order`` scheduling gives priority by
            lane.numbered = self.broker.numbered(lane.need)
        #: per fibre link (indexed as in ``link_index``): when its current attempt sequence ends
        self.link_index: dict[str, int] = {}
        for lane in self.lanes:
            for hop in lane.chain.hops:
                for name in hop.links:
                    self.link_index.setdefault(name, len(self.link_index))
        self.link_free = [0.0] * len(self.link_index)
        self.finished = self.env.event()
        self.pending = sum(1 for rule in rules if rule.pairs is not None)  # unmet pairs rules
        self.ended = False
        sites = {site.name: site for lane in self.lanes for site in lane.chain.sites}
        #: sites with a limited number of optical interfaces, numbered: free interfaces per site
        #: in a list (per-event lookups by index, not by name)
        limited = [name for name, site in sites.items() if site.communication_qubits is not None]
        iface_index = {name: k for k, name in enumerate(limited)}
        self.iface_free = [int(sites[name].communication_qubits) for name in limited]  # type: ignore[arg-type]
        #: the waiting interface requests filed under each site, in request order
        self.iface_waiting: list[list[_Wait]] = [[] for _ in limited]
        self.iface_sequence = 0
        #: per site with attempt dephasing: its attempt sequences, (M, 3) rows (start, period,
        #: rounds) sorted by start (see sorted_log)
        self.sequences: dict[str, NDArray[np.float64]] = {
            name: np.zeros((0, 3)) for name, site in sites.items() if site.attempt_dephasing > 0}
        self.longest_s: dict[str, float] = dict.fromkeys(self.sequences, 0.0)
        #: per site: sequences filed since the last merge, sorted the same way; merged into
        #: ``sequences`` once they pass RECENT_ROWS or when the whole log is read (sorted_log),
        #: so that a read between (a purification step) does not copy the whole log
        self.recent: dict[str, NDArray[np.float64]] = {name: np.zeros((0, 3)) for name in self.sequences}
        #: attempt sequences (start, period, rounds, index into end_sets) not yet filed
        self.new_sequences: list[float] = []  # flat: start, period, rounds, end-set index, ...
        #: earlier ones, moved out of ``new_sequences`` LOG_BLOCK values at a time as (M, 4) arrays
        #: (their boxed numbers are freed while still in cache; one growing array.array would
        #: copy itself over and over as it grows)
        self.log_blocks: list[NDArray[np.float64]] = []
        self.end_sets: list[tuple[str, ...]] = []  # the distinct sets of a hop's dephasing sites
        for lane in self.lanes:
            c = lane.chain
            dephasing_ends = [[site.name for site in c.sites[i:i + 2] if site.name in self.sequences]
                              for i in range(c.n_hops)]
            for ends in dephasing_ends:
                if ends and tuple(ends) not in self.end_sets:
                    self.end_sets.append(tuple(ends))
            lane.hops = [
                _Hop(tuple(self.link_index[name] for name in c.hops[i].links), float(c.period_s[i]), float(c.p[i]),
                     float(c.herald_s[i]), float(c.ready_s[i]),
                     self.end_sets.index(tuple(dephasing_ends[i])) if dephasing_ends[i] else -1,
                     [iface_index[site.name] for site in c.sites[i:i + 2] if site.name in iface_index],
                     _Call(self, self.transferred, (lane, i), 0.0, TRANSFERRED, lane, i))
                for i in range(c.n_hops)]
            lane.closing = _Call(self, self.close_cycle, (lane,), 0.0, CLOSING, lane)
        #: per site with attempt dephasing: the indices of the end sets it belongs to
        self.site_end_sets: dict[str, set[int]] = {name: set() for name in self.sequences}
        for index, end_set in enumerate(self.end_sets):
            for name in end_set:
                self.site_end_sets[name].add(index)

    def at(self, t: float, fn: Callable[..., None], *args: Any) -> None:
        """Call ``fn(*args)`` at simulated time ``t`` (>= now) as one simpy event."""
        now = self.now
        when = now + (t - now)  # Environment.schedule's time arithmetic: now + delay
        self.schedule(when, _Call(self, fn, args, when))

    def schedule(self, when: float, event: _Call) -> None:
        """Put ``event`` on the engine's queue (:data:`OWN_QUEUE`; else simpy's, as simpy's
        4-tuple) at ``when`` (its ``time``), with the next value of the event counter shared with
        simpy, as ``Environment.schedule`` would number it."""
        serial = self.eid
        eid = serial.value
        serial.value = eid + 1
        event.time = when
        if OWN_QUEUE:
            event.seq = eid
            _push_call(self.calls, event)
        else:
            event.callbacks = _FIRE  # (simpy drops them once called; the event may be a reused one)
            _PUSH(self.queue, (when, _NORMAL, eid, event))

    # -- cycles -----------------------------------------------------------------------------
    def request(self, lane: _Lane) -> None:
        self.broker.request(lane.position, lane.need, lambda: self.start_cycle(lane), lane.numbered)

    def start_cycle(self, lane: _Lane) -> None:
        lane.active = True
        for hop in lane.hops:
            hop.busy_left = hop.busy_right = False
            hop.need_pair = True
        for i in range(lane.n):
            self.maybe_start(lane, i)

    def begin(self, lane: _Lane, i: int) -> None:
        """Hop ``i`` starts making a pair: it takes an optical interface at each limited end, then
        attempts."""
        hop = lane.hops[i]
        hop.attempting = True
        ends = hop.iface_ends
        if ends:
            self.acquire(ends, lane, i)
        else:
            self.attempt(lane, i)

    def attempt(self, lane: _Lane, i: int) -> None:
        """Hop ``i`` attempts until its next success; the clock jumps to the moment its pair is
        heralded and moved to memory (one event: nothing else depends on the herald itself)."""
        hop = lane.hops[i]
        now = self.now
        start = hop.next_round
        if start < now:
            start = now
        link_free = self.link_free
        links = hop.links
        for link in links:
            if link_free[link] > start:
                start = link_free[link]
        if hop.p >= 1.0:
            k = 1
        else:  # K ~ Geometric(p) on {1, 2, ...} by inversion, P(K > m) = (1 - p)^m (lane.uniform inlined)
            at = lane._next_uniform
            if at >= len(lane._uniforms):
                lane._uniforms = lane.rng.random(UNIFORM_BLOCK).tolist()
                at = 0
            lane._next_uniform = at + 1
            k = int(math.log(1.0 - lane._uniforms[at]) / hop.log_fail) + 1
        period = hop.period
        born = start + (k - 1) * period
        free = born + period
        for link in links:
            link_free[link] = free
        if hop.end_set >= 0:  # filed under its dephasing sites when the log is read (absorb_log)
            pending = self.new_sequences
            pending.append(start)  # (four appends: += of a tuple is a generic call when compiled)
            pending.append(period)
            pending.append(k)
            pending.append(hop.end_set)
            if len(pending) >= LOG_BLOCK:
                self.log_blocks.append(np.array(pending, dtype=float).reshape(-1, 4))
                self.new_sequences = []
        hop.next_round = free
        hop.flight_born, hop.flight_k = born, k
        event = hop.transfer  # its one in-flight pair's event, reused (see _Hop.transfer)
        self.schedule(now + (born + hop.ready - now), event)  # Environment.schedule's arithmetic: now + delay

    def transferred(self, lane: _Lane, i: int) -> None:
        """Hop ``i``'s pair in flight (``flight_born``, ``flight_k``) was heralded and both ends
        hold it in memory: interfaces free, the pair usable."""
        hop = lane.hops[i]
        born, k = hop.flight_born, hop.flight_k
        hop.flight_k = 0
        self.count_success(hop, k)
        self.heralds += 1
        if not self.heralds & 4095:
            self.guard()
        pair = _Pair(i, born, born + hop.herald)
        if self.log_pairs:
            lane.log.append(pair)
        if hop.iface_ends:
            self.release_interfaces(hop.iface_ends)
        if self.rounds:
            self.climb(lane, i, pair, lane.chain.link_states[i], 0)
            return
        hop.attempting = False  # hand_over, inlined
        hop.need_pair = False
        hop.busy_left = hop.busy_right = True
        now = self.now
        self.add_segment(lane, _Seg(i, i + 1, [pair], now, now, born + self.cutoff))

    @staticmethod
    def count_success(hop: _Hop, k: int) -> None:
        """Count a heralded pair of ``hop`` that took ``k`` rounds."""
        hop.attempts += k
        hop.successes += 1
        hop.busy_s += k * hop.period

    def absorb_log(self, merge: bool = False) -> None:
        """File the attempt sequences started since the last read under their sites (in one
        batched pass: grouped by the hop's set of dephasing sites, sorted by start) in ``recent``;
        merge ``recent`` into ``sequences`` when ``merge`` or once it is long."""
        if self.new_sequences or self.log_blocks:
            blocks = self.log_blocks
            if self.new_sequences:
                blocks.append(np.array(self.new_sequences, dtype=float).reshape(-1, 4))
            new = np.concatenate(blocks) if len(blocks) > 1 else blocks[0]
            self.new_sequences, self.log_blocks = [], []
            key = new[:, 3].astype(np.int64)
            order = np.argsort(key, kind="stable")
            bounds = np.searchsorted(key[order], np.arange(len(self.end_sets) + 1))
            parts: dict[str, list[NDArray[np.float64]]] = {}
            for k, ends in enumerate(self.end_sets):
                if bounds[k + 1] > bounds[k]:
                    rows = new[order[bounds[k]:bounds[k + 1]], :3]
                    for name in ends:
                        parts.setdefault(name, []).append(rows)
            for name, pieces in parts.items():
                rows = np.concatenate(pieces) if len(pieces) > 1 else pieces[0]
                rows = rows[np.argsort(rows[:, 0], kind="stable")]
                self.recent[name] = _insert_sorted(self.recent[name], rows)
                self.longest_s[name] = max(self.longest_s[name], float(((rows[:, 2] - 1.0) * rows[:, 1]).max()))
        for name, rows in self.recent.items():
            if len(rows) and (merge or len(rows) > RECENT_ROWS):
                self.sequences[name] = _insert_sorted(self.sequences[name], rows)
                self.recent[name] = rows[:0]

    def sorted_log(self, site: str) -> NDArray[np.float64]:
        """The attempt log of ``site``: an (M, 3) array of (start, period, rounds), sorted by start."""
        self.absorb_log(merge=True)
        return self.sequences[site]

    def guard(self) -> None:
        """Every 4096 heralded link pairs: report progress; stop beyond ``max_link_pairs``."""
        if self.progress is not None:
            self.progress(4096)
        if self.heralds > self.max_link_pairs:
            from netsim.engine.workload import RunLimitError

            raise RunLimitError(f"the event engine stopped after heralding {self.heralds} link pairs, more than "
                                f"{self.max_link_pairs:.3g} (4 x the larger of --max-link-pairs and the expected work); the run would take far "
                                "longer than its estimate: raise --max-link-pairs or ask for fewer pairs")

    # -- optical interfaces and attempt counts -------------------------------------------------
    def acquire(self, ends: list[int], lane: _Lane, i: int) -> None:
        """Let hop ``i`` attempt once one interface at every site of ``ends`` (indices into
        ``iface_free``) is free (taken atomically)."""
        free = self.iface_free
        for site in ends:
            if free[site] <= 0:
                break
        else:  # nothing else can fit now: only this one is new
            for site in ends:
                free[site] = free[site] - 1  # (a typed read and write: `-=` on an item is generic when compiled)
            self.attempt(lane, i)
            return
        self.iface_sequence += 1
        entry = _Wait(self.iface_sequence, ends, lane, i)
        for site in ends:
            self.iface_waiting[site].append(entry)

    def release_interfaces(self, ends: list[int]) -> None:
        """Free one interface at each site of ``ends``; grant waiting requests greedily in request
        order (only those needing one of these sites can fit now: the others did not before).
        A granted request leaves the queues of all its sites at once, so the queues hold only
        waiting requests."""
        free, waiting = self.iface_free, self.iface_waiting
        candidates: list[_Wait] | None = None
        for site in ends:
            free[site] = free[site] + 1
            queue = waiting[site]
            if queue:
                # each queue is in request order; an entry filed under both sites comes twice
                candidates = queue if candidates is None else _merged(candidates, queue)
        if candidates is None:
            return
        granted: list[_Wait] = []
        for entry in candidates:
            if not entry.waiting:  # granted already (it came through the other site too)
                continue
            need = entry.ends
            for site in need:
                if free[site] <= 0:
                    break
            else:
                for site in need:
                    free[site] = free[site] - 1
                entry.waiting = False
                granted.append(entry)
        for entry in granted:
            for site in entry.ends:
                queue = waiting[site]
                at = 0
                while queue[at] is not entry:  # list.remove, by identity (no == on the entries)
                    at += 1
                queue.pop(at)  # (pop, not del: del on a list item is a generic call when compiled)
        for entry in granted:
            self.attempt(entry.lane, entry.hop)

    def attempts_at(self, site: str, after_s: float, until_s: float) -> int:
        """Attempts started at ``site`` in (after_s, until_s) by any hop of any demand.

        A purification step asks this of both its sites; the few sequences logged since the
        last read are counted where they lie (up to PENDING_SCAN of them) instead of filing them
        first, and short stretches of the filed log in plain Python (the same arithmetic as
        :func:`netsim.engine.history.rounds_between`, so the same integer counts)."""
        if site not in self.sequences:
            return 0
        pending = self.new_sequences
        if self.log_blocks or len(pending) > 4 * PENDING_SCAN:
            self.absorb_log()
            pending = self.new_sequences
        total = 0
        if pending:
            mine = self.site_end_sets.get(site, set())
            for j in range(0, len(pending), 4):
                if pending[j + 3] in mine:
                    total += _rounds_in(pending[j], pending[j + 1], pending[j + 2], after_s, until_s)
        longest = self.longest_s[site]
        for seqs in (self.sequences[site], self.recent.get(site)):
            if seqs is None or not len(seqs):
                continue
            starts = seqs[:, 0]
            lo = int(starts.searchsorted(after_s - longest - 1e-9, side="left"))
            hi = int(starts.searchsorted(until_s, side="right"))
            if hi - lo > 16:
                arr = seqs[lo:hi]
                total += int(rounds_between(arr[:, 0], arr[:, 1], arr[:, 2], after_s, until_s).sum())
            elif hi > lo:
                for start, period, k in seqs[lo:hi].tolist():
                    total += _rounds_in(start, period, k, after_s, until_s)
        return total

    def hand_over(self, lane: _Lane, i: int, pair: _Pair) -> None:
        """Hop ``i`` gives its (purified) pair to the chain."""
        hop = lane.hops[i]
        hop.attempting = False
        hop.need_pair = False
        hop.busy_left = hop.busy_right = True
        now = self.now
        self.add_segment(lane, _Seg(i, i + 1, [pair], now, now, pair.start + self.cutoff))

    # -- segments, swaps, delivery ------------------------------------------------------------
    def add_segment(self, lane: _Lane, seg: _Seg) -> None:
        n, lo, hi = lane.n, seg.lo, seg.hi
        node_lo, node_hi = lane.nodes[lo], lane.nodes[hi]
        node_lo.right = seg
        node_hi.left = seg
        if lo == 0 and hi == n:
            self.deliver(lane, seg)
            return
        if seg.deadline < lane.cut_at:
            self.arm_cutoff(lane, seg.deadline)
        at_lo = lo > 0 and node_lo.left is not None
        at_hi = hi < n and node_hi.right is not None
        if self.asap:
            if at_lo:
                self.swap(lane, lo)
            if at_hi:
                self.swap(lane, hi)
            return
        for j in (lo,) * at_lo + (hi,) * at_hi:
            delay = self.swapping.swap_delay_s(j, n, self.now)
            if delay > 0:
                self.at(self.now + delay, self.swap, lane, j)
            else:
                self.swap(lane, j)

    def swap(self, lane: _Lane, j: int) -> None:
        node = lane.nodes[j]
        left, right = node.left, node.right
        if not (left and right and left.alive and right.alive):
            return
        now = self.now
        left.alive = right.alive = False
        node.left = node.right = None
        left.pairs[-1].end_right = right.pairs[0].end_left = now
        success = node.swap_p >= 1.0 or lane.uniform() < node.swap_p
        to_lo, to_hi = node.pos - lane.nodes[left.lo].pos, lane.nodes[right.hi].pos - node.pos
        if success:
            # site j's two slots free at once; hops j - 1 and j need no new pair (their pairs
            # live on in the joined segment), so nothing starts (free_slot, short-cut)
            lane.hops[j - 1].busy_right = lane.hops[j].busy_left = False
            left.pairs[-1].fate = right.pairs[0].fate = "swapped"
            # outcomes known at j (this swap, and what j learnt of each side) travel on to the
            # far ends: the joined pair's ends know everything at these times
            joined = _Seg(left.lo, right.hi, left.pairs + right.pairs,
                          _later(_later(left.info_lo, now + to_lo), right.info_lo + to_lo),
                          _later(_later(right.info_hi, now + to_hi), left.info_hi + to_hi),
                          _earlier(left.deadline, right.deadline))
            self.add_segment(lane, joined)
            return
        self.mark_lost(lane, left.pairs + right.pairs)
        self.free_slot(lane, j - 1, RIGHT, now)
        self.free_slot(lane, j, LEFT, now)
        node.swap_failures += 1
        for p in left.pairs + right.pairs:
            p.fate = "swap_failed"
        self.drop(lane, left, now + to_lo, None)
        self.drop(lane, right, None, now + to_hi)

    def drop(self, lane: _Lane, seg: _Seg, lo_time: float | None, hi_time: float | None) -> None:
        """Forget ``seg``; its end slots free at the given times (None: not this end)."""
        seg.alive = False
        if lo_time is not None:
            lane.nodes[seg.lo].right = None
            seg.pairs[0].end_left = lo_time
            self.free_slot(lane, seg.lo, LEFT, lo_time)
        if hi_time is not None:
            lane.nodes[seg.hi].left = None
            seg.pairs[-1].end_right = hi_time
            self.free_slot(lane, seg.hi - 1, RIGHT, hi_time)
        for p in seg.pairs:  # lost pairs held their slots too (delivered ones count in flush)
            self.held(lane, p, p.end_left, p.end_right)

    @staticmethod
    def held(lane: _Lane, pair: _Pair, left_until: float, right_until: float) -> None:
        """Add the qubit-seconds ``pair`` spent in its two memories to the site occupancy."""
        lane.nodes[pair.hop].qubit_s += left_until - pair.start
        lane.nodes[pair.hop + 1].qubit_s += right_until - pair.start

    def arm_cutoff(self, lane: _Lane, deadline: float) -> None:
        """One pending cut-off timer per lane, at the earliest deadline of its live segments."""
        lane.cut_token += 1
        lane.cut_at = deadline
        self.at(deadline, self.cutoff_due, lane, lane.cut_token)

    def cutoff_due(self, lane: _Lane, token: int) -> None:
        if token != lane.cut_token:  # superseded by an earlier deadline
            return
        lane.cut_at = math.inf
        now = self.now
        for seg in [node.right for node in lane.nodes]:
            if seg is not None and seg.alive and seg.deadline <= now:
                for p in seg.pairs:
                    p.fate = "discarded"
                    lane.hops[p.hop].discards += 1
                self.mark_lost(lane, seg.pairs)
                self.drop(lane, seg, now, now)
        nxt = min((node.right.deadline for node in lane.nodes if node.right is not None and node.right.alive),
                  default=math.inf)
        if nxt < lane.cut_at:
            self.arm_cutoff(lane, nxt)

    def mark_lost(self, lane: _Lane, pairs: list[_Pair]) -> None:
        """The hops of lost pairs must make new ones (once their slots are free)."""
        for p in pairs:
            lane.hops[p.hop].need_pair = True
            self.maybe_start(lane, p.hop)

    def free_slot(self, lane: _Lane, i: int, side: int, when: float) -> None:
        if when > self.now:
            self.at(when, self.free_slot, lane, i, side, when)
            return
        hop = lane.hops[i]
        if side == LEFT:
            hop.busy_left = False
            other_busy = hop.busy_right
        else:
            hop.busy_right = False
            other_busy = hop.busy_left
        if lane.active and hop.need_pair and not hop.attempting and not other_busy:
            self.begin(lane, i)

    def maybe_start(self, lane: _Lane, i: int) -> None:
        """Start hop ``i`` if it needs a pair, its slots are free and its cycle is running."""
        hop = lane.hops[i]
        if lane.active and hop.need_pair and not hop.attempting and not (hop.busy_left or hop.busy_right):
            self.begin(lane, i)

    def deliver(self, lane: _Lane, seg: _Seg) -> None:
        t_d = _later(seg.info_lo, seg.info_hi)
        seg.alive = False
        lane.nodes[0].right = lane.nodes[lane.n].left = None
        seg.pairs[0].end_left = seg.pairs[-1].end_right = t_d
        for p in seg.pairs:
            p.fate = p.fate or "delivered"
        pairs = seg.pairs
        lane.row_delivered.append(t_d)
        left, right, state, start = lane.stage_left, lane.stage_right, lane.stage_state, lane.stage_start
        for p in pairs:
            left.append(p.end_left - p.start)
            right.append(p.end_right - p.start)
            state.append(p.state_id)
            start.append(p.start)
        if len(left) >= ROW_STAGE:
            lane.spill_rows()
        # the lane's closing event, reused (its next cycle starts only once this one closes)
        lane.delivered_at = t_d
        event = lane.closing
        assert event is not None
        now = self.now
        self.schedule(now + (t_d - now), event)  # as at()

    def close_cycle(self, lane: _Lane) -> None:
        t_d = lane.delivered_at
        rule, run = lane.rule, lane.run
        was_done = rule.pairs is not None and rule.done(run, self.now)
        run.add_interval(t_d, lane.last_delivery_s)
        lane.last_delivery_s = t_d
        if len(lane.row_delivered) >= FLUSH_ROWS:
            limit = rule.time_s
            self.flush(lane, min(self.now, math.inf if limit is None else float(limit)))
        lane.active = False
        self.broker.release(lane.need, lane.numbered)
        self.request(lane)
        if rule.pairs is not None:  # a pairs rule, once met, stays met
            if not was_done and rule.done(run, self.now):
                self.pending -= 1
                self.check_finished()
        elif rule.time_s is None:  # precision: may be met and lost again
            self.check_finished()

    def check_finished(self) -> None:
        """Stop once every demand has met its rule (``pending`` counts unmet pairs rules)."""
        if self.pending <= 0 and not self.finished.triggered and all(
                r.done(ln.run, self.now) for r, ln in zip(self.rules, self.lanes)):
            self.env._now = self.now  # simpy schedules it at its own clock
            self.finished.succeed()

    # -- purification -------------------------------------------------------------------------
    def climb(self, lane: _Lane, i: int, item: _Pair, rho: NDArray[np.complex128], level: int) -> None:
        """Put a pair of ``level`` on hop ``i``'s recurrence stack, or purify it with the one
        waiting there; a level-r pair goes to the chain, anything else means a new attempt."""
        stack = lane.stacks[i]
        if level not in stack:
            stack[level] = (item, rho)
            self.begin(lane, i)
            return
        other, other_rho = stack.pop(level)
        c, now = lane.chain, self.now
        p, out = self.purify(self.bring(c, i, other_rho, other.start, now),  # type: ignore[misc]
                             self.bring(c, i, rho, item.start, now))
        self.held(lane, item, now, now)  # pair 2 is measured at once
        self.at(now + c.delay_s(i, i + 1), self.purified, lane, i, other, float(p), np.asarray(out), level, now)

    def purified(self, lane: _Lane, i: int, other: _Pair, p: float, out: NDArray[np.complex128], level: int,
                 measured: float) -> None:
        if lane.uniform() >= p:
            lane.hops[i].purification_failures += 1
            self.held(lane, other, self.now, self.now)  # pair 1 waits for the outcome
            self.begin(lane, i)
            return
        self.held(lane, other, measured, measured)  # the kept pair lives on as a new pair from then
        item = _Pair(i, measured, self.now)
        if level + 1 == self.rounds:
            lane.extra[i].append(out)
            item.state_id = len(lane.extra[i])
            self.hand_over(lane, i, item)
            return
        self.climb(lane, i, item, out, level + 1)

    def bring(self, c: Chain, i: int, rho: NDArray[np.complex128], start_s: float, now_s: float) -> NDArray[np.complex128]:
        """Hop ``i``'s pair, valid from ``start_s``, brought up to date at ``now_s`` (exact): memory
        decay and the attempt dephasing of both ends (:func:`decay_pair`, the closed form of
        :func:`netsim.qinfo.decohere` on both qubits and :func:`netsim.engine.history.dephase`)."""
        left, right = c.sites[i], c.sites[i + 1]
        t = now_s - start_s
        factors = []
        for site in (left, right):
            gamma = -math.expm1(-t / float(site.t1_s))
            coherence = math.exp(-t / float(site.t2_s))
            if site.attempt_dephasing > 0:
                coherence *= (1.0 - site.attempt_dephasing) ** self.attempts_at(site.name, start_s, now_s)
            factors += [gamma, coherence]
        return decay_pair(rho, *factors)

    # -- running ------------------------------------------------------------------------------
    def run(self) -> list[ChainRun]:
        for lane in self.lanes:
            self.request(lane)
        for t in sorted({float(rule.time_s) for rule in self.rules if rule.time_s is not None}):
            self.at(t, self.check_finished)
        interrupted = False
        # The run makes and drops millions of small objects but almost no garbage cycles (about
        # 4,000 cyclic objects in a 7x7-grid run, the engine's own structure once it is done),
        # while the cyclic collector would keep walking every live pair and segment: about 9 % of
        # the grid's run time. Pause it for the run; reference counting still frees the rest.
        collecting = gc.isenabled()
        gc.disable()
        try:
            try:
                self.step_until_finished()
            except KeyboardInterrupt:
                interrupted = True
            self.env._now = self.now
            self.ended = True  # no more attempts: the final flushes need not prune the attempt log
            uptos = [float(rule.time_s) if rule.time_s is not None and not interrupted else self.now
                     for rule in self.rules]
            rows = [self.take_rows(lane, upto) for lane, upto in zip(self.lanes, uptos)]
            counts = self.count_attempts(list(zip(self.lanes, rows)))  # every demand's at once
            out = [self.finish(lane, upto, interrupted) for lane, upto in zip(self.lanes, uptos)]
            self.add_states(list(zip(self.lanes, rows, counts)))  # every demand's at once
        finally:
            if collecting:
                gc.enable()
        return out

    def step_until_finished(self) -> None:
        """Process events until ``finished`` is processed, as ``Environment.run(until=finished)``
        would with every engine event on simpy's queue: the engine's own queue (when it has one:
        :data:`OWN_QUEUE`) and simpy's are merged in simpy's order (time, priority, then the shared
        event counter).

        An engine event (:class:`_Call`) sets the engine's clock and calls its handler. Any other
        simpy event is processed as ``Environment.step`` does it: simpy's clock set, its callbacks
        called, and a failed one that is not defused raised. simpy's clock is set before simpy
        code may run: before a simpy event, before an engine event of no fixed kind, and in
        :meth:`check_finished` (the two fixed kinds call simpy only through it)."""
        calls = self.calls
        queue = self.queue
        finished = self.finished
        env = self.env
        while True:
            if calls and (not queue or _simpy_later(queue[0], calls[0])):
                call = _pop_call(calls)
            else:
                if not queue:
                    raise RuntimeError(f'No scheduled events left but "until" event was not triggered: {finished}')
                when, _, _, event = _POP(queue)
                env._now = when
                if type(event) is not _Call:
                    self.now = when
                    callbacks, event.callbacks = event.callbacks, None
                    for callback in callbacks:
                        callback(event)
                    if event is finished:
                        return
                    if not event._ok and not hasattr(event, "_defused"):
                        failure = type(event._value)(*event._value.args)
                        failure.__cause__ = event._value
                        raise failure
                    continue
                call = event
                call.callbacks = None
            self.now = call.time
            kind = call.kind
            if kind:
                lane = call.lane
                assert lane is not None
                if kind == TRANSFERRED:
                    self.transferred(lane, call.index)
                else:
                    self.close_cycle(lane)
            else:  # any handler: it may call simpy (a test stops a run with finished.succeed)
                env._now = call.time
                fn = call.fn  # (read first: a call through the attribute is a generic lookup when compiled)
                fn(*call.args)

    def finish(self, lane: _Lane, now: float, interrupted: bool) -> ChainRun:
        for hop in lane.hops:  # heralded by the end, still moving to memory
            if hop.flight_k and hop.flight_born + hop.herald <= self.now:
                self.count_success(hop, hop.flight_k)
        lane.add_counts()
        lane.run.simulated_time_s = now
        lane.run.interrupted = interrupted
        return lane.run

    def flush(self, lane: _Lane, upto: float) -> None:
        """Turn the recorded histories delivered by ``upto`` into states and figures."""
        rows = self.take_rows(lane, upto)
        self.add_states([(lane, rows, self.count_attempts([(lane, rows)])[0])])
        self.prune_sequences()

    def take_rows(self, lane: _Lane, upto: float) -> _Rows:
        """The lane's recorded rows delivered by ``upto``, in delivery order, taken from the lane:
        (delivery time (N,), storage times left and right, state indices, starts (N, n))."""
        n = lane.chain.n_hops
        lane.spill_rows()
        delivered = np.array(lane.row_delivered, dtype=float)
        left = np.frombuffer(b"".join(lane.row_left), dtype=float).reshape(-1, n)
        right = np.frombuffer(b"".join(lane.row_right), dtype=float).reshape(-1, n)
        state = np.frombuffer(b"".join(lane.row_state), dtype=np.int64).reshape(-1, n)
        start = np.frombuffer(b"".join(lane.row_start), dtype=float).reshape(-1, n)
        due = delivered <= upto
        # a lane delivers in time order (its next cycle starts after this delivery), so this
        # keeps the order in which the rows were recorded
        ready = np.flatnonzero(due)
        ready = ready[np.argsort(delivered[ready], kind="stable")]
        kept = np.flatnonzero(~due)
        lane.row_delivered = array("d", delivered[kept].tobytes())
        lane.row_left = [left[kept].tobytes()] if len(kept) else []
        lane.row_right = [right[kept].tobytes()] if len(kept) else []
        lane.row_state = [state[kept].tobytes()] if len(kept) else []
        lane.row_start = [start[kept].tobytes()] if len(kept) else []
        return delivered[ready], left[ready], right[ready], state[ready], start[ready]

    def add_states(self, due: list[tuple[_Lane, _Rows, tuple[NDArray[np.float64], NDArray[np.float64]] | None]]) -> None:
        """Turn each lane's ``rows`` (:meth:`take_rows`) into states and add them to its figures;
        with ``counts``, the attempts its stored qubits saw (:meth:`count_attempts`). The states
        are made per lane (its own chain) in chunks of STATE_CHUNK pairs; their per-pair figures
        (fidelity, EoF, coherent information) in batches of about that many pairs across lanes:
        a few hundred pairs per demand left numpy's per-call cost to dominate."""
        batch: list[tuple[ChainRun, NDArray[np.complex128], NDArray[np.float64]]] = []
        size = 0
        for lane, rows, counts in due:
            n, run = lane.chain.n_hops, lane.run
            delivered, left, right, state, _ = rows
            for lo in range(0, len(delivered), STATE_CHUNK):
                part = slice(lo, lo + STATE_CHUNK)
                hist = History(delivered[part], left[part], right[part], state[part], lane.extra)
                if counts is not None:
                    hist.attempts_left, hist.attempts_right = counts[0][part], counts[1][part]
                states = pair_states(lane.chain, hist)
                run.site_qubit_s[:n] += hist.store_left_s.sum(axis=0)
                run.site_qubit_s[1:] += hist.store_right_s.sum(axis=0)
                if len(states):
                    batch.append((run, states, hist.delivered_s))
                    size += len(states)
                if size >= STATE_CHUNK:
                    _add_figures(batch)
                    batch, size = [], 0
        _add_figures(batch)

    def count_attempts(self, due: list[tuple[_Lane, _Rows]]) -> list[tuple[NDArray[np.float64], NDArray[np.float64]] | None]:
        """Per lane, the attempts each stored qubit of its ``rows`` saw at its site, left and
        right (N, n), or None where no site of the chain has attempt dephasing (at flush time
        every attempt up to the deliveries is logged). Same count as :meth:`attempts_at` for every
        stored qubit, in one batched pass per site over all the lanes given: each site's log is
        read once, not once per hop end of every demand."""
        out: list[tuple[NDArray[np.float64], NDArray[np.float64]] | None] = []
        #: per site: (counts to fill, hop, after, until) of every hop end there
        wanted: dict[str, list[tuple[NDArray[np.float64], int, NDArray[np.float64], NDArray[np.float64]]]] = {}
        for lane, (_, left, right, _, begin) in due:
            c = lane.chain
            if not any(site.name in self.sequences for site in c.sites):
                out.append(None)
                continue
            counts = (np.zeros(left.shape), np.zeros(right.shape))
            for store, offset in ((left, 0), (right, 1)):
                for i in range(c.n_hops):
                    name = c.sites[i + offset].name
                    if name in self.sequences:
                        wanted.setdefault(name, []).append((counts[offset], i, begin[:, i], begin[:, i] + store[:, i]))
            out.append(counts)
        for name, ends in wanted.items():
            found = self.attempts_many(name, self.sorted_log(name), np.concatenate([e[2] for e in ends]),
                                       np.concatenate([e[3] for e in ends]))
            at = 0
            for target, i, after, _ in ends:
                target[:, i] = found[at:at + len(after)]
                at += len(after)
        return out

    def attempts_many(self, site: str, log: NDArray[np.float64], after_s: NDArray[np.float64],
                      until_s: NDArray[np.float64]) -> NDArray[np.float64]:
        """:meth:`attempts_at` for many intervals at once (``log``: the site's sequences as an
        (M, 3) array, sorted by start)."""
        if not len(log):
            return np.zeros(len(after_s))
        # the log's columns as contiguous arrays, copied once: numpy's searchsorted copies a
        # strided column at every call, and gathers from a 2-d log go through its slower fancy indexing
        start, period, rounds_k = np.ascontiguousarray(log.T)
        # the sequences to read start before until_s and may have a round after after_s: none of
        # those whose last round starts before after_s (by more than the rounding of the round
        # count) and none that start before after_s - the longest sequence; ``reach`` is the
        # latest last-round start of the sequences up to each one, so it rises with the index
        reach = np.maximum.accumulate(start + (rounds_k - 1.0) * period)
        lo = np.maximum(np.searchsorted(start, after_s - self.longest_s[site] - 1e-9, side="left"),
                        np.searchsorted(reach, after_s - 1e-9, side="left"))
        hi = np.searchsorted(start, until_s, side="right")
        width = np.maximum(hi - lo, 0)
        total = int(width.sum())
        if total == 0:
            return np.zeros(len(after_s))
        query = np.repeat(np.arange(len(after_s)), width)
        first = np.cumsum(width) - width
        seq = np.repeat(lo, width) + (np.arange(total) - np.repeat(first, width))
        rounds = rounds_between(start.take(seq), period.take(seq), rounds_k.take(seq), after_s.take(query),
                                until_s.take(query))
        return np.bincount(query, weights=rounds, minlength=len(after_s)).astype(float)

    def prune_sequences(self) -> None:
        """Forget attempt sequences that ended before the oldest qubit still stored anywhere
        (in a segment, a purification stack, a row not yet flushed; or between those while it is
        moved to memory or a purification outcome travels: younger than herald + transfer + the
        chain's end-to-end message time)."""
        if self.ended or not self.sequences:
            return
        self.absorb_log(merge=True)
        if sum(len(v) for v in self.sequences.values()) < PRUNE_SEQUENCES:
            return
        oldest = self.now - max(float(ln.chain.ready_s.max() + ln.chain.position_s[-1]) for ln in self.lanes)
        for ln in self.lanes:
            segs = [seg for seg in [v.left for v in ln.nodes] + [v.right for v in ln.nodes] if seg is not None]
            starts = [p.start for seg in segs for p in seg.pairs]
            starts += np.frombuffer(b"".join(ln.row_start), dtype=float).tolist() + ln.stage_start
            starts += [item.start for stack in ln.stacks for item, _ in stack.values()]
            oldest = min([oldest, *starts])
        for site, seqs in self.sequences.items():
            self.sequences[site] = seqs[seqs[:, 0] + (seqs[:, 2] - 1.0) * seqs[:, 1] >= oldest - 1e-9]

def simulate_des(chains: Sequence[Chain], rule: StopRule | Sequence[StopRule], rngs: Sequence[np.random.Generator],
                 options: DesOptions | None = None,
                 capacity: Mapping[str, SupportsInt] | None = None) -> tuple[list[ChainRun], list[list[Any]]]:
    """Run the event engine on demands that may share memory sites.

    Parameters
    ----------
    chains : sequence of Chain
    rule : StopRule or sequence of StopRule (one per chain)
        The run goes on until every demand has met its rule (with ``pairs``, demands that are done
        keep running and contending until the last one has its pairs); a demand stopped by
        ``time_s`` reports the pairs delivered by then.
    rngs : sequence of numpy.random.Generator
        One stream per chain.
    options : DesOptions
    capacity : mapping, optional
        Memory slots per site name; defaults to each site's ``memory_slots``.

    Returns
    -------
    (runs, logs)
        One :class:`ChainRun` per chain, and per chain the list of link pairs made when
        ``options.log_pairs`` (each with ``hop``, ``start``, ``herald``, ``end``, ``fate``).
    """
    options = options or DesOptions()
    # plain lists and ints: the compiled build checks the declared types exactly (build.py)
    chains, rngs = list(chains), list(rngs)
    if capacity is None:
        slots = {s.name: int(s.memory_slots) for c in chains for s in c.sites}
    else:
        slots = {str(name): int(k) for name, k in capacity.items()}
    rules = [rule] * len(chains) if isinstance(rule, StopRule) else list(rule)
    sim = _Des(chains, rngs, slots, rules, options)
    _check_capacity(sim, slots)
    runs = sim.run()
    stats = sim.broker.stats()
    for r in runs:
        r.slot_stats = stats
    return runs, [lane.log for lane in sim.lanes]


def _check_capacity(sim: _Des, capacity: dict[str, int]) -> None:
    from netsim.errors import ParameterError

    for lane in sim.lanes:
        for site, k in lane.need.items():
            if capacity.get(site, 0) < k:
                raise ParameterError(f"sites[{site}].memory_slots", capacity.get(site, 0),
                                     f"at least {k} for demand {lane.chain.name} "
                                     f"({sim.rounds + 1} slot(s) per hop end)")
