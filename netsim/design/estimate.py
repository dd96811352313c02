"""The closed-form estimate of one route: expected rate and fidelity of delivered pairs.

This is the only place the design reads rates and fidelities from, so a refined closed form (for
example one that counts memory decay while hops wait) replaces this one function.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import networkx as nx

from netsim.network.bounds import chain_fidelity, expected_wait_s
from netsim.network.routing import route_hops

__all__ = ["RouteEstimate", "route_estimate"]


@dataclass(frozen=True)
class RouteEstimate:
    """Expected delivery rate (pairs/s) and fidelity of a route, and its heralded hops."""

    rate_per_s: float
    fidelity: float
    hops: int


def route_estimate(graph: nx.Graph, route: Sequence[str]) -> RouteEstimate:
    """Closed-form rate and fidelity of ``route`` in ``graph`` (from :func:`netsim.network.build_graph`).

    Swap as soon as possible with unlimited memory time: the expected time until every hop holds
    a pair (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019; hops clocked at the slowest
    attempt period) times the product of the inner sites' Bell-state-measurement success gives
    the rate; hop pairs twirled to Werner states and swapped (w multiplies, gate errors
    depolarize) give the fidelity (:func:`netsim.network.bounds.chain_fidelity`). Memory decay is
    not counted, as in ``netsim budget``.
    """
    hops = route_hops(graph, list(route))
    inner = [graph.nodes[h.b]["site"] for h in hops[:-1]]
    wait = expected_wait_s([h.physics.round_success_probability for h in hops],
                           [h.physics.attempt_period_s for h in hops])
    bsm = math.prod(s.bsm_success_probability for s in inner)
    rate = bsm / wait if wait > 0 and math.isfinite(wait) else 0.0
    fidelity = chain_fidelity([h.physics.fidelity for h in hops], [s.gate_error for s in inner])
    return RouteEstimate(rate, fidelity, len(hops))
