"""From a solved :class:`~netsim.design.milp.Design` to a complete scenario without candidates."""

from __future__ import annotations

import copy
from typing import Any

from netsim.design.costs import CostRow, link_cost, site_cost
from netsim.design.milp import Design, full_network
from netsim.scenario.loader import load_data
from netsim.scenario.model import Costs, Scenario

__all__ = ["designed_cost", "designed_cost_rows", "designed_data", "designed_scenario"]


def designed_cost_rows(scenario: Scenario, design: Design) -> list[CostRow]:
    """One priced row per site and link of the designed network (slots and modes as designed)."""
    costs = scenario.costs or Costs()
    full = full_network(scenario)
    rows = [site_cost(s, costs, design.memory_slots.get(s.name, 0)) for s in full.sites
            if s.name in design.memory_slots or (s.role == "switch" and _site_built(scenario, design, s.name))]
    rows += [link_cost(k, costs, design.modes[k.name]) for k in full.links if k.name in design.modes]
    return rows


def _site_built(scenario: Scenario, design: Design, name: str) -> bool:
    return name in {s.name for s in scenario.sites} or name in design.chosen_sites


def designed_cost(scenario: Scenario, design: Design) -> float:
    return sum(r.total for r in designed_cost_rows(scenario, design))


def designed_data(scenario: Scenario, design: Design) -> dict[str, Any]:
    """The scenario file of the designed network: candidates chosen become ordinary sites and
    links, rejected ones are dropped, memory slots and modes are set as designed."""
    data = copy.deepcopy(scenario.data)
    built = {s.name for s in scenario.sites} | set(design.chosen_sites)
    sites = []
    for table in data.get("sites", []):
        if table.get("name") not in built:
            continue
        table.pop("candidate", None)
        if table["name"] in design.memory_slots:
            table["memory_slots"] = design.memory_slots[table["name"]]
        sites.append(table)
    links = []
    for table in data.get("links", []):
        a, b = table["ends"]
        name = f"{a}-{b}"
        if name not in design.modes:
            continue
        table.pop("candidate", None)
        table["modes"] = design.modes[name]
        links.append(table)
    data["sites"], data["links"] = sites, links
    data.pop("sweep", None)
    data["network"] = {**data.get("network", {}), "name": f"{scenario.name} (designed)"}
    return data


def designed_scenario(scenario: Scenario, design: Design) -> Scenario:
    """The designed network loaded and validated like any scenario file."""
    return load_data(designed_data(scenario, design), source=None)
