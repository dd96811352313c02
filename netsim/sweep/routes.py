"""Routes across a sweep, and the entries a ``defaults.*`` axis does not reach.

A swept parameter can change a demand's route (routing is a closed form of the point's
scenario), which changes every figure of that demand: a sweep of fibre attenuation may move a
demand to another path between two points. :func:`route_changes` lists the points whose route
differs from the base scenario's before anything runs (``netsim sweep --dry-run``);
:func:`base_routes` is recorded in the store's meta (``base_routes``) so the report can mark
such points. A ``defaults.site.KEY`` or ``defaults.link.KEY`` axis changes only the entries that
do not set KEY themselves: :func:`unswept_overrides` names the others and the selector that
would sweep them too.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any

from netsim.errors import NetsimError
from netsim.scenario.model import Scenario
from netsim.sweep.plan import SweepPlan, describe_parameters

__all__ = ["ROUTE_SEPARATOR", "base_routes", "route_changes", "route_text", "scenario_routes", "unswept_overrides"]

#: How a route is written in the store, the tables and the listings.
ROUTE_SEPARATOR = " > "


def route_text(route: Any) -> str:
    """A route (list of site names or text) as ``"A > S > B"``."""
    return route if isinstance(route, str) else ROUTE_SEPARATOR.join(str(s) for s in route)


def scenario_routes(scenario: Scenario) -> dict[str, str]:
    """Each demand's route under the scenario's routing policy, by demand name ('' if none)."""
    from netsim.network import build_graph, find_route

    graph = build_graph(scenario)
    out = {}
    for demand in scenario.demands:
        try:
            out[demand.name] = route_text(find_route(graph, demand.a, demand.b, scenario.protocol.routing))
        except NetsimError:
            out[demand.name] = ""
    return out


def base_routes(plan: SweepPlan) -> str:
    """The base scenario's routes as JSON (the store's ``base_routes`` meta entry)."""
    return json.dumps(scenario_routes(plan.scenario), sort_keys=True)


def route_changes(plan: SweepPlan) -> list[str]:
    """One line per sweep point (first repeat only) and demand whose route differs from the base
    scenario's: ``"#3 links[*].attenuation_db_per_km=0.26: A-B: A > X > B (base A > Y > B)"``."""
    from netsim.scenario import load_data

    base = scenario_routes(plan.scenario)
    lines = []
    for point in plan.points:
        if point.repeat != 0:
            continue
        try:
            routes = scenario_routes(load_data(plan.data_for(point), plan.scenario.source))
        except NetsimError:
            continue  # an invalid point is reported by the plan's own validation
        for name, route in routes.items():
            if route != base.get(name):
                lines.append(f"#{point.ordinal} {describe_parameters(point.parameters)}: {name}: {route or 'no route'} "
                             f"(base {base.get(name) or 'no route'})")
    return lines


_SECTION = {"defaults.site": ("sites", "site"), "defaults.link": ("links", "link")}


def unswept_overrides(plan: SweepPlan) -> list[str]:
    """For each ``defaults.site.KEY`` / ``defaults.link.KEY`` axis, the sites or links whose own
    KEY overrides the default (so they are not swept), with the selector that sweeps them too."""
    lines = []
    for axis in plan.spec.axes:
        section = axis.key.section
        if section not in _SECTION:
            continue
        table, noun = _SECTION[section]
        entries = plan.scenario.data.get(table) or []
        own = [(i, e) for i, e in enumerate(entries) if isinstance(e, Mapping) and axis.key.key in e]
        if not own:
            continue
        names = ", ".join(f"{table}[{i}] ({_entry_name(e, noun)})" for i, e in own)
        verb = "sets" if len(own) == 1 else "set"
        lines.append(f"{axis.key}: {names} {verb} {axis.key.key} itself and {'is' if len(own) == 1 else 'are'} "
                     "not swept; "
                     f"to sweep every {noun}, vary {table}[*].{axis.key.key} instead (or add "
                     f"{table}[name=NAME].{axis.key.key} for each)")
    return lines


def _entry_name(entry: Mapping[str, Any], noun: str) -> str:
    if noun == "site":
        return str(entry.get("name", "?"))
    ends = entry.get("ends") or ["?", "?"]
    return "-".join(str(e) for e in ends)
