"""netsim.network: scenario -> networkx graph, routing policies, link budgets, network bounds.

Contract (DEVELOPERS.md): ``build_graph(scenario)``, ``find_route(graph, a, b, policy)``,
``route_hops(graph, route) -> list[Hop]``, ``budget(scenario) -> Budget``.
"""

from netsim.network.budget import Budget, budget
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
    "RoutingPolicy",
    "budget",
    "build_graph",
    "find_route",
    "plob_bits_per_use",
    "register_policy",
    "route_hops",
    "widest_path",
]
