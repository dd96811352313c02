"""Per-link and per-demand budgets: the analytic half of a capacity table.

``budget(scenario)`` gathers, per link, the loss budget, heralding figures, the repeaterless
bound and the Holevo figures of the scenario's encoding; per demand, the route, an analytic
end-to-end expectation and the network capacity bounds. All numbers are closed forms; nothing
here is simulated.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import networkx as nx

from netsim.errors import ParameterError
from netsim.hardware.fibre import loss_db
from netsim.network.bounds import (
    MAX_EXACT_SWAP_HOPS,
    CapacityTable,
    multipath_capacity,
    single_path_capacity,
)
from netsim.network.channel import encoding_holevo_bits, link_capacity_bits
from netsim.network.estimate import estimate_hops, graph_cutoff_s
from netsim.network.graph import build_graph
from netsim.network.routing import Hop, find_route, route_hops
from netsim.table import Column, Table
from netsim.scenario.model import Demand, Scenario
from netsim.scenario.profiles import profile_label

__all__ = ["DEMAND_COLUMNS", "LINK_COLUMNS", "Budget", "budget", "expected_figures", "route_profiles"]

LINK_COLUMNS: tuple[Column, ...] = (
    Column("link", "link"), Column("profile", "profile"), Column("scheme", "scheme"),
    Column("length_km", "length (km)"),
    Column("fibre_loss_db", "fibre loss (dB)"), Column("extra_loss_db", "extra loss (dB)"),
    Column("loss_db", "total loss (dB)"), Column("transmissivity", "eta"),
    Column("attempt_period_s", "attempt period (s)"), Column("modes", "modes"),
    Column("success_probability", "success per mode"), Column("pair_rate_per_s", "pair rate (pairs/s)"),
    Column("fidelity", "fidelity"), Column("eof_ebits", "EoF (ebit/pair)"),
    Column("plob_bits_per_use", "repeaterless bound (ebit/use)"), Column("mode_rate_per_s", "mode rate (1/s)"),
    Column("plob_bits_per_s", "repeaterless bound (ebit/s)"),
    Column("bound_bits_per_s", "link bound as heralded (ebit/s)"),
    Column("holevo_bits", "Holevo information (bit/qubit)"), Column("holevo_capacity_bits", "Holevo capacity (bit/use)"),
)

DEMAND_COLUMNS: tuple[Column, ...] = (
    Column("demand", "demand"), Column("route", "route"), Column("profile", "profile"), Column("hops", "hops"),
    Column("length_km", "length (km)"), Column("loss_db", "route loss (dB)"),
    Column("expected_wait_s", "all hops ready (s)"), Column("expected_rate_per_s", "expected rate (pairs/s)"),
    Column("expected_fidelity", "expected fidelity"),
    Column("expected_fidelity_no_decay", "fidelity without memory decay"),
    Column("expected_storage_s", "expected storage (qubit-s/pair)"),
    Column("expected_eof_ebits", "expected EoF (ebit)"), Column("min_fidelity", "min fidelity"),
    Column("meets_fidelity", "F met (est.)"), Column("min_rate_per_s", "min rate (pairs/s)"),
    Column("meets_rate", "rate met (est.)"),
    Column("route_bound_bits_per_s", "route bound (ebit/s)"),
    Column("single_path_bits_per_s", "single-path bound (ebit/s)"),
    Column("multipath_bits_per_s", "multipath bound (ebit/s)"),
)

LINK_NOTES = (
    ("Repeaterless bound (PLOB): -log2(1 - eta) of the whole fibre per channel use (Pirandola et al., Nat. Commun. 8, "
    "15043, 2017); per second at the mode rate = modes per attempt period. Link bound as heralded: "
    "a midpoint station or source is a node between two channels, so the worse arm's -log2(1 - eta) "
    "bounds the link (Pirandola, Commun. Phys. 2, 51, 2019); single-photon heralding can beat the "
    "whole-fibre repeaterless bound on long links, never this."),
    ("Holevo figures: the encoding sent through the fibre as a flagged erasure channel "
    "(eps = 1 - eta; polarisation or time-bin qubit)."),
    "Links at a passive switch are heralded only as part of a light path: see the demands table.",
)

DEMAND_NOTES = (
    ("Expected rate: swap as soon as possible; one over the expected time to deliver, a failed "
    "Bell measurement losing both segments it joins (exact Markov chain over which hops hold "
    f"pairs, up to {MAX_EXACT_SWAP_HOPS} hops when a swap can fail; for sure swaps the wait for "
    "every hop to hold a pair, Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019). Expected "
    "fidelity: the hops' heralded states decohered in memory (T1, T2) for the expected storage "
    "times of swap-asap (herald, waiting for the neighbouring hop, signalling the outcomes to the "
    "users), then swapped with the gate errors (storage-time view after Brand, Coopmans & "
    "Elkouss, IEEE JSAC 38, 619, 2020). Not modelled: purification, other demands."),
    ("With a cut-off (protocol cutoff_s) and two hops or more, rate and fidelity are not closed "
    "forms: 1200 cycles of swap-asap with the cut-off are sampled with a fixed seed (turns at "
    "sites with one communication qubit, memory transfer time, discards and restarts, failing "
    "swaps; see Kamin, Shchukin, Schmidt & van Loock, PRR 5, 023086, 2023 (memory) on cut-offs); "
    "rate = 1 / mean cycle time, fidelity = that of the mean of the delivered states over the "
    "sampled storage times and neighbouring attempts (sampling error ~0.003 in fidelity, ~3 % "
    "in rate)."),
    ("Photon indistinguishability and phase noise are in the link fidelity; memory transfer "
    "errors in the expected fidelity (a depolarizing p on each moved qubit). Not in the closed "
    "forms without a cut-off (simulate for them; the sampled estimate with a cut-off has them): "
    "hops that take turns at a site with fewer communication qubits than hops (the rate assumes "
    "parallel generation, up to twice the sequential rate for two hops), memory transfer time, "
    "and attempt dephasing (like memory decay)."),
    ("Route bound: weakest hop of the route (a light path through passive switches counts as one "
    "channel, split by its midpoint station if it has one); single-path: widest path; multipath: "
    "minimum cut over the links' bounds as heralded, per second (Pirandola, Commun. Phys. 2, 51, "
    "2019); other end users never relay."),
)


@dataclass
class Budget:
    """The budget of one scenario: ``links`` and ``demands`` as lists of row dicts."""

    scenario: str
    links: list[dict[str, Any]]
    demands: list[dict[str, Any]]
    warnings: list[str] = field(default_factory=list)

    def tables(self) -> list[Table]:
        """The per-link and per-demand tables, units in the headers."""
        return [
            Table(f"{self.scenario}: links", LINK_COLUMNS, list[Mapping[str, Any]](self.links), list(LINK_NOTES)),
            Table(f"{self.scenario}: demands", DEMAND_COLUMNS, list[Mapping[str, Any]](self.demands),
                  list(DEMAND_NOTES) + self.warnings),
        ]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: NaN and infinities become ``None``."""
        return {"scenario": self.scenario, "links": _clean(self.links),
                "demands": _clean(self.demands), "warnings": list(self.warnings)}


def _clean(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


def budget(scenario: Scenario, policy: str | None = None) -> Budget:
    """Budget every link and demand of ``scenario``.

    Parameters
    ----------
    scenario : Scenario
    policy : str, optional
        Routing policy; defaults to the scenario's ``protocol.routing``.
    """
    graph = build_graph(scenario)
    links = [_link_row(graph, link.a, link.b, scenario) for link in scenario.links]
    rows, warnings = demand_rows(scenario, graph, policy)
    return Budget(scenario.name, links, rows, warnings)


def demand_rows(scenario: Scenario, graph: nx.Graph | None = None, policy: str | None = None,
                routes: Sequence[Sequence[str]] | None = None) -> tuple[list[dict[str, Any]], list[str]]:
    """The demand rows of :func:`budget` and their warnings, without the link rows, on ``graph``
    (built from ``scenario`` when not given; ``engine.run`` passes the one it routed on, and the
    routes it found there, one per demand, so that they are not searched again)."""
    graph = build_graph(scenario) if graph is None else graph
    rows, warnings = [], []
    users = frozenset(n for n, d in graph.nodes(data=True) if d["site"].role == "user")
    table = CapacityTable(graph)
    for k, demand in enumerate(scenario.demands):
        row, warning = _demand_row(graph, demand, policy or scenario.protocol.routing, users,
                                   list(routes[k]) if routes is not None and routes[k] else None, table)
        rows.append(row)
        warnings += [warning] if warning else []
    return rows, warnings


def expected_figures(scenario: Scenario, policy: str | None = None) -> list[dict[str, Any]]:
    """Per demand, only the closed-form expectations of :func:`budget` (route, expected wait,
    rate, fidelity and EoF; no bounds or Holevo figures): the cheap part, for sampling many
    variants of one scenario. A demand without a route gets ``{"demand": name, "route": None}``.
    """
    graph = build_graph(scenario)
    rows = []
    for demand in scenario.demands:
        row: dict[str, Any] = {"demand": demand.name, "min_fidelity": demand.min_fidelity}
        try:
            route = find_route(graph, demand.a, demand.b, policy or scenario.protocol.routing)
        except ParameterError:
            rows.append({**row, "route": None})
            continue
        row.update(_chain_figures(graph, route, route_hops(graph, route)))
        rows.append(row)
    return rows


def _link_row(graph: nx.Graph, a: str, b: str, scenario: Scenario) -> dict[str, Any]:
    edge = graph.edges[a, b]
    link, physics = edge["link"], edge["physics"]
    eta = edge["transmissivity"]
    row: dict[str, Any] = {
        # a link at a passive switch is heralded only as part of a light path, under the scheme
        # of the path's reference link: it has no scheme of its own to show
        "link": link.name,
        "profile": profile_label(link.profile, *(s.profile for s in (graph.nodes[a]["site"], graph.nodes[b]["site"])
                                                 if s.role != "switch")),
        "scheme": link.scheme if physics is not None else None, "length_km": link.length_km,
        "fibre_loss_db": loss_db(link.length_km, link.attenuation_db_per_km),
        "extra_loss_db": link.extra_loss_db, "loss_db": edge["loss_db"], "transmissivity": eta,
        "modes": link.modes, "plob_bits_per_use": edge["plob_bits_per_use"],
        "mode_rate_per_s": edge["mode_rate_per_s"], "plob_bits_per_s": edge["plob_bits_per_s"],
        "bound_bits_per_s": edge["bound_bits_per_s"],
        "holevo_bits": encoding_holevo_bits(scenario.encoding, eta),
        "holevo_capacity_bits": link_capacity_bits(eta),
        "attempt_period_s": None, "success_probability": None, "pair_rate_per_s": None,
        "fidelity": None, "eof_ebits": None,
    }
    if physics is not None:
        row.update(_physics_figures(physics))
    return row


def _physics_figures(physics: Any) -> dict[str, Any]:
    from netsim.network.channel import eof_ebits

    return {"attempt_period_s": physics.attempt_period_s,
            "success_probability": physics.success_probability,
            "pair_rate_per_s": physics.rate_per_s, "fidelity": physics.fidelity,
            "eof_ebits": eof_ebits(physics.state)}


def _demand_row(graph: nx.Graph, demand: Demand, policy: str, users: frozenset[str],
                route: list[str] | None = None, table: CapacityTable | None = None) -> tuple[dict[str, Any], str]:
    # other end users never relay (netsim.network.routing.relay_graph): passed as sites to leave
    # out, the same bounds as on the relay view without its filtering at every access
    row: dict[str, Any] = {
        "demand": demand.name, "min_fidelity": demand.min_fidelity, "min_rate_per_s": demand.min_rate_per_s,
        "meets_fidelity": None, "meets_rate": None,
        "single_path_bits_per_s": single_path_capacity(graph, demand.a, demand.b, exclude=users, table=table),
        "multipath_bits_per_s": multipath_capacity(graph, demand.a, demand.b, exclude=users, table=table),
    }
    try:
        route = find_route(graph, demand.a, demand.b, policy) if route is None else route
    except ParameterError as exc:
        row["route"] = None
        return row, f"demands[{demand.index}] ({demand.name}): {exc}"
    hops = route_hops(graph, route)
    _refuse_unreachable_cutoff(graph, demand, hops)
    row["profile"] = route_profiles(graph, route, hops)
    row.update(_chain_figures(graph, route, hops))
    fid, rate = row["expected_fidelity"], row["expected_rate_per_s"]
    row["meets_fidelity"] = bool(fid >= demand.min_fidelity) if math.isfinite(fid) else False
    if demand.min_rate_per_s is not None and rate is not None:
        row["meets_rate"] = bool(row["meets_fidelity"] and rate >= demand.min_rate_per_s)
    problems = []
    if rate is None:
        problems.append(f"no expected rate: {len(hops)} hops with Bell measurements that can fail (exact up "
                        f"to {MAX_EXACT_SWAP_HOPS}); simulate it")
    if not row["meets_fidelity"]:
        included = "memory decay and the cut-off" if graph_cutoff_s(graph) is not None and len(hops) > 1 else "memory decay"
        if math.isfinite(fid):
            problems.append(f"expected fidelity {fid:.3g} ({included} included) is below min_fidelity "
                            f"{demand.min_fidelity:g}")
        else:  # the estimate delivers no pair at all (e.g. swaps that almost never succeed)
            problems.append(f"no pair is expected to be delivered ({included} included), so min_fidelity "
                            f"{demand.min_fidelity:g} cannot be met")
    if row.get("meets_rate") is False:
        useful = rate if row["meets_fidelity"] else 0.0
        problems.append(f"expected useful rate {useful:.3g} pairs/s is below min_rate_per_s "
                        f"{demand.min_rate_per_s:g}")
    warning = f"demands[{demand.index}] ({demand.name}): " + "; ".join(problems) if problems else ""
    return row, warning


def _refuse_unreachable_cutoff(graph: nx.Graph, demand: Demand, hops: list[Hop]) -> None:
    """A route on which the cut-off discards every pair is a scenario error (no pair is ever
    delivered; :func:`netsim.network.workload.cutoff_problems`)."""
    from netsim.errors import ScenarioError
    from netsim.network.workload import cutoff_problems

    scenario = graph.graph["scenario"]
    sites = [graph.nodes[h.a]["site"] for h in hops] + [graph.nodes[hops[-1].b]["site"]]
    problems = cutoff_problems(scenario, f"demands[{demand.index}] ({demand.name})", hops, sites)
    if problems:
        raise ScenarioError(problems, scenario.source)


def route_profiles(graph: nx.Graph, route: list[str], hops: list[Hop]) -> str:
    """The hardware profiles a route's figures rest on: its memory sites' and its links'."""
    sites = [graph.nodes[n]["site"] for n in route]
    return profile_label(*(s.profile for s in sites if s.role != "switch"),
                         *(link.profile for hop in hops for link in hop.links))


def _hop_bound_bits_per_s(hop: Hop) -> float:
    """The bound of a hop's light path as heralded (switches are passive; a midpoint station
    splits it into two channels, the worse of which bounds it) at its mode rate."""
    physics = hop.physics
    return physics.bound_bits_per_use * physics.modes / physics.attempt_period_s


def _chain_figures(graph: nx.Graph, route: list[str], hops: list[Hop]) -> dict[str, Any]:
    from netsim.network.channel import werner_eof_ebits

    estimate = estimate_hops(graph, hops)
    fidelity = estimate.fidelity
    edges = [graph.edges[u, v] for u, v in itertools.pairwise(route)]
    return {
        "route": " > ".join(route), "route_sites": list(route), "hops": len(hops),
        "length_km": sum(e["length_km"] for e in edges), "loss_db": sum(e["loss_db"] for e in edges),
        "expected_wait_s": estimate.wait_s,
        "expected_rate_per_s": estimate.rate_per_s if estimate.rate_exact else None,
        "expected_fidelity": fidelity,
        "expected_fidelity_no_decay": estimate.fidelity_no_decay,
        "expected_storage_s": sum(a + b for a, b in estimate.storage_s),
        "expected_eof_ebits": werner_eof_ebits(fidelity) if math.isfinite(fidelity) else math.nan,
        "route_bound_bits_per_s": min(_hop_bound_bits_per_s(h) for h in hops),
    }
