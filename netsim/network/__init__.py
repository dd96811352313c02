"""netsim.network: scenario -> networkx graph, routing policies, link budgets, network bounds.

Contract (DEVELOPERS.md): ``build_graph(scenario)``, ``find_route(graph, a, b, policy)``,
``route_hops(graph, route) -> list[Hop]``, ``budget(scenario) -> Budget``,
``estimate_route(graph, route) -> RouteEstimate`` (rate and fidelity with memory decay).
"""

from netsim.network.budget import Budget, budget
from netsim.network.estimate import RouteEstimate, estimate_route
from netsim.network.graph import build_graph, plob_bits_per_use
from netsim.network.routing import (
    POLICIES,
    Hop,
    RoutingPolicy,
    find_route,
    register_policy,
    route_hops,
    widest_path,
)

__all__ = [
    "POLICIES",
    "Budget",
    "Hop",
    "RouteEstimate",
    "RoutingPolicy",
    "budget",
    "build_graph",
    "estimate_route",
    "find_route",
    "plob_bits_per_use",
    "register_policy",
    "route_hops",
    "widest_path",
]
