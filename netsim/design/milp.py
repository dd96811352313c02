"""Least-cost network design as a mixed-integer linear program over candidate routes.

Formulation (path-based, after Rabbie, Chakraborty, Avis & Wehner, "Designing quantum networks
using preexisting infrastructure", npj Quantum Inf. 8, 5, 2022). For every demand d the K
least-loss routes through repeaters and switches (other end users never relay) are enumerated in
the network with every candidate built (and the K fewest-hop ones, which swap less and keep
more fidelity); each route r is priced at every multiplexing level k (a
power of two up to ``max_modes``; every link of the route carries at least k modes) by the
closed form :func:`netsim.design.estimate.route_estimate`. An option (d, r, k) is kept when its
fidelity reaches the demand's ``min_fidelity`` and its rate its ``min_rate_per_s``; per route, the
least such level and the next ``LEVELS_ABOVE_LEAST`` are kept (more modes only shorten the share
of fibre time a demand takes).

Variables: x_o in {0, 1} per option; y_v in {0, 1} per candidate site; z_l in {0, 1} per
candidate link; m_l (modes, integer) per link; s_v (memory slots, integer) per memory site.

- one option per demand: sum_{o of d} x_o = 1;
- an option needs its candidate sites and links: sum_{o of d through v} x_o <= y_v and
  sum_{o of d using l} x_o <= z_l per demand (summed over the demand's options, which is valid
  as it takes one, and tighter than a row per option); a candidate link needs its candidate
  ends: z_l <= y_v;
- modes: m_l >= sum_{o of d using l} k_o x_o per demand; m_l >= the file's ``modes`` on a built link,
  z_l <= m_l <= max_modes z_l on a candidate link;
- fibre time: a fibre carries one attempt sequence at a time, and demand d on option o keeps
  its route busy a share u_o = min_rate_d / rate_o of the time, so sum_{o using l} u_o x_o <=
  max_utilisation on every link;
- memory: s_v >= sum_{o of d through v} n_{o,v} x_o per demand (the slots one cycle of option
  o reserves at v: one per hop end, times purification rounds + 1) and s_v >= sum_o n_{o,v} u_o x_o / max_utilisation (slots held
  on average); s_v >= the file's ``memory_slots`` on a built site, s_v <= max_slots y_v on a
  candidate one;
- minimise the price of everything built (:mod:`netsim.design.costs`): site prices y_v, slot
  prices s_v, fibre, station and detectors z_l, mode prices 2 m_l (both ends).

Solved with ``scipy.optimize.milp`` (HiGHS). Other routes are not considered; the network's routing policy may choose a different route in the designed network,
which the simulation that follows reveals.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import networkx as nx
import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import lil_matrix

from netsim.design.costs import link_fixed, site_base
from netsim.design.estimate import route_estimate
from netsim.errors import ParameterError
from netsim.network.graph import build_graph
from netsim.network.routing import relay_graph
from netsim.scenario.model import Costs, Demand, Link, Scenario, Site

#: Multiplexing levels kept per route above the least that meets the rate: more modes shorten
#: the share of fibre time a demand takes, which can pay where fibres are shared.
LEVELS_ABOVE_LEAST = 2

__all__ = ["LEVELS_ABOVE_LEAST", "Design", "DesignOptions", "Option", "design_network", "enumerate_options", "full_network"]


@dataclass(frozen=True)
class DesignOptions:
    """Limits of the search. ``rate_factor`` / ``fidelity_floor`` map a demand index to a raised
    target and ``slot_floor`` a site name to a least number of memory slots (used when a
    simulation shows a demand missing its requirement)."""

    routes_per_demand: int = 8
    max_modes: int = 64
    max_slots: int = 64
    max_utilisation: float = 0.8
    time_limit_s: float = 60.0
    rate_factor: Mapping[int, float] = field(default_factory=dict)
    fidelity_floor: Mapping[int, float] = field(default_factory=dict)
    slot_floor: Mapping[str, int] = field(default_factory=dict)

    def __post_init__(self) -> None:
        checks = (("routes_per_demand", self.routes_per_demand, 1, "an integer >= 1"),
                  ("max_modes", self.max_modes, 1, "an integer >= 1"),
                  ("max_slots", self.max_slots, 1, "an integer >= 1"))
        for name, value, low, allowed in checks:
            if not isinstance(value, int) or isinstance(value, bool) or value < low:
                raise ParameterError(name, value, allowed)
        if not 0.0 < self.max_utilisation <= 1.0:
            raise ParameterError("max_utilisation", self.max_utilisation, "a number in (0, 1]")
        if not self.time_limit_s > 0.0:
            raise ParameterError("time_limit_s", self.time_limit_s, "a number > 0 (s)")

    def levels(self) -> list[int]:
        """Multiplexing levels tried per route: 1, 2, 4, ... up to ``max_modes`` (included)."""
        out = [1]
        while out[-1] * 2 <= self.max_modes:
            out.append(out[-1] * 2)
        if out[-1] != self.max_modes:
            out.append(self.max_modes)
        return out


@dataclass(frozen=True)
class Option:
    """Demand ``demand`` served over ``route`` with at least ``level`` modes on every link."""

    demand: int
    route: tuple[str, ...]
    level: int
    rate_per_s: float
    fidelity: float
    links: tuple[str, ...]            # link names (ends as in the file) along the route
    slots: Mapping[str, int]          # slots one cycle reserves, per memory site
    share: float                      # share of time the route is busy for this demand


@dataclass
class Design:
    """The outcome of :func:`design_network`. ``status``: ``optimal``, ``infeasible`` or
    ``time_limit``; on ``infeasible`` ``problems`` holds one line per unmet demand."""

    status: str
    total_cost: float | None = None
    gap: float | None = None
    chosen_sites: list[str] = field(default_factory=list)
    chosen_links: list[str] = field(default_factory=list)
    rejected_sites: list[str] = field(default_factory=list)
    rejected_links: list[str] = field(default_factory=list)
    memory_slots: dict[str, int] = field(default_factory=dict)
    modes: dict[str, int] = field(default_factory=dict)
    routes: dict[str, dict[str, Any]] = field(default_factory=dict)
    problems: list[str] = field(default_factory=list)
    options_considered: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {"status": self.status, "total_cost": self.total_cost, "gap": self.gap,
                "chosen_sites": self.chosen_sites, "chosen_links": self.chosen_links,
                "rejected_sites": self.rejected_sites, "rejected_links": self.rejected_links,
                "memory_slots": self.memory_slots, "modes": self.modes, "routes": self.routes,
                "problems": self.problems, "options_considered": self.options_considered}


def full_network(scenario: Scenario, level: int = 1) -> Scenario:
    """The scenario with every candidate built and at least ``level`` modes on every link."""
    links = tuple(replace(k, modes=max(k.modes, level)) for k in (*scenario.links, *scenario.candidate_links))
    return replace(scenario, sites=(*scenario.sites, *scenario.candidate_sites), links=links,
                   candidate_sites=(), candidate_links=())


def _per_end(scenario: Scenario) -> int:
    proto = scenario.protocol
    return (int(proto.purification_rounds) if proto.purification != "none" else 0) + 1


def target_rate(demand: Demand, options: DesignOptions) -> float:
    """The rate the design must reach for ``demand`` (0 when it sets no ``min_rate_per_s``)."""
    return (demand.min_rate_per_s or 0.0) * options.rate_factor.get(demand.index, 1.0)


def target_fidelity(demand: Demand, options: DesignOptions) -> float:
    return max(demand.min_fidelity, options.fidelity_floor.get(demand.index, 0.0))


def candidate_routes(graph: nx.Graph, demand: Demand, k: int) -> list[tuple[str, ...]]:
    """The ``k`` least-loss and the ``k`` fewest-hop routes (fewer swaps, higher fidelity) joining
    the demand's users through repeaters and switches."""
    relays = relay_graph(graph, demand.a, demand.b)
    if demand.a not in relays or demand.b not in relays or not nx.has_path(relays, demand.a, demand.b):
        return []
    by_loss = nx.shortest_simple_paths(relays, demand.a, demand.b, weight="loss_db")
    by_hops = nx.shortest_simple_paths(relays, demand.a, demand.b)
    routes = [tuple(p) for p in itertools.islice(by_loss, k)]
    return routes + [r for r in (tuple(p) for p in itertools.islice(by_hops, k)) if r not in routes]


def enumerate_options(scenario: Scenario, options: DesignOptions
                      ) -> tuple[list[Option], dict[int, list[tuple[str, ...]]], dict[int, list[tuple[int, tuple[str, ...], float, float]]]]:
    """Every kept option, the routes per demand and every priced (level, route, rate, fidelity)."""
    per_end = _per_end(scenario)
    levels = options.levels()
    graphs = {k: build_graph(full_network(scenario, k)) for k in levels}
    base = graphs[levels[0]]
    kept: list[Option] = []
    routes: dict[int, list[tuple[str, ...]]] = {}
    priced: dict[int, list[tuple[int, tuple[str, ...], float, float]]] = {}
    for demand in scenario.demands:
        routes[demand.index] = candidate_routes(base, demand, options.routes_per_demand)
        priced[demand.index] = []
        rate_needed, fidelity_needed = target_rate(demand, options), target_fidelity(demand, options)
        for route in routes[demand.index]:
            names = tuple(base.edges[u, v]["link"].name for u, v in itertools.pairwise(route))
            slots = {s: per_end * (1 if s in (route[0], route[-1]) else 2)
                     for s in route if base.nodes[s]["site"].role != "switch"}
            adequate = 0
            for level in levels if rate_needed > 0 else levels[:1]:
                if adequate == LEVELS_ABOVE_LEAST + 1:
                    break
                estimate = route_estimate(graphs[level], route)
                priced[demand.index].append((level, route, estimate.rate_per_s, estimate.fidelity))
                if estimate.fidelity < fidelity_needed or estimate.rate_per_s < rate_needed or estimate.rate_per_s <= 0:
                    continue
                adequate += 1
                kept.append(Option(demand.index, route, level, estimate.rate_per_s, estimate.fidelity, names,
                                   slots, rate_needed / estimate.rate_per_s))
    return kept, routes, priced


def _explain(scenario: Scenario, options: DesignOptions, kept: list[Option],
             routes: Mapping[int, list[tuple[str, ...]]],
             priced: Mapping[int, list[tuple[int, tuple[str, ...], float, float]]]) -> list[str]:
    """One line per demand that no option can serve, with the reason."""
    lines = []
    for d in scenario.demands:
        label = f"demands[{d.index}] ({d.name})"
        if any(o.demand == d.index for o in kept):
            continue
        if not routes[d.index]:
            lines.append(f"{label}: no chain of allowed hops joins the users, even with every candidate built "
                         "(routes pass through repeaters and switches only)")
            continue
        fid = target_fidelity(d, options)
        best_f = max(priced[d.index], key=lambda p: p[3])
        if best_f[3] < fid:
            lines.append(f"{label}: no chain of allowed hops reaches min_fidelity {fid:g}; the best of "
                         f"{len(routes[d.index])} route(s) gives {best_f[3]:.4g} ({' > '.join(best_f[1])})")
            continue
        ok = [p for p in priced[d.index] if p[3] >= fid]
        best_r = max(ok, key=lambda p: p[2])
        lines.append(f"{label}: min_rate_per_s {target_rate(d, options):g} exceeds what any route can carry; "
                     f"the best is {best_r[2]:.4g} pairs/s with {best_r[0]} modes per link "
                     f"({' > '.join(best_r[1])}; max_modes = {options.max_modes})")
    return lines


def design_network(scenario: Scenario, options: DesignOptions | None = None) -> Design:
    """Choose candidates, memory slots and modes meeting every demand at least cost.

    Returns a :class:`Design`; ``status`` is ``infeasible`` (with ``problems``) when no design
    within the options meets every demand.
    """
    options = options or DesignOptions()
    kept, routes, priced = enumerate_options(scenario, options)
    problems = _explain(scenario, options, kept, routes, priced)
    if problems:
        return Design("infeasible", problems=problems, options_considered=len(kept))
    return _solve(scenario, options, kept)


def _solve(scenario: Scenario, options: DesignOptions, kept: list[Option]) -> Design:
    costs = scenario.costs or Costs()
    full = full_network(scenario)
    sites: dict[str, Site] = {s.name: s for s in full.sites}
    links: dict[str, Link] = {k.name: k for k in full.links}
    used_links = sorted({n for o in kept for n in o.links}, key=list(links).index)
    used_sites = sorted({s for o in kept for s in o.slots}, key=list(sites).index)
    cand_sites = [s.name for s in scenario.candidate_sites if s.name in {v for o in kept for v in o.route}]
    cand_links = [n for n in used_links if links[n].candidate or links[n] in scenario.candidate_links]

    index: dict[tuple[str, Any], int] = {}
    for i, _ in enumerate(kept):
        index["x", i] = len(index)
    for v in cand_sites:
        index["y", v] = len(index)
    for n in cand_links:
        index["z", n] = len(index)
    for n in used_links:
        index["m", n] = len(index)
    for v in used_sites:
        index["s", v] = len(index)
    size = len(index)
    c = np.zeros(size)
    lower, upper = np.zeros(size), np.ones(size)
    for v in cand_sites:
        c[index["y", v]] = site_base(sites[v], costs)
    for n in cand_links:
        c[index["z", n]] = link_fixed(links[n], costs)
    for n in used_links:
        j = index["m", n]
        c[j] = 2.0 * costs.mode
        is_cand = n in cand_links
        lower[j], upper[j] = (0 if is_cand else links[n].modes), options.max_modes if is_cand else max(options.max_modes, links[n].modes)
    for v in used_sites:
        j = index["s", v]
        c[j] = costs.memory_slot if sites[v].role != "switch" else 0.0
        is_cand = v in cand_sites
        floor = max(sites[v].memory_slots, options.slot_floor.get(v, 0))
        lower[j], upper[j] = (0 if is_cand else floor), options.max_slots if is_cand else max(options.max_slots, floor)

    rows: list[tuple[dict[int, float], float, float]] = []
    for d in scenario.demands:
        rows.append(({index["x", i]: 1.0 for i, o in enumerate(kept) if o.demand == d.index}, 1.0, 1.0))
    # Each demand takes exactly one option, so its options are summed per site and link: the
    # aggregated rows (sum_{o of d using l} x_o <= z_l, m_l >= sum k_o x_o, s_v >= sum n_o,v x_o)
    # are valid and give a much tighter linear relaxation than one row per option.
    for d in scenario.demands:
        mine = [(i, o) for i, o in enumerate(kept) if o.demand == d.index]
        for v in dict.fromkeys(v for _, o in mine for v in o.route):  # rows in a fixed order
            through = [(i, o) for i, o in mine if v in o.route]
            if ("y", v) in index:
                rows.append(({**{index["x", i]: 1.0 for i, _ in through}, index["y", v]: -1.0}, -np.inf, 0.0))
            if ("s", v) in index:
                rows.append(({index["s", v]: 1.0, **{index["x", i]: -float(o.slots[v]) for i, o in through
                                                     if v in o.slots}}, 0.0, np.inf))
        for n in dict.fromkeys(n for _, o in mine for n in o.links):
            using = [(i, o) for i, o in mine if n in o.links]
            if ("z", n) in index:
                rows.append(({**{index["x", i]: 1.0 for i, _ in using}, index["z", n]: -1.0}, -np.inf, 0.0))
            rows.append(({index["m", n]: 1.0, **{index["x", i]: -float(o.level) for i, o in using}}, 0.0, np.inf))
    for n in cand_links:
        z, m = index["z", n], index["m", n]
        rows.append(({m: 1.0, z: -1.0}, 0.0, np.inf))
        rows.append(({m: 1.0, z: -float(options.max_modes)}, -np.inf, 0.0))
        for v in (links[n].a, links[n].b):
            if ("y", v) in index:
                rows.append(({z: 1.0, index["y", v]: -1.0}, -np.inf, 0.0))
    for v in cand_sites:
        if ("s", v) in index:
            rows.append(({index["s", v]: 1.0, index["y", v]: -float(options.max_slots)}, -np.inf, 0.0))
            if options.slot_floor.get(v):
                rows.append(({index["s", v]: 1.0, index["y", v]: -float(options.slot_floor[v])}, 0.0, np.inf))
    for n in used_links:
        share = {index["x", i]: o.share for i, o in enumerate(kept) if n in o.links and o.share > 0}
        if share:
            rows.append((share, -np.inf, options.max_utilisation))
    for v in used_sites:
        held = {index["x", i]: -o.slots[v] * o.share / options.max_utilisation
                for i, o in enumerate(kept) if v in o.slots and o.share > 0}
        if held:
            rows.append(({index["s", v]: 1.0, **held}, 0.0, np.inf))

    matrix = lil_matrix((len(rows), size))
    lo, hi = np.empty(len(rows)), np.empty(len(rows))
    for r, (coeffs, a, b) in enumerate(rows):
        for j, value in coeffs.items():
            matrix[r, j] = value
        lo[r], hi[r] = a, b
    result = milp(c, constraints=LinearConstraint(matrix.tocsr(), lo, hi), integrality=np.ones(size),
                  bounds=Bounds(lower, upper),
                  options={"time_limit": options.time_limit_s, "mip_rel_gap": 1e-9, "disp": False})
    if result.x is None:
        status = "infeasible" if result.status == 2 else "time_limit"
        reason = ("the demands together exceed what the shared fibres and memories can carry "
                  f"(max_utilisation {options.max_utilisation:g}, max_slots {options.max_slots}, "
                  f"max_modes {options.max_modes})" if status == "infeasible"
                  else f"no feasible design found within {options.time_limit_s:g} s")
        names = ", ".join(f"demands[{d.index}] ({d.name})" for d in scenario.demands)
        return Design(status, problems=[f"{names}: {reason}"], options_considered=len(kept))
    x = np.round(result.x).astype(int)
    return _design_from(scenario, kept, index, x, result, cand_sites, cand_links, full, options.max_utilisation,
                        options.slot_floor)


def _design_from(scenario: Scenario, kept: list[Option], index: Mapping[tuple[str, Any], int], x: np.ndarray,
                 result: Any, cand_sites: list[str], cand_links: list[str], full: Scenario,
                 max_utilisation: float, slot_floor: Mapping[str, int]) -> Design:
    chosen_sites = [v for v in cand_sites if x[index["y", v]]]
    chosen_links = [n for n in cand_links if x[index["z", n]]]
    all_cand_sites = [s.name for s in scenario.candidate_sites]
    all_cand_links = [k.name for k in scenario.candidate_links]
    built = {s.name for s in scenario.sites} | set(chosen_sites)
    modes: dict[str, int] = {}
    slots: dict[str, int] = {}
    chosen = [o for i, o in enumerate(kept) if x[index["x", i]]]
    for link in full.links:
        if link.name in all_cand_links and link.name not in chosen_links:
            continue
        if link.a in built and link.b in built:
            # the least the chosen routes need (the solver may leave free modes above it)
            need = max([o.level for o in chosen if link.name in o.links], default=1)
            modes[link.name] = max(need, link.modes if link.name not in all_cand_links else 1)
    for site in full.sites:
        if site.name in built and site.role != "switch":
            alone = max([o.slots[site.name] for o in chosen if site.name in o.slots], default=1)
            held = sum(o.slots[site.name] * o.share for o in chosen if site.name in o.slots) / max_utilisation
            floor = site.memory_slots if site.name not in all_cand_sites else 1
            floor = max(floor, slot_floor.get(site.name, 0))
            slots[site.name] = max(alone, math.ceil(held - 1e-9), floor)
    routes: dict[str, dict[str, Any]] = {}
    for i, o in enumerate(kept):
        if x[index["x", i]]:
            d = scenario.demands[[dd.index for dd in scenario.demands].index(o.demand)]
            routes[d.name] = {"route": list(o.route), "modes_level": o.level,
                              "expected_rate_per_s": o.rate_per_s, "expected_fidelity": o.fidelity,
                              "link_time_share": o.share}
    gap = getattr(result, "mip_gap", None)
    status = "optimal" if result.status == 0 else "time_limit"
    design = Design(status, gap=float(gap) if gap is not None and math.isfinite(gap) else None,
                    chosen_sites=chosen_sites, chosen_links=chosen_links,
                    rejected_sites=[v for v in all_cand_sites if v not in chosen_sites],
                    rejected_links=[n for n in all_cand_links if n not in chosen_links],
                    memory_slots=slots, modes=modes, routes=routes, options_considered=len(kept))
    from netsim.design.build import designed_cost

    design.total_cost = designed_cost(scenario, design)
    return design
