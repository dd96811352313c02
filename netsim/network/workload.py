"""What a run of a demand costs, and cut-offs that no pair can ever meet.

Two questions asked before anything is simulated (by ``check``, ``budget``, ``run``, ``sweep``
and every command that runs the engine):

1. Can a pair be delivered at all within the cut-off? A hop's pair is valid from the start of
   its successful round and usable only once heralded and moved to memory, ``ready`` = herald
   delay (the attempt period: preparation plus the light's round trip) + memory transfer time.
   With a cut-off ``c`` on a route of two hops or more, a pair whose ``ready >= c`` is always
   discarded before it can be swapped; and two hops that take turns at a site with one
   communication qubit need ``ready_i + ready_j < c`` (the second starts attempting only once
   the first's pair is in memory, while the first's cut-off clock runs). Either is a scenario
   error (:func:`cutoff_problems`): no pair can ever survive, and a run would never end.

2. How long will it take? :func:`route_work` gives, in natural logarithms so that success
   probabilities of 1e-9 or 5e-324 neither overflow nor underflow, the expected number of
   heralded link pairs the engine handles per delivered pair (its work: failed rounds cost
   nothing, the clock jumps over them) and the expected simulated seconds per delivered pair:

   - a hop: ``E[K] T = T / q`` (K ~ Geometric(q) rounds of period T);
   - a chain without a cut-off: ``max_i T_i / q_i`` until every hop holds a pair (a lower
     bound on E[max_i K_i T_i]), and ``n`` link pairs, both divided by ``prod_j p_j`` (a
     failed Bell measurement at inner site j, probability 1 - p_j, loses the segments it joins;
     exact for two hops, a lower bound beyond);
   - with a cut-off: a delivery needs every hop's pair to be born within the cut-off window of
     the oldest. Given the oldest, hop i has about ``k_i = (c - ready_i - wait_i) / T_i`` rounds
     to succeed (``wait_i`` the ready time of a neighbour it takes turns with at a one-qubit
     site), so a try succeeds with ``P = prod_i (1 - (1 - q_i)^k_i)`` (the oldest hop chosen to
     make P largest), and a delivery takes ``1 / P`` tries of about ``1 / sum_i(q_i / T_i) + c``
     seconds and ``n`` link pairs each;
   - purification: ``2^rounds`` link pairs per purified pair (a lower bound: failed rounds add).

   These are order-of-magnitude planning figures (within a factor of about two of the event
   engine on the bundled scenarios), meant to tell a run of minutes from one of years, not to
   replace :func:`netsim.network.estimate.estimate_route`. The wall-clock figure divides the
   link pairs by :data:`LINK_PAIRS_PER_S`, a conservative engine throughput.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from netsim.errors import Problem, format_value
from netsim.network.routing import Hop
from netsim.scenario.model import Scenario, Site

__all__ = ["DEFAULT_MAX_LINK_PAIRS", "LINK_PAIRS_PER_S", "RouteWork", "cutoff_problems", "describe_seconds",
           "hop_ready_s", "route_work"]

#: Default limit on the link pairs a run may be expected to herald: at :data:`LINK_PAIRS_PER_S`
#: about three minutes of engine time (``netsim run --max-link-pairs`` raises it).
DEFAULT_MAX_LINK_PAIRS = 1_000_000
#: Heralded link pairs the event engine handles per second of wall-clock time, for the time
#: figure of a refusal: measured 8,000-15,000 on the bundled chain and mesh on one busy core;
#: the lower figure keeps the estimate on the safe side.
LINK_PAIRS_PER_S = 5_000.0


@dataclass(frozen=True)
class RouteWork:
    """Expected work per delivered pair of one route (module docstring), as natural logs.

    ``log_link_pairs``: log of the heralded link pairs per delivered pair; ``log_seconds``: log of
    the simulated seconds per delivered pair. Either is ``inf`` where no pair can be delivered.
    """

    log_link_pairs: float
    log_seconds: float

    @property
    def link_pairs(self) -> float:
        """Link pairs per delivered pair (``inf`` beyond the float range)."""
        return _exp(self.log_link_pairs)

    @property
    def seconds(self) -> float:
        """Simulated seconds per delivered pair (``inf`` beyond the float range)."""
        return _exp(self.log_seconds)


def _exp(x: float) -> float:
    return math.inf if x > 709.0 else math.exp(x)


def _log(x: float) -> float:
    return math.log(x) if x > 0 else -math.inf


def _log_success_within(q: float, rounds: float) -> float:
    """log(1 - (1 - q)^rounds): the chance of at least one success in ``rounds`` (fractional)
    rounds, accurate for q of 5e-324 and for q = 1."""
    if rounds <= 0 or q <= 0:
        return -math.inf
    if q >= 1:
        return 0.0
    x = rounds * math.log1p(-q)
    p = -math.expm1(x)
    if p > 0:
        return math.log(p)
    return math.log(rounds) + math.log(q)  # rounds * q underflowed in the exponent: first order


def _logsumexp(values: Sequence[float]) -> float:
    top = max(values)
    if not math.isfinite(top):
        return top
    return top + math.log(math.fsum(math.exp(v - top) for v in values))


def hop_ready_s(hops: Sequence[Hop], sites: Sequence[Site]) -> list[float]:
    """Per hop: herald delay plus the longer memory transfer of its two ends (seconds from the
    start of the successful round until the pair is usable; the engine's ``Chain.ready_s``)."""
    return [h.physics.herald_delay_s + max(sites[i].memory_transfer_s, sites[i + 1].memory_transfer_s)
            for i, h in enumerate(hops)]


def _shares(sites: Sequence[Site]) -> list[bool]:
    """Per inner site: whether its two hops take turns at a single communication qubit."""
    return [s.communication_qubits == 1 for s in sites[1:-1]]


def route_work(q: Sequence[float], period_s: Sequence[float], ready_s: Sequence[float],
               swap_p: Sequence[float], cutoff_s: float | None, shared: Sequence[bool] = (),
               purification_rounds: int = 0) -> RouteWork:
    """Expected link pairs and simulated seconds per delivered pair (module docstring).

    Per hop: ``q`` success probability per round, ``period_s``, ``ready_s``; per inner site:
    ``swap_p`` Bell-measurement success and ``shared`` (one communication qubit).
    """
    n = len(q)
    shared = list(shared) or [False] * (n - 1)
    if any(p <= 0 for p in q) or any(p <= 0 for p in swap_p):
        return RouteWork(math.inf, math.inf)
    log_t = [math.log(t) for t in period_s]
    log_q = [math.log(p) for p in q]
    log_swaps = math.fsum(math.log(p) for p in swap_p)
    log_pur = purification_rounds * math.log(2.0)
    if cutoff_s is None or n < 2:
        log_seconds = max(t - p for t, p in zip(log_t, log_q)) - log_swaps + log_pur
        return RouteWork(math.log(n) - log_swaps + log_pur, log_seconds)
    # per hop, the log of its success within the cut-off after waiting for a neighbour that shares
    # its site's one communication qubit; then, per choice of the oldest hop, the sum over the others
    terms = []
    for i in range(n):
        wait = max([ready_s[j] for j in (i - 1, i + 1)
                    if 0 <= j < n and shared[min(i, j)]], default=0.0)
        terms.append(_log_success_within(q[i], (cutoff_s - ready_s[i] - wait) / period_s[i]))
    best = -math.inf
    for oldest in range(n):
        log_p = 0.0
        for i in range(n):
            if i != oldest:
                log_p += terms[i]
        best = max(best, log_p)
    if best == -math.inf:
        return RouteWork(math.inf, math.inf)
    log_tries = -best - log_swaps + log_pur
    first = -_logsumexp([p - t for p, t in zip(log_q, log_t)])  # time until some hop's pair
    log_try_s = _logsumexp([first, math.log(cutoff_s)])
    return RouteWork(math.log(n) + log_tries, log_tries + log_try_s)


def _site_index(scenario: Scenario) -> dict[str, int]:
    return {s.name: k for k, s in enumerate(scenario.sites)}


def cutoff_problems(scenario: Scenario, demand_label: str, hops: Sequence[Hop],
                    sites: Sequence[Site]) -> list[Problem]:
    """Why no pair of this route can ever be delivered within the scenario's cut-off (empty if
    one can): the key that makes a hop's pair too slow, or the one-qubit site two hops take
    turns at, with its value and the cut-off (module docstring). One hop: the cut-off never acts."""
    cutoff = scenario.protocol.cutoff_s
    if cutoff is None or len(hops) < 2:
        return []
    index = _site_index(scenario)
    ready = hop_ready_s(hops, sites)
    found: dict[str, Problem] = {}
    for i, hop in enumerate(hops):
        if ready[i] < cutoff:
            continue
        a, b = sites[i], sites[i + 1]
        prep_site = a if a.attempt_prep_time_s >= b.attempt_prep_time_s else b
        move_site = a if a.memory_transfer_s >= b.memory_transfer_s else b
        prep, move = prep_site.attempt_prep_time_s, move_site.memory_transfer_s
        flight = max(ready[i] - prep - move, 0.0)
        parts = [(prep, f"sites[{index[prep_site.name]}].attempt_prep_time_s", prep),
                 (move, f"sites[{index[move_site.name]}].memory_transfer_s", move),
                 (flight, f"links[{hop.links[0].index}].length_km", hop.links[0].length_km)]
        _, key, value = max(parts, key=lambda part: part[0])
        found.setdefault(key, Problem(key, (
            f"{format_value(value)} is not allowed with protocol.cutoff_s = {cutoff:g}: a pair of hop "
            f"{hop.a}-{hop.b} ({demand_label}) is usable only {ready[i]:.4g} s after its round starts "
            f"(herald {hop.physics.herald_delay_s:.4g} s + memory transfer {move:.4g} s), so the cut-off "
            f"always discards it and no pair is ever delivered; expected a hop ready in less than cutoff_s "
            f"(a smaller value here, or a longer cutoff_s)")))
    for j, turn in enumerate(_shares(sites)):
        both = ready[j] + ready[j + 1]
        site = sites[j + 1]
        key = f"sites[{index[site.name]}].communication_qubits"
        if turn and ready[j] < cutoff and ready[j + 1] < cutoff and both >= cutoff and key not in found:
            found[key] = Problem(key, (
                f"1 is not allowed with protocol.cutoff_s = {cutoff:g}: its two hops on {demand_label} "
                f"take turns at its one communication qubit and need {ready[j]:.4g} s + {ready[j + 1]:.4g} s "
                f"= {both:.4g} s until both pairs are usable, so the cut-off always discards the first and no "
                f"pair is ever delivered; expected communication_qubits >= 2 or a cutoff_s above {both:.4g} s"))
    return list(found.values())


def describe_seconds(seconds: float) -> str:
    """A duration in the largest fitting unit (``42 s``, ``3.1 min``, ``2.5 h``, ``4.2 days``,
    ``3.1e+04 years``); ``forever`` for a duration beyond the float range."""
    if not math.isfinite(seconds):
        return "forever"
    for unit, size in (("years", 365.25 * 86400.0), ("days", 86400.0), ("h", 3600.0), ("min", 60.0)):
        if seconds >= size:
            return f"{seconds / size:.2g} {unit}"
    return f"{seconds:.2g} s"
