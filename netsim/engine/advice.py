"""What would fix a demand that misses its ``min_fidelity``: advice printed by ``netsim check``.

For each demand whose planning estimate (:func:`netsim.network.estimate_route`, memory decay
included) is below ``min_fidelity``, three remedies are weighed from what the model knows:

- **memory coherence**: the smallest T2, the same at every memory site of the route (T1 raised
  to at least T2 / 2 where needed), at which the estimate reaches ``min_fidelity``; found by
  bisection on log T2. When even T2 = infinity is not enough, memory is not the problem.
- **purification**: 1 to 3 recurrence rounds on every hop with the protocol whose first round
  helps most (BBPSSW, Bennett et al., PRL 76, 722 (1996); DEJMPS, Deutsch et al., PRL 77, 2818
  (1996)). A hop then needs prod_k 2 / N_k heralded pairs per purified pair (N_k the success
  probability of round k), so its success per attempt round is divided by that; the estimate is
  redone with the purified states. Storage while a hop waits for its second pair is not counted.
- **cut-off**: the demand alone at cut-offs of 0.25 to 8 times the expected time until every
  hop holds a pair, each from the sampled swap-asap timeline with that cut-off
  (:func:`netsim.network.estimate.cutoff_scan_point`: the timeline the vectorised engine runs,
  every sampled cycle's own delivered state, useful when its fidelity reaches ``min_fidelity``);
  the cut-off with the highest useful-pair rate is named with that rate. No simulation runs:
  the sample is seeded and cached, so the scan is quick and the same every time. A one-hop route
  is delivered at its herald, so no cut-off acts on it.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import networkx as nx

from netsim.errors import NetsimError
from netsim.network import build_graph, find_route, route_hops
from netsim.network.audit import one_round
from netsim.network.estimate import cutoff_scan_point, estimate_hops
from netsim.network.routing import Hop
from netsim.scenario.model import Scenario, Site

__all__ = ["CUTOFF_FACTORS", "best_cutoff", "coherence_needed_s", "demand_advice", "purified_estimate"]

#: Cut-offs tried, as multiples of the expected time until every hop holds a pair.
CUTOFF_FACTORS: tuple[float, ...] = (0.25, 0.5, 1.0, 2.0, 4.0, 8.0)


def _sites(graph: nx.Graph, hops: list[Hop]) -> list[Site]:
    return [graph.nodes[h.a]["site"] for h in hops] + [graph.nodes[hops[-1].b]["site"]]


def coherence_needed_s(graph: nx.Graph, hops: list[Hop], min_fidelity: float) -> float | None:
    """Smallest common T2 (s) of the route's memories at which the estimate reaches
    ``min_fidelity``; None when even no decay at all is not enough."""
    sites = _sites(graph, hops)

    def fidelity(t2: float) -> float:
        changed = [dataclasses.replace(s, t2_s=t2, t1_s=max(s.t1_s, t2 / 2)) for s in sites]
        return estimate_hops(graph, hops, changed).fidelity

    if estimate_hops(graph, hops).fidelity_no_decay < min_fidelity or fidelity(1e9) < min_fidelity:
        return None
    low, high = 1e-9, 1e9  # bisection on log T2: fidelity(low) < min <= fidelity(high)
    for _ in range(80):
        mid = math.sqrt(low * high)
        low, high = (low, mid) if fidelity(mid) >= min_fidelity else (mid, high)
        if high / low < 1.001:
            break
    return high


def _purified_hops(hops: list[Hop], protocol: str, rounds: int) -> list[Hop]:
    """``hops`` with ``rounds`` recurrence rounds on each: the purified state, the success per round
    scaled by the rounds' success (two pairs per round)."""
    from netsim import qinfo

    purify = qinfo.purify_dejmps if protocol == "dejmps" else qinfo.purify_bbpssw
    new = []
    for hop in hops:
        state, factor = hop.physics.state, 1.0
        for _ in range(rounds):
            success, _ = one_round(state, protocol)
            _, state = purify(state, state)
            factor *= success / 2.0
        physics = dataclasses.replace(hop.physics, state=state,
                                      round_success_probability=hop.physics.round_success_probability * factor)
        new.append(dataclasses.replace(hop, physics=physics))
    return new


def purified_estimate(graph: nx.Graph, hops: list[Hop], protocol: str, rounds: int) -> tuple[float, float]:
    """(rate per s, fidelity) of the estimate with ``rounds`` recurrence rounds on every hop."""
    est = estimate_hops(graph, _purified_hops(hops, protocol, rounds))
    return est.rate_per_s, est.fidelity


def purified_ceiling(graph: nx.Graph, hops: list[Hop], protocol: str, rounds: int) -> float:
    """The fidelity the purified route would deliver with no memory decay at all (closed form, no
    sampled timeline): an upper bound of :func:`purified_estimate`'s, since decay only lowers it."""
    return estimate_hops(graph, _purified_hops(hops, protocol, rounds), cutoff_s=None).fidelity_no_decay


def best_cutoff(graph: nx.Graph, hops: list[Hop], wait_s: float,
                min_fidelity: float) -> tuple[float, float, float] | None:
    """(cut-off s, useful rate per s, mean fidelity) of the scanned cut-off with the highest
    useful rate (module docstring), or None when none delivers."""
    best = None
    for factor in CUTOFF_FACTORS:
        cutoff = factor * wait_s
        point = cutoff_scan_point(graph, hops, cutoff, min_fidelity)
        if point is not None and (best is None or point[1] > best[1]):
            best = (cutoff, point[1], point[2])
    return best


def demand_advice(scenario: Scenario, *, simulate: bool = True) -> list[str]:
    """One line per remedy for every demand whose estimate misses ``min_fidelity``.

    ``simulate`` False skips the cut-off scan (closed forms only).
    """
    graph = build_graph(scenario)
    out: list[str] = []
    for demand in scenario.demands:
        try:
            hops = route_hops(graph, find_route(graph, demand.a, demand.b, scenario.protocol.routing))
        except NetsimError:
            continue
        est = estimate_hops(graph, hops)
        need = demand.min_fidelity
        if not (est.fidelity < need):
            continue
        label = f"demands[{demand.index}] ({demand.name})"
        out.append(f"{label}: to reach min_fidelity {need:g} (estimate {est.fidelity:.3g}):")
        t2 = coherence_needed_s(graph, hops, need)
        out.append(f"{label}:   memory coherence: t2_s >= {t2:.3g} s at every memory site of the route"
                   if t2 is not None else
                   f"{label}:   memory coherence cannot: without any memory decay the estimate is "
                   f"{est.fidelity_no_decay:.3g}")
        out.append(f"{label}:   {_purification_line(graph, hops, need)}")
        if simulate and len(hops) == 1:
            out.append(f"{label}:   cut-off cannot: a one-hop route is delivered at its herald")
        elif simulate and math.isfinite(est.wait_s):
            best = best_cutoff(graph, hops, est.wait_s, need)
            if best is not None and best[1] > 0:
                out.append(f"{label}:   cut-off: cutoff_s = {best[0]:.3g} s gives the highest useful rate of "
                           f"the scan, {best[1]:.3g} pairs/s (mean fidelity {best[2]:.3g}; estimate from "
                           "the sampled timeline)")
            else:
                out.append(f"{label}:   cut-off: no cut-off of the scan ({CUTOFF_FACTORS[0]:g} to "
                           f"{CUTOFF_FACTORS[-1]:g} x {est.wait_s:.3g} s) gives useful pairs")
    return out


def _purification_line(graph: nx.Graph, hops: list[Hop], need: float) -> str:
    gains: dict[str, float] = {}
    for protocol in ("bbpssw", "dejmps"):
        gains[protocol] = min(one_round(h.physics.state, protocol)[1] - h.physics.fidelity for h in hops)
    protocol = max(gains, key=lambda k: gains[k])
    results: list[Any] = []
    ceilings: list[tuple[int, float]] = []
    for rounds in (1, 2, 3):
        ceiling = purified_ceiling(graph, hops, protocol, rounds)
        ceilings.append((rounds, ceiling))
        # decay only lowers a fidelity above 1/2 (T1 damping can lift one below it towards 1/2):
        # when even the route without any decay misses, the timeline need not be sampled
        if need > 0.5 and not ceiling >= need:
            continue
        rate, fid = purified_estimate(graph, hops, protocol, rounds)
        results.append((rounds, rate, fid))
        if fid >= need:
            return (f"purification: {rounds} {protocol} round(s) on every hop: estimate {fid:.3g} at "
                    f"{rate:.3g} pairs/s (purification = \"{protocol}\", purification_rounds = {rounds})")
    if not results:
        top = max(ceilings, key=lambda r: r[1] if math.isfinite(r[1]) else -1.0)
        return (f"purification cannot: {top[0]} {protocol} round(s) on every hop reach at most {top[1]:.3g} "
                "even without memory decay")
    best = max(results, key=lambda r: r[2])
    return (f"purification cannot: {best[0]} {protocol} round(s) on every hop reach only {best[2]:.3g} "
            "(memory decay while waiting grows with the rounds)")
