"""Plug-in policies of the event engine: memory-slot scheduling between demands, swap timing.

Scheduling
----------
A demand runs in *cycles*. At the start of a cycle it asks for a path reservation: one memory
slot per hop end at every site of its route (two at a repeater, one at each end user; times
``purification_rounds + 1`` when purifying). Its hops generate, store, swap and regenerate after
losses inside the reservation until one end-to-end pair is delivered; then the reservation is
returned and the demand queues again. Reserving a whole path at once cannot deadlock (no demand
ever holds part of what it needs while waiting for the rest). A :class:`SchedulingPolicy` orders
the waiting requests; the broker grants, in that order, every request whose slots are free, and
a request it cannot serve earmarks the slots it needs so that requests later in the order cannot
take them (backfilling only onto slots nobody earlier is waiting for). Without the earmark a
demand whose route overlaps several busy demands could wait for ever.

- ``fair`` (default): first come, first served by request time, ties by demand order. A demand
  that just finished queues behind every demand already waiting, so demands sharing a site take
  turns.
- ``demand_order``: strict priority to demands listed earlier in the scenario.

Swapping
--------
A :class:`SwapPolicy` says how long an inner site waits, once it holds both of its qubits, before
its Bell measurement. ``asap`` (default) swaps at once.
"""

from __future__ import annotations

import bisect
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol

from netsim.errors import ParameterError

__all__ = [
    "SCHEDULING",
    "SWAPPING",
    "Request",
    "SchedulingPolicy",
    "SwapPolicy",
    "register_scheduling",
    "register_swap",
    "scheduling_policy",
    "swap_policy",
]


class Request:
    """A waiting path reservation: which demand, when it asked, and slots needed per site.

    (A plain class rather than a dataclass: the compiled broker makes one per cycle, and a
    dataclass's generated ``__init__`` runs as interpreted Python. Requests compare by identity,
    as the broker always did.)"""

    __slots__ = ("ahead", "counts", "demand_index", "need", "rank", "sequence", "sites", "time_s")

    def __init__(self, demand_index: int, time_s: float, sequence: int, need: dict[str, int]) -> None:
        self.demand_index, self.time_s, self.sequence, self.need = demand_index, time_s, sequence, need
        #: the broker's numbers of the sites of ``need`` and the slots needed at each, in its order
        self.sites: list[int] = []
        self.counts: list[int] = []
        #: per site of ``sites``: slots needed by the requests queued ahead of this one, plus the
        #: broker's ``shift`` of that site (kept by the broker; see SlotBroker._grant_all)
        self.ahead: list[int] = []
        #: the policy's sort key of this request, set by the broker when it has one
        self.rank: tuple[float, ...] = ()

    def __repr__(self) -> str:
        return (f"Request(demand_index={self.demand_index!r}, time_s={self.time_s!r}, "
                f"sequence={self.sequence!r}, need={self.need!r})")


class SchedulingPolicy(Protocol):
    """Orders waiting requests; the broker grants them in this order when their slots are free."""

    @property
    def name(self) -> str: ...

    def order(self, requests: list[Request]) -> list[Request]: ...


class SwapPolicy(Protocol):
    """Delay (s) an inner site waits, holding both qubits, before its Bell measurement."""

    @property
    def name(self) -> str: ...

    def swap_delay_s(self, site_index: int, n_hops: int, now_s: float) -> float: ...


@dataclass(frozen=True)
class _Sorted:
    name: str
    key: Callable[[Request], tuple[float, ...]]
    #: whether a new request always sorts after every waiting one (its key only grows with the
    #: request time and sequence): the broker then files it last without comparing keys
    newest_last: bool = False

    def order(self, requests: list[Request]) -> list[Request]:
        return sorted(requests, key=self.key)


def _rank(req: Request) -> tuple[float, ...]:
    return req.rank


@dataclass(frozen=True)
class _Asap:
    name: str = "asap"

    def swap_delay_s(self, site_index: int, n_hops: int, now_s: float) -> float:
        return 0.0


SCHEDULING: dict[str, SchedulingPolicy] = {
    "fair": _Sorted("fair", lambda r: (r.time_s, r.sequence), newest_last=True),
    "demand_order": _Sorted("demand_order", lambda r: (r.demand_index, r.time_s, r.sequence)),
}
SWAPPING: dict[str, SwapPolicy] = {"asap": _Asap()}


def register_scheduling(policy: SchedulingPolicy) -> None:
    """Add a scheduling plug-in under ``policy.name``."""
    SCHEDULING[policy.name] = policy


def register_swap(policy: SwapPolicy) -> None:
    """Add a swap-timing plug-in under ``policy.name``."""
    SWAPPING[policy.name] = policy


def scheduling_policy(name: str | SchedulingPolicy) -> SchedulingPolicy:
    """Look up a scheduling policy by name (``protocol.scheduling``)."""
    if not isinstance(name, str):
        return name
    if name not in SCHEDULING:
        raise ParameterError("protocol.scheduling", name, "one of " + ", ".join(SCHEDULING))
    return SCHEDULING[name]


def swap_policy(name: str | SwapPolicy) -> SwapPolicy:
    """Look up a swap policy by name (``protocol.swap_policy``)."""
    if not isinstance(name, str):
        return name
    if name not in SWAPPING:
        raise ParameterError("protocol.swap_policy", name, "one of " + ", ".join(SWAPPING))
    return SWAPPING[name]


class _Slots:
    """One site's memory slots as the broker keeps them (unboxed fields in the compiled build: a
    grant or release touches a few of them at every site of a path)."""

    __slots__ = ("blocked", "limit", "loads", "peak", "queue", "requests", "room", "shift", "since",
                 "time_at", "total", "waited")

    def __init__(self, limit: int) -> None:
        self.limit = limit
        self.room = limit  # free slots
        #: waiting requests that need slots here, in policy order
        self.queue: list[Request] = []
        #: waiting requests filed here because they did not fit here (_pass), in policy order
        self.blocked: list[Request] = []
        self.total = 0  # slots needed by the waiting
        #: subtracted from every waiting request's ``ahead`` here (_grant_all)
        self.shift = 0
        # occupancy statistics (SlotBroker.stats)
        self.since = 0.0
        #: time spent with 0, 1, ... slots in use (index = slots in use)
        self.time_at: list[float] = [0.0] * (limit + 1)
        self.peak = 0
        self.requests = 0
        self.waited = 0
        #: requests that met each load (index = slots in use + queued + own need)
        self.loads: list[int] = []

    def tick(self, now: float) -> None:
        """Credit the time since the last change to the current number of slots in use."""
        per_use, in_use = self.time_at, self.limit - self.room
        per_use[in_use] = per_use[in_use] + (now - self.since)
        self.since = now


class SlotBroker:
    """Grants path reservations of memory slots in the order a scheduling policy gives.

    ``request(demand_index, need, on_grant)`` queues a reservation; ``on_grant()`` is called once
    its slots are taken (at once when they are free). ``release(need)`` returns slots. Both take
    ``need`` in the broker's numbering too (:meth:`numbered`), for a caller that repeats it.

    The rule is the one in the module docstring. In one grant pass the slots a request may use at
    a site are ``max(0, free - needs of every waiting request ordered before it)``: a request
    ahead either takes its slots or earmarks them, the same number either way. So whether a
    request fits depends only on the free slots and the requests ahead of it at its own sites,
    and after a release only requests needing a released site can newly fit (for the others
    nothing they look at has changed since the last pass, after which none fitted). For the
    policies of :data:`SCHEDULING` the broker keeps one queue per site in policy order and tests
    only those requests (each waiting request is filed, in policy order, under one site where it
    does not fit and is tested again when that site frees slots); a plug-in policy without a
    sort key gets the plain full pass.
    """

    def __init__(self, capacity: dict[str, int], policy: SchedulingPolicy,
                 clock: Callable[[], float] = lambda: 0.0) -> None:
        self.policy, self.clock = policy, clock
        #: the sites, numbered: per site one _Slots, in a list indexed by that number (the
        #: per-cycle bookkeeping by name was a tenth of a grid run's instructions; per-site
        #: lists of boxed numbers then cost about a third of the broker's own work)
        self.names: list[str] = list(capacity)
        self.number: dict[str, int] = {name: k for k, name in enumerate(self.names)}
        self.slots: list[_Slots] = [_Slots(int(capacity[name])) for name in self.names]
        self.waiting: dict[int, tuple[Request, Callable[[], None]]] = {}
        self._sequence = 0
        self._key: Callable[[Request], tuple[float, ...]] | None = policy.key if isinstance(policy, _Sorted) else None
        self._newest_last = isinstance(policy, _Sorted) and policy.newest_last

    @property
    def free(self) -> dict[str, int]:
        """Free slots per site name."""
        return {name: self.slots[k].room for k, name in enumerate(self.names)}

    def numbered(self, need: dict[str, int]) -> tuple[list[int], list[int]]:
        """``need`` as (site numbers, slots at each), the form :meth:`request` and :meth:`release`
        work with; a caller that asks for the same ``need`` again and again passes it to them
        (the lists are only read)."""
        number = self.number
        return [number[name] for name in need], list(need.values())

    def request(self, demand_index: int, need: dict[str, int], on_grant: Callable[[], None],
                numbered: tuple[list[int], list[int]] | None = None) -> None:
        self._sequence += 1
        sites, counts = self.numbered(need) if numbered is None else numbered
        short = self._count_request(sites, counts)
        req = Request(demand_index, self.clock(), self._sequence, need)
        req.sites, req.counts = sites, counts
        self.waiting[req.sequence] = (req, on_grant)
        key = self._key
        slots = self.slots
        if key is None:
            self._full_pass()
        else:
            own = req.rank = key(req)
            newest_last = self._newest_last
            ahead = req.ahead = [0] * len(sites)
            for j in range(len(sites)):
                site, k = sites[j], counts[j]
                st = slots[site]
                queue = st.queue
                if queue and not newest_last and queue[-1].rank > own:
                    at = bisect.bisect_right(queue, own, key=_rank)
                    queue.insert(at, req)
                    ahead[j] = sum(other.counts[other.sites.index(site)] for other in queue[:at]) + st.shift
                    for other in queue[at + 1:]:
                        ahead_other = other.ahead
                        at_site = other.sites.index(site)
                        ahead_other[at_site] = ahead_other[at_site] + k
                else:
                    ahead[j] = st.total + st.shift
                    queue.append(req)
                st.total += k
            blocker = self._blocker(req)  # only the newcomer can fit: nobody else's room grew
            if blocker < 0:
                self._grant_all([req])
            elif newest_last:
                slots[blocker].blocked.append(req)
            else:
                bisect.insort(slots[blocker].blocked, req, key=_rank)
        if req.sequence in self.waiting:
            for site in short or sites:
                slots[site].waited += 1

    def _count_request(self, sites: list[int], counts: list[int]) -> list[int]:
        """Record what a new request meets at each of its sites (slots in use + queued before it
        + its own need) and return the sites where that exceeds the capacity."""
        short = []
        slots = self.slots
        incremental = self._key is not None
        for j in range(len(sites)):
            site, k = sites[j], counts[j]
            st = slots[site]
            if incremental:
                queued = st.total
            else:
                name = self.names[site]
                queued = sum(r.need.get(name, 0) for r, _ in self.waiting.values())
            load = st.limit - st.room + queued + k
            seen = st.loads
            if load >= len(seen):
                seen.extend([0] * (load + 1 - len(seen)))
            seen[load] = seen[load] + 1
            st.requests += 1
            if load > st.limit:
                short.append(site)
        return short

    def release(self, need: dict[str, int], numbered: tuple[list[int], list[int]] | None = None) -> None:
        """Return the slots of ``need`` (``numbered``: as :meth:`numbered` gives it)."""
        now, slots = self.clock(), self.slots
        sites, counts = self.numbered(need) if numbered is None else numbered
        for j in range(len(sites)):
            st = slots[sites[j]]
            st.tick(now)
            st.room += counts[j]
        if not self.waiting:
            return
        if self._key is None:
            self._full_pass()
        else:
            self._pass(sites)

    def stats(self) -> dict[str, dict[str, Any]]:
        """Per site: ``peak`` and ``p99`` slots reserved (99th percentile over time), ``requests``
        for a reservation there, ``waited`` (requests not granted at once, counted at the sites
        that were short), ``loads`` ({slots in use + queued + own need at the request: count}, by load)."""
        out: dict[str, dict[str, Any]] = {}
        now = self.clock()
        for st, name in zip(self.slots, self.names):
            st.tick(now)
            spent = {in_use: t for in_use, t in enumerate(st.time_at) if t > 0}
            total = sum(spent.values())
            p99, running = 0, 0.0
            for in_use in sorted(spent):
                running += spent[in_use]
                p99 = in_use
                if total > 0 and running >= 0.99 * total:
                    break
            out[name] = {"peak": st.peak, "p99": p99, "requests": st.requests,
                         "waited": st.waited, "loads": {load: count for load, count in enumerate(st.loads) if count}}
        return out

    def _blocker(self, req: Request) -> int:
        """A site where ``req`` does not fit behind the requests ahead of it, or -1 if it fits."""
        slots, ahead, sites, counts = self.slots, req.ahead, req.sites, req.counts
        for j in range(len(sites)):
            st = slots[sites[j]]
            if st.room - (ahead[j] - st.shift) < counts[j]:
                return sites[j]
        return -1

    def _pass(self, changed: list[int]) -> None:
        """Grant every waiting request that fits after slots at ``changed`` were freed.

        A waiting request is filed under a site where it did not fit; its room there can only
        grow when that site frees slots (requests ahead leave only by taking their slots), so
        only the requests filed under ``changed`` are tested again. Each site's file is kept in
        policy order, in which a request's slots ahead plus its own need only grow (the slots
        ahead of one request include everything ahead of and needed by the one before it): the
        requests that now fit at the site are a head of its file, and the test stops at the
        first that does not (on a 100-demand grid three re-tests in four used to fail there)."""
        key = self._key
        if key is None:
            self._full_pass()
            return
        fitting: list[Request] = []
        slots = self.slots
        for site in changed:
            st = slots[site]
            filed = st.blocked
            free = st.room + st.shift
            n = 0
            for req in filed:
                j = req.sites.index(site)
                if free - req.ahead[j] < req.counts[j]:
                    break
                n += 1
            if n == 0:
                continue
            head = filed[:n]
            del filed[:n]
            for req in head:
                ahead, sites, counts = req.ahead, req.sites, req.counts
                for j in range(len(sites)):  # _blocker, inlined
                    other = slots[sites[j]]
                    if other.room - (ahead[j] - other.shift) < counts[j]:
                        bisect.insort(other.blocked, req, key=_rank)
                        break
                else:
                    fitting.append(req)
        if fitting:
            fitting.sort(key=_rank)
            self._grant_all(fitting)

    def _full_pass(self) -> None:
        """Grant in policy order. A request that cannot be served earmarks what it needs, so
        later requests may use only slots it does not need (no demand starves: the slots it
        waits for can only accumulate)."""
        used = [0] * len(self.names)
        slots = self.slots
        fitting = []
        for req in self.policy.order([r for r, _ in self.waiting.values()]):
            sites, counts = req.sites, req.counts
            if all(slots[sites[j]].room - used[sites[j]] >= counts[j] for j in range(len(sites))):
                fitting.append(req)
            for j in range(len(sites)):
                used[sites[j]] = used[sites[j]] + counts[j]
        self._grant_all(fitting)

    def _grant_all(self, granted: list[Request]) -> None:
        """Take the slots of ``granted`` (all found to fit in one pass), then call back in order."""
        now, slots, incremental = self.clock(), self.slots, self._key is not None
        for req in granted:
            sites, counts = req.sites, req.counts
            for j in range(len(sites)):
                s, k = sites[j], counts[j]
                st = slots[s]
                in_use = st.limit - st.room
                st.tick(now)
                st.room -= k
                if in_use + k > st.peak:
                    st.peak = in_use + k
                if incremental:
                    # every request behind this one has k fewer slots ahead: the site's shift
                    # grows by k and the few ahead of it (grants come from near the head: 0.1
                    # ahead and 6.6 behind on average on a 100-demand grid) are compensated
                    queue = st.queue
                    at = 0
                    while queue[at] is not req:  # grants come from near the head (below)
                        at += 1
                    queue.pop(at)  # (pop, not del: del on a list item is a generic call when compiled)
                    st.shift += k
                    for x in range(at):
                        other = queue[x]
                        ahead_other = other.ahead
                        at_site = other.sites.index(s)
                        ahead_other[at_site] = ahead_other[at_site] + k
                    st.total -= k
        for req in granted:
            _, on_grant = self.waiting.pop(req.sequence)
            on_grant()
