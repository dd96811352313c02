"""What a network costs, element by element, from the scenario's ``[costs]`` table.

Pricing (every price in the unit named by ``costs.currency``):

- a site: its own ``cost`` if set, else ``repeater_site`` (repeater) or ``user_site`` (user);
  switches have no site price; plus ``memory_slot`` x ``memory_slots`` (users and repeaters);
- a link: its own ``cost`` if set (e.g. a dark-fibre lease), else ``fibre_per_km`` x
  ``length_km``; plus ``mode`` x 2 x ``modes`` (each multiplexed mode is equipped at both link
  ends); a link heralded at a midpoint (every scheme but ``direct``) adds one
  ``heralding_station`` and ``DETECTORS_PER_STATION`` x ``detector``.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from netsim.report.table import Column, Table
from netsim.scenario.model import Costs, Link, Scenario, Site

__all__ = ["DETECTORS_PER_STATION", "CostRow", "cost_table", "demand_cost_rows", "demand_cost_table", "link_cost",
           "network_cost", "site_cost", "useful_rate"]

#: Single-photon detectors of one heralding station: the two output ports of the beam splitter
#: whose clicks herald a pair (common practice for single-photon and time-bin two-photon
#: heralding; a polarisation Bell-state analyser would need four).
DETECTORS_PER_STATION = 2


@dataclass(frozen=True)
class CostRow:
    """The price of one element: ``kind`` is ``site`` or ``link``; ``base`` the site or fibre
    price, ``equipment`` slots, modes, detectors and station; ``total`` their sum."""

    element: str
    kind: str
    base: float
    equipment: float
    candidate: bool

    @property
    def total(self) -> float:
        return self.base + self.equipment

    def as_row(self) -> dict[str, Any]:
        return {"element": self.element, "kind": self.kind, "candidate": "yes" if self.candidate else "no",
                "base_cost": self.base, "equipment_cost": self.equipment, "cost": self.total}


def site_base(site: Site, costs: Costs) -> float:
    """Price of building the site itself (its own ``cost`` replaces the ``[costs]`` price)."""
    if site.cost is not None:
        return site.cost
    return {"repeater": costs.repeater_site, "user": costs.user_site}.get(site.role, 0.0)


def site_cost(site: Site, costs: Costs, memory_slots: int | None = None) -> CostRow:
    slots = site.memory_slots if memory_slots is None else memory_slots
    equipment = costs.memory_slot * slots if site.role != "switch" else 0.0
    return CostRow(site.name, "site", site_base(site, costs), equipment, site.candidate)


def link_fixed(link: Link, costs: Costs) -> float:
    """Fibre (or own cost) plus the heralding station and its detectors: everything but modes."""
    fibre = link.cost if link.cost is not None else costs.fibre_per_km * link.length_km
    station = 0.0 if link.scheme == "direct" else costs.heralding_station + DETECTORS_PER_STATION * costs.detector
    return fibre + station


def link_cost(link: Link, costs: Costs, modes: int | None = None) -> CostRow:
    m = link.modes if modes is None else modes
    fibre = link.cost if link.cost is not None else costs.fibre_per_km * link.length_km
    equipment = link_fixed(link, costs) - fibre + 2.0 * costs.mode * m
    return CostRow(link.name, "link", fibre, equipment, link.candidate)


def network_cost(scenario: Scenario) -> list[CostRow]:
    """One row per built site and link of ``scenario`` (candidates not counted); empty when the
    scenario has no ``[costs]`` table and no element carries its own ``cost``."""
    own = [s.cost for s in scenario.sites] + [k.cost for k in scenario.links]
    if scenario.costs is None and all(c is None for c in own):
        return []
    costs = scenario.costs or Costs()
    return ([site_cost(s, costs) for s in scenario.sites] + [link_cost(k, costs) for k in scenario.links])


def total(rows: Iterable[CostRow]) -> float:
    return sum(r.total for r in rows)


COST_COLUMNS = (
    Column("element", "element"), Column("kind", "kind"), Column("candidate", "candidate"),
    Column("base_cost", "site or fibre"), Column("equipment_cost", "slots, modes, detectors"),
    Column("cost", "cost"),
)


def cost_table(title: str, rows: Sequence[CostRow], currency: str,
               extra: Sequence[Mapping[str, Any]] = ()) -> Table:
    """The cost table: one line per element and a total line, prices in ``currency``."""
    records: list[Mapping[str, Any]] = [r.as_row() for r in rows]
    records.append({"element": "total", "kind": "", "candidate": "", "base_cost": sum(r.base for r in rows),
                    "equipment_cost": sum(r.equipment for r in rows), "cost": total(rows)})
    records.extend(extra)
    notes = [f"Prices in {currency}. Site: own cost or repeater_site/user_site, plus memory_slot per "
             "slot. Link: own cost or fibre_per_km x length, plus mode x 2 ends x modes, plus "
             f"heralding_station and {DETECTORS_PER_STATION} detectors unless the scheme is direct."]
    return Table(title, COST_COLUMNS, records, notes)


def useful_rate(row: Mapping[str, Any], min_fidelity: float) -> tuple[float | None, str]:
    """Useful pairs per second of a demand row and where the figure comes from.

    A row's own ``useful_rate_per_s`` wins; else the simulated rate counts when the mean
    fidelity reaches ``min_fidelity`` (0 otherwise), else the closed-form expected rate on the
    same rule. None when the row has neither.
    """
    if row.get("useful_rate_per_s") is not None:
        return float(row["useful_rate_per_s"]), "simulated"
    for rate_key, fidelity_key, origin in (("rate_per_s", "fidelity_mean", "simulated"),
                                           ("expected_rate_per_s", "expected_fidelity", "closed form")):
        rate, fidelity = row.get(rate_key), row.get(fidelity_key)
        if rate is not None and fidelity is not None:
            return (float(rate) if float(fidelity) >= min_fidelity else 0.0), origin
    return None, ""


def demand_cost_rows(scenario: Scenario, budget_demands: Sequence[Mapping[str, Any]],
                     rows: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """Cost per useful pair per second, per demand and for the whole network.

    Each element's price is split equally among the demands whose route uses it (elements no
    route uses are carried by the network line only); a demand's figure is its share over its
    useful rate, the network's the total price over the sum of useful rates. ``budget_demands``
    give the routes (``route_sites``), ``rows`` the rates (same order).
    """
    priced = network_cost(scenario)
    if not priced:
        return []
    price = {r.element: r.total for r in priced}
    users_of: dict[str, int] = {}
    routes = []
    for b in budget_demands:
        sites = list(b.get("route_sites") or [])
        elements = sites + [f"{u}-{v}" if f"{u}-{v}" in price else f"{v}-{u}" for u, v in zip(sites, sites[1:])]
        routes.append(elements)
        for e in dict.fromkeys(elements):  # first-seen order, not the hash order of a set
            users_of[e] = users_of.get(e, 0) + 1
    out: list[dict[str, Any]] = []
    total_rate, origins = 0.0, set()
    for demand, elements, row in zip(scenario.demands, routes, rows):
        share = sum(price.get(e, 0.0) / users_of[e] for e in dict.fromkeys(elements))
        rate, origin = useful_rate(row, demand.min_fidelity)
        origins.add(origin)
        total_rate += rate or 0.0
        out.append({"demand": demand.name, "cost_share": share, "useful_rate_per_s": rate, "origin": origin,
                    "cost_per_useful_pair_per_s": share / rate if rate else None})
    cost = total(priced)
    out.append({"demand": "network", "cost_share": cost, "useful_rate_per_s": total_rate,
                "origin": "/".join(sorted(o for o in origins if o)),
                "cost_per_useful_pair_per_s": cost / total_rate if total_rate else None})
    return out


DEMAND_COST_COLUMNS = (
    Column("demand", "demand"), Column("cost_share", "cost share"),
    Column("useful_rate_per_s", "useful rate (pairs/s)"), Column("origin", "rate from"),
    Column("cost_per_useful_pair_per_s", "cost per useful pair/s"),
)


def demand_cost_table(title: str, rows: Sequence[Mapping[str, Any]], currency: str) -> Table:
    notes = [f"Prices in {currency}. Each site's and link's price is split equally among the demands "
             "routed over it; cost per useful pair/s = cost share / useful rate (the network line: "
             "total price / sum of useful rates). Useful rate: pairs whose demand reaches its "
             "min_fidelity (the mean fidelity decides); '-' where no useful pair arrives."]
    return Table(title, DEMAND_COST_COLUMNS, list(rows), notes)
