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

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol

import simpy

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


@dataclass
class Request:
    """A waiting path reservation: which demand, when it asked, and slots needed per site."""

    demand_index: int
    time_s: float
    sequence: int
    need: dict[str, int]


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

    def order(self, requests: list[Request]) -> list[Request]:
        return sorted(requests, key=self.key)


@dataclass(frozen=True)
class _Asap:
    name: str = "asap"

    def swap_delay_s(self, site_index: int, n_hops: int, now_s: float) -> float:
        return 0.0


SCHEDULING: dict[str, SchedulingPolicy] = {
    "fair": _Sorted("fair", lambda r: (r.time_s, r.sequence)),
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


class SlotBroker:
    """Grants path reservations of memory slots in the order a scheduling policy gives."""

    def __init__(self, env: simpy.Environment, capacity: dict[str, int], policy: SchedulingPolicy) -> None:
        self.env, self.free, self.policy = env, dict(capacity), policy
        self.waiting: list[tuple[Request, simpy.Event]] = []
        self._sequence = 0
        # occupancy statistics per site (see stats())
        self.capacity = dict(capacity)
        self._since = dict.fromkeys(capacity, 0.0)
        self._time_at: dict[str, dict[int, float]] = {s: {} for s in capacity}
        self._peak = dict.fromkeys(capacity, 0)
        self._requests = dict.fromkeys(capacity, 0)
        self._waited = dict.fromkeys(capacity, 0)
        self._loads: dict[str, dict[int, int]] = {s: {} for s in capacity}

    def request(self, demand_index: int, need: dict[str, int]) -> simpy.Event:
        event = self.env.event()
        self._sequence += 1
        short = []
        for site, k in need.items():  # slots in use + queued before it + its own
            load = self.capacity[site] - self.free[site] + sum(r.need.get(site, 0) for r, _ in self.waiting) + k
            self._loads[site][load] = self._loads[site].get(load, 0) + 1
            self._requests[site] += 1
            if load > self.capacity[site]:
                short.append(site)
        self.waiting.append((Request(demand_index, self.env.now, self._sequence, need), event))
        self._grant()
        if not event.triggered:
            for site in short or list(need):
                self._waited[site] += 1
        return event

    def release(self, need: dict[str, int]) -> None:
        for site, k in need.items():
            self._tick(site)
            self.free[site] += k
        self._grant()

    def _tick(self, site: str) -> None:
        """Credit the time since the last change to the current number of slots in use."""
        in_use = self.capacity[site] - self.free[site]
        spent = self._time_at[site]
        spent[in_use] = spent.get(in_use, 0.0) + self.env.now - self._since[site]
        self._since[site] = self.env.now

    def stats(self) -> dict[str, dict[str, Any]]:
        """Per site: ``peak`` and ``p99`` slots reserved (99th percentile over time), ``requests``
        for a reservation there, ``waited`` (requests not granted at once, counted at the sites
        that were short), ``loads`` ({slots in use + queued + own need at the request: count})."""
        out: dict[str, dict[str, Any]] = {}
        for site in self.capacity:
            self._tick(site)
            spent = self._time_at[site]
            total = sum(spent.values())
            p99, running = 0, 0.0
            for in_use in sorted(spent):
                running += spent[in_use]
                p99 = in_use
                if total > 0 and running >= 0.99 * total:
                    break
            out[site] = {"peak": self._peak[site], "p99": p99, "requests": self._requests[site],
                         "waited": self._waited[site], "loads": dict(self._loads[site])}
        return out

    def _grant(self) -> None:
        """Grant in policy order. A request that cannot be served earmarks what it needs, so
        later requests may use only slots it does not need (no demand starves: the slots it
        waits for can only accumulate)."""
        events = {id(r): e for r, e in self.waiting}
        spare = dict(self.free)
        for req in self.policy.order([r for r, _ in self.waiting]):
            if all(spare[s] >= k for s, k in req.need.items()):
                for s, k in req.need.items():
                    self._tick(s)
                    self.free[s] -= k
                    self._peak[s] = max(self._peak[s], self.capacity[s] - self.free[s])
                    spare[s] -= k
                self.waiting = [(r, e) for r, e in self.waiting if r is not req]
                events[id(req)].succeed()
            else:
                for s, k in req.need.items():
                    spare[s] = max(0, spare[s] - k)
