"""Per-link and per-demand budgets: the analytic half of a capacity table.

``budget(scenario)`` gathers, per link, the loss budget, heralding figures, the repeaterless
bound and the Holevo figures of the scenario's encoding; per demand, the route, an analytic
end-to-end expectation and the network capacity bounds. All numbers are closed forms; nothing
here is simulated.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import networkx as nx

from netsim.errors import ParameterError
from netsim.hardware.fibre import loss_db
from netsim.network.bounds import (
    chain_fidelity,
    expected_wait_s,
    multipath_capacity,
    single_path_capacity,
)
from netsim.network.channel import encoding_holevo_bits, link_capacity_bits
from netsim.network.graph import build_graph
from netsim.network.routing import Hop, find_route, relay_graph, route_hops
from netsim.report.table import Column, Table
from netsim.scenario.model import Demand, Scenario

__all__ = ["DEMAND_COLUMNS", "LINK_COLUMNS", "Budget", "budget"]

LINK_COLUMNS: tuple[Column, ...] = (
    Column("link", "link"), Column("scheme", "scheme"), Column("length_km", "length (km)"),
    Column("fibre_loss_db", "fibre loss (dB)"), Column("extra_loss_db", "extra loss (dB)"),
    Column("loss_db", "total loss (dB)"), Column("transmissivity", "eta"),
    Column("attempt_period_s", "attempt period (s)"), Column("modes", "modes"),
    Column("success_probability", "success per mode"), Column("pair_rate_per_s", "pair rate (pairs/s)"),
    Column("fidelity", "fidelity"), Column("eof_ebits", "EoF (ebit/pair)"),
    Column("plob_bits_per_use", "PLOB (bit/use)"), Column("mode_rate_per_s", "mode rate (1/s)"),
    Column("plob_bits_per_s", "PLOB at modes/period (bit/s)"),
    Column("bound_bits_per_s", "link bound as heralded (bit/s)"),
    Column("holevo_bits", "Holevo chi (bit/qubit)"), Column("holevo_capacity_bits", "Holevo capacity (bit/use)"),
)

DEMAND_COLUMNS: tuple[Column, ...] = (
    Column("demand", "demand"), Column("route", "route"), Column("hops", "hops"),
    Column("length_km", "length (km)"), Column("loss_db", "route loss (dB)"),
    Column("expected_wait_s", "all hops ready (s)"), Column("expected_rate_per_s", "expected rate (pairs/s)"),
    Column("expected_fidelity", "expected fidelity"),
    Column("expected_eof_ebits", "expected EoF (ebit)"), Column("min_fidelity", "min fidelity"),
    Column("route_bound_bits_per_s", "route bound (bit/s)"),
    Column("single_path_bits_per_s", "single-path bound (bit/s)"),
    Column("multipath_bits_per_s", "multipath bound (bit/s)"),
)

LINK_NOTES = (
    ("PLOB: -log2(1 - eta) of the whole fibre per channel use (Pirandola et al., Nat. Commun. 8, "
    "15043, 2017); per second at the mode rate = modes per attempt period. Link bound as heralded: "
    "a midpoint station or source is a node between two channels, so the worse arm's -log2(1 - eta) "
    "bounds the link (Pirandola, Commun. Phys. 2, 51, 2019); single-photon heralding can beat the "
    "whole-fibre PLOB on long links, never this."),
    ("Holevo figures: the encoding sent through the fibre as a flagged erasure channel "
    "(eps = 1 - eta; polarisation or time-bin qubit)."),
    "Links at a passive switch are heralded only as part of a light path: see the demands table.",
)

DEMAND_NOTES = (
    ("Expected rate and fidelity: swap as soon as possible, unlimited memory time, memory decay "
    "ignored, hop pairs twirled to Werner states (waiting time after Shchukin, Schmidt & van "
    "Loock, PRA 100, 032322, 2019; times the product of BSM success probabilities); the time "
    "to signal swap outcomes is not counted."),
    ("Photon indistinguishability and phase noise are in the link fidelity; memory transfer "
    "errors in the expected fidelity (each multiplies the Werner parameter by 1 - p). Not in "
    "these closed forms (simulate for them): hops that take turns at a site with fewer "
    "communication qubits than hops (the rate assumes parallel generation, up to twice the "
    "sequential rate for two hops), memory transfer time, and attempt dephasing (like memory "
    "decay)."),
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
    rows, warnings = [], []
    for demand in scenario.demands:
        row, warning = _demand_row(graph, demand, policy or scenario.protocol.routing)
        rows.append(row)
        warnings += [warning] if warning else []
    return Budget(scenario.name, links, rows, warnings)


def _link_row(graph: nx.Graph, a: str, b: str, scenario: Scenario) -> dict[str, Any]:
    edge = graph.edges[a, b]
    link, physics = edge["link"], edge["physics"]
    eta = edge["transmissivity"]
    row: dict[str, Any] = {
        "link": link.name, "scheme": link.scheme, "length_km": link.length_km,
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


def _demand_row(graph: nx.Graph, demand: Demand, policy: str) -> tuple[dict[str, Any], str]:
    relays = relay_graph(graph, demand.a, demand.b)
    row: dict[str, Any] = {
        "demand": demand.name, "min_fidelity": demand.min_fidelity,
        "single_path_bits_per_s": single_path_capacity(relays, demand.a, demand.b),
        "multipath_bits_per_s": multipath_capacity(relays, demand.a, demand.b),
    }
    try:
        route = find_route(graph, demand.a, demand.b, policy)
    except ParameterError as exc:
        row["route"] = None
        return row, f"demands[{demand.index}] ({demand.name}): {exc}"
    hops = route_hops(graph, route)
    row.update(_chain_figures(graph, route, hops))
    warning = ""
    if row["expected_fidelity"] < demand.min_fidelity:
        warning = (f"demands[{demand.index}] ({demand.name}): expected fidelity "
                   f"{row['expected_fidelity']:.3g} is below min_fidelity {demand.min_fidelity:g}")
    return row, warning


def _hop_bound_bits_per_s(hop: Hop) -> float:
    """The bound of a hop's light path as heralded (switches are passive; a midpoint station
    splits it into two channels, the worse of which bounds it) at its mode rate."""
    physics = hop.physics
    return physics.bound_bits_per_use * physics.modes / physics.attempt_period_s


def _chain_figures(graph: nx.Graph, route: list[str], hops: list[Hop]) -> dict[str, Any]:
    from netsim.network.channel import werner_eof_ebits

    inner = [graph.nodes[h.b]["site"] for h in hops[:-1]]
    wait = expected_wait_s([h.physics.round_success_probability for h in hops],
                           [h.physics.attempt_period_s for h in hops])
    bsm = math.prod(s.bsm_success_probability for s in inner)
    # a memory transfer depolarizes its qubit: on a Werner pair it multiplies w by (1 - p) like a gate error
    ends = [graph.nodes[site]["site"] for h in hops for site in (h.a, h.b)]
    errors = [s.gate_error for s in inner] + [s.memory_transfer_error for s in ends]
    fidelity = chain_fidelity([h.physics.fidelity for h in hops], errors)
    edges = [graph.edges[u, v] for u, v in itertools.pairwise(route)]
    return {
        "route": " > ".join(route), "route_sites": list(route), "hops": len(hops),
        "length_km": sum(e["length_km"] for e in edges), "loss_db": sum(e["loss_db"] for e in edges),
        "expected_wait_s": wait,
        "expected_rate_per_s": bsm / wait if wait > 0 and math.isfinite(wait) else 0.0,
        "expected_fidelity": fidelity, "expected_eof_ebits": werner_eof_ebits(fidelity),
        "route_bound_bits_per_s": min(_hop_bound_bits_per_s(h) for h in hops),
    }
