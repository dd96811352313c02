"""The planning estimate of one route that the design reads: expected rate and fidelity.

The design reads rates and fidelities from this one function. It is the planning estimate every
other command uses (:func:`netsim.network.estimate_route`): swap as soon as possible, the exact
expected delivery time (failed Bell measurements included), and each hop's heralded state
decohered in memory for the expected storage times of its qubits, then swapped with the gate
errors. So a design meets ``min_fidelity`` in the same estimate that ``netsim check`` and
``netsim budget`` show, memory decay and the scenario's cut-off included.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import networkx as nx

from netsim.network.estimate import estimate_hops
from netsim.network.routing import route_hops

__all__ = ["RouteEstimate", "route_estimate"]


@dataclass(frozen=True)
class RouteEstimate:
    """Expected delivery rate (pairs/s) and fidelity of a route, and its heralded hops."""

    rate_per_s: float
    fidelity: float
    hops: int


def route_estimate(graph: nx.Graph, route: Sequence[str]) -> RouteEstimate:
    """Planning rate and fidelity of ``route`` in ``graph`` (from :func:`netsim.network.build_graph`).

    :func:`netsim.network.estimate.estimate_hops` (its module docstring derives it and says what
    it leaves out: purification, contention with other demands); the scenario's cut-off is in it
    (a sampled timeline, not a closed form, when it acts). A route whose fidelity
    cannot be estimated (a hop that never succeeds) gets rate 0 and fidelity 0.
    """
    hops = route_hops(graph, list(route))
    estimate = estimate_hops(graph, hops)
    fidelity = estimate.fidelity if math.isfinite(estimate.fidelity) else 0.0
    return RouteEstimate(float(estimate.rate_per_s), float(fidelity), len(hops))
