"""Scenario -> networkx graph with per-link physics and repeaterless bounds as edge attributes.

Node attribute ``site`` (Site). Edge attributes:

- ``link`` (Link; the least-loss one if several fibres join the same two sites) and ``links``
  (all of them, in scenario order);
- ``physics`` (LinkPhysics of the link heralded on its own), or ``None`` when an end is a
  passive switch: such a link is heralded only as part of a light path (``route_hops``);
- ``loss_db``, ``transmissivity``, ``length_km`` of ``link``;
- ``plob_bits_per_use`` = -log2(1 - eta) (Pirandola et al. 2017);
- ``mode_rate_per_s`` = modes / attempt period of the link's own heralding geometry (channel
  uses per second; for a link at a switch the memory end's preparation time is used);
- ``plob_bits_per_s`` = ``plob_bits_per_use`` x ``mode_rate_per_s`` of ``link``: the
  repeaterless figure of the whole fibre, for comparison;
- ``bound_bits_per_use`` and ``bound_bits_per_s``: what bounds the link as heralded
  (:attr:`LinkPhysics.bound_bits_per_use`: the worse arm's -log2(1 - eta) for a midpoint
  station or source, which is a node between two channels; the whole fibre's for direct
  transmission); ``bound_cut_bits_per_s`` their sum over parallel fibres. The network bounds
  (route, widest path, minimum cut) use these, after Pirandola, Commun. Phys. 2, 51 (2019).
"""

from __future__ import annotations

import math
from dataclasses import replace

import networkx as nx

from netsim.hardware.lightpath import LightPath
from netsim.hardware.schemes import link_physics, path_physics, swapped_ends
from netsim.hardware.types import LinkPhysics
from netsim.scenario.model import Link, Scenario, Site

__all__ = ["build_graph", "is_memory_site", "plob_bits_per_use"]


def plob_bits_per_use(eta: float) -> float:
    """Repeaterless (PLOB) bound -log2(1 - eta) in bits per channel use.

    For a link heralded at a midpoint station (or fed by a midpoint source) this whole-fibre
    figure does not bound what the link delivers: the station is a node between two channels,
    so the bound is the worse arm's, and single-photon heralding (yield ~ sqrt(eta)) exceeds the
    whole-fibre figure on long links, as twin-field QKD does (Lucamarini et al., Nature 557, 400,
    2018; see ``tests/test_audit_physics.py``).

    References
    ----------
    S. Pirandola, R. Laurenza, C. Ottaviani and L. Banchi, "Fundamental limits of repeaterless
    quantum communications", Nat. Commun. 8, 15043 (2017). doi:10.1038/ncomms15043
    """
    if eta >= 1.0:
        return math.inf
    return -math.log1p(-eta) / math.log(2.0)


def is_memory_site(site: Site) -> bool:
    """Users and repeaters hold memories; switches do not."""
    return site.role != "switch"


def _timing_physics(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """Physics used only for the clock of a link that ends at a switch.

    The switch end borrows the memory end's preparation time (a switch prepares nothing).
    """
    if not is_memory_site(site_a):
        site_a = replace(site_a, attempt_prep_time_s=site_b.attempt_prep_time_s)
    if not is_memory_site(site_b):
        site_b = replace(site_b, attempt_prep_time_s=site_a.attempt_prep_time_s)
    return link_physics(link, site_a, site_b)


_PHYSICS_CACHE: dict[tuple[tuple[Link, ...], Site, Site], LinkPhysics] = {}


def cached_path_physics(links: tuple[Link, ...], site_a: Site, site_b: Site) -> LinkPhysics:
    """:func:`netsim.hardware.schemes.path_physics` of the light path ``links`` from ``site_a`` to
    ``site_b``, kept for the process: the graph's edges and the routes' hops share it, and a path
    walked the other way is the same physics with its qubits swapped (as path_physics returns it)."""
    key = (links, site_a, site_b)
    physics = _PHYSICS_CACHE.get(key)
    if physics is None:
        if len(_PHYSICS_CACHE) > 4096:
            _PHYSICS_CACHE.clear()
        back = _PHYSICS_CACHE.get((links[::-1], site_b, site_a))
        physics = swapped_ends(back) if back is not None else path_physics(LightPath.join(links, site_a, site_b))
        _PHYSICS_CACHE[key] = physics
    return physics


def _edge_attributes(link: Link, site_a: Site, site_b: Site) -> dict[str, object]:
    memory_ends = is_memory_site(site_a) and is_memory_site(site_b)
    physics = cached_path_physics((link,), site_a, site_b) if memory_ends else None
    clock = physics if physics is not None else _timing_physics(link, site_a, site_b)
    per_use = plob_bits_per_use(clock.transmissivity)
    mode_rate = clock.modes / clock.attempt_period_s
    return {
        "link": link, "physics": physics, "loss_db": clock.loss_db,
        "transmissivity": clock.transmissivity, "length_km": link.length_km,
        "plob_bits_per_use": per_use, "mode_rate_per_s": mode_rate,
        "plob_bits_per_s": per_use * mode_rate,
        "bound_bits_per_use": clock.bound_bits_per_use, "bound_bits_per_s": clock.bound_bits_per_use * mode_rate,
    }


def build_graph(scenario: Scenario) -> nx.Graph:
    """Build the network graph of ``scenario`` (attributes in the module docstring).

    Parameters
    ----------
    scenario : Scenario
        A validated scenario (every link joins two known, distinct sites).

    Returns
    -------
    networkx.Graph
        Graph attribute ``scenario`` holds the scenario itself.
    """
    graph = nx.Graph(scenario=scenario)
    sites = {s.name: s for s in scenario.sites}
    for site in scenario.sites:
        graph.add_node(site.name, site=site)
    for link in scenario.links:
        attrs = _edge_attributes(link, sites[link.a], sites[link.b])
        if graph.has_edge(link.a, link.b):
            old = graph.edges[link.a, link.b]
            attrs["links"] = (*old["links"], link)
            attrs["bound_cut_bits_per_s"] = old["bound_cut_bits_per_s"] + attrs["bound_bits_per_s"]
            if old["loss_db"] <= attrs["loss_db"]:
                attrs = {**old, "links": attrs["links"], "bound_cut_bits_per_s": attrs["bound_cut_bits_per_s"]}
        else:
            attrs["links"] = (link,)
            attrs["bound_cut_bits_per_s"] = attrs["bound_bits_per_s"]
        graph.add_edge(link.a, link.b, **attrs)
    return graph
