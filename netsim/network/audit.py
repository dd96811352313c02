"""Planning warnings for ``netsim check``: a valid scenario that will still disappoint.

Each warning is one line naming the element as written in the file (``links[3]``,
``demands[0]``), the figure and the threshold it misses.
"""

from __future__ import annotations

from dataclasses import fields
from typing import Any

import networkx as nx

from netsim.hardware.lightpath import LightPath
from netsim.network.budget import Budget, budget
from netsim.network.graph import build_graph
from netsim.network.routing import find_route
from netsim.scenario.model import Link, Scenario

__all__ = ["MAX_DARK_COUNT_FRACTION", "MIN_RATE_PER_S", "audit", "summary"]

#: A link (or switched light path) heralding fewer pairs per second than this is flagged as far
#: beyond what its scheme can bridge.
MIN_RATE_PER_S: float = 1e-3
#: Flag links where more than this share of heralds come from detector dark counts.
MAX_DARK_COUNT_FRACTION: float = 0.1

#: Link settings that must agree along a light path through switches (the first link's apply).
_HERALD_KEYS = ("scheme", "modes", "detector_efficiency", "dark_count_probability",
                "midpoint_fraction", "bright_state_population", "pair_probability", "phase_noise_rad")


def summary(scenario: Scenario) -> dict[str, Any]:
    """Counts for the check summary: sites by role, links, fibre length, demands."""
    def count(role: str) -> int:
        return sum(1 for s in scenario.sites if s.role == role)

    return {"name": scenario.name, "sites": len(scenario.sites), "users": count("user"),
            "repeaters": count("repeater"), "switches": count("switch"),
            "links": len(scenario.links), "fibre_km": sum(k.length_km for k in scenario.links),
            "demands": len(scenario.demands), "routing": scenario.protocol.routing}


def audit(scenario: Scenario, result: Budget | None = None) -> list[str]:
    """Every planning warning for ``scenario`` (empty when nothing looks wrong)."""
    result = result if result is not None else budget(scenario)
    graph = build_graph(scenario)
    warnings = _link_warnings(scenario, graph) + _path_warnings(scenario, graph)
    warnings += _isolated_sites(scenario, graph) + _memory_warnings(scenario, result)
    return warnings + list(result.warnings)


def _link_warnings(scenario: Scenario, graph: nx.Graph) -> list[str]:
    out = []
    for link in scenario.links:
        physics = graph.edges[link.a, link.b]["physics"]
        if physics is None:
            continue
        out += _physics_warnings(f"links[{link.index}] ({link.name})", link.scheme, physics)
    return out


def _physics_warnings(label: str, scheme: str, physics: Any) -> list[str]:
    out = []
    if physics.rate_per_s < MIN_RATE_PER_S:
        out.append(f"{label}: {physics.rate_per_s:.3g} pairs/s at {physics.loss_db:.3g} dB is below "
                   f"{MIN_RATE_PER_S:g} pairs/s; the link is far beyond what {scheme} heralding can bridge")
    if physics.fidelity <= 0.5:
        out.append(f"{label}: heralded fidelity {physics.fidelity:.3g} is not above 1/2; twirled to a Werner "
                   "state the pairs are separable (no entanglement)")
    if physics.dark_count_fraction > MAX_DARK_COUNT_FRACTION:
        out.append(f"{label}: {physics.dark_count_fraction:.2%} of heralds come from dark counts "
                   f"(more than {MAX_DARK_COUNT_FRACTION:.0%}); fidelity {physics.fidelity:.3g}")
    return out


def _path_warnings(scenario: Scenario, graph: nx.Graph) -> list[str]:
    """Light paths through switches on the demands' routes: rate, dark counts, mixed settings."""
    from netsim.errors import ParameterError
    from netsim.network.routing import route_hops

    out, seen = [], set()
    for demand in scenario.demands:
        try:
            route = find_route(graph, demand.a, demand.b, scenario.protocol.routing)
        except ParameterError:
            continue  # reported by the budget's own warning for this demand
        for hop in route_hops(graph, route):
            key = tuple(k.index for k in hop.links)
            if len(hop.links) < 2 or frozenset(key) in seen:  # either walking direction
                continue
            seen.add(frozenset(key))
            label = "light path " + " + ".join(f"links[{i}]" for i in key) + f" ({hop.a} to {hop.b})"
            out += _physics_warnings(label, hop.physics.scheme, hop.physics)
            path = LightPath.join(hop.links, scenario.site(hop.a), scenario.site(hop.b))
            used = path.first if path.is_canonical else path.links[-1]
            out += _mixed_settings(label, hop.links, used)
    return out


def _mixed_settings(label: str, links: tuple[Link, ...], first: Link) -> list[str]:
    """Heralding settings on which the links of a light path disagree (``first``'s apply)."""
    names = {f.name for f in fields(first)}
    differ = [k for k in _HERALD_KEYS if k in names and any(getattr(x, k) != getattr(first, k) for x in links)]
    if not differ:
        return []
    return [f"{label}: links disagree on {', '.join(differ)}; the settings of links[{first.index}] are used"]


def _isolated_sites(scenario: Scenario, graph: nx.Graph) -> list[str]:
    return [f"sites[{i}] ({s.name}): no link reaches this site"
            for i, s in enumerate(scenario.sites) if graph.degree(s.name) == 0]


def _memory_warnings(scenario: Scenario, result: Budget) -> list[str]:
    """Demands whose hops take longer to be ready than the memories on the route stay coherent."""
    out = []
    for demand, row in zip(scenario.demands, result.demands):
        if not row.get("route"):
            continue
        memories = [scenario.site(n) for n in row["route_sites"]]
        shortest = min((s for s in memories if s.role != "switch"), key=lambda s: s.t2_s)
        if row["expected_wait_s"] > shortest.t2_s:
            out.append(f"demands[{demand.index}] ({demand.name}): all hops are ready after "
                       f"{row['expected_wait_s']:.3g} s on average, longer than t2_s = "
                       f"{shortest.t2_s:g} s at {shortest.name}; memory decay (ignored by the "
                       "budget) will dominate")
    return out
