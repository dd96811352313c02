"""Routing policies (plug-ins), find_route and route_hops (netsim.network.routing)."""

from __future__ import annotations

import itertools

import pytest

from netsim.errors import ParameterError
from netsim.network import POLICIES, build_graph, find_route, route_hops
from netsim.network.routing import relay_graph
from netsim.scenario import load_data

U1, U2, U3 = "Wexley Lab", "Yarrow Clinic", "Zinnia Office"
R1, R2, SW = "Marl Relay", "Nettle Relay", "Osier Switch"


def scenario():  # type: ignore[no-untyped-def]
    """Invented town where each policy picks a different route from Wexley Lab to Yarrow Clinic.

    - direct fibre, 30 km: 7.5 + 1 = 8.5 dB, one hop            -> fewest_hops
    - via Marl Relay, 10 + 10 km: 2 x 3.5 = 7 dB                -> least_loss
    - via Nettle Relay, 12 + 12 km, 10 modes: 2 x 4 = 8 dB, but
      ten channel uses per attempt, so the widest bottleneck    -> highest_bound
    - via Zinnia Office (a user, never a relay), 1 + 1 km
    - Osier Switch hangs off Marl Relay towards Zinnia Office.
    """
    return load_data({
        "network": {"name": "Wexley test town"},
        "sites": [{"name": n, "role": "user"} for n in (U1, U2, U3)]
        + [{"name": R1, "role": "repeater"}, {"name": R2, "role": "repeater"}, {"name": SW, "role": "switch"}],
        "links": [
            {"ends": [U1, U2], "length_km": 30.0},
            {"ends": [U1, R1], "length_km": 10.0},
            {"ends": [R1, U2], "length_km": 10.0},
            {"ends": [U1, R2], "length_km": 12.0, "modes": 10},
            {"ends": [R2, U2], "length_km": 12.0, "modes": 10},
            {"ends": [U1, U3], "length_km": 1.0},
            {"ends": [U3, U2], "length_km": 1.0},
            {"ends": [R1, SW], "length_km": 3.0},
            {"ends": [SW, U3], "length_km": 4.0},
        ],
        "demands": [{"users": [U1, U2]}, {"users": [U3, U1]}],
    })


@pytest.mark.parametrize(
    ("policy", "expected"),
    [("least_loss", [U1, R1, U2]), ("fewest_hops", [U1, U2]), ("highest_bound", [U1, R2, U2])],
)
def test_each_policy_picks_its_route(policy: str, expected: list[str]) -> None:
    """Routes worked by hand in the scenario's docstring (dB arithmetic: common practice)."""
    assert find_route(build_graph(scenario()), U1, U2, policy) == expected


@pytest.mark.parametrize("policy", sorted(POLICIES))
def test_every_policy_returns_a_valid_route(policy: str) -> None:
    """Shared invariant for every plug-in: a simple path of existing links, users only at the ends."""
    graph = build_graph(scenario())
    for a, b in itertools.permutations((U1, U2, U3), 2):
        route = find_route(graph, a, b, policy)
        assert route[0] == a and route[-1] == b and len(set(route)) == len(route)
        assert all(graph.has_edge(u, v) for u, v in itertools.pairwise(route))
        assert all(graph.nodes[n]["site"].role != "user" for n in route[1:-1])


def test_a_custom_policy_plugs_in(monkeypatch: pytest.MonkeyPatch) -> None:
    class ViaNettle:
        name = "via_nettle"

        def route(self, graph, a, b):  # type: ignore[no-untyped-def]
            return [a, R2, b]

    monkeypatch.setitem(POLICIES, "via_nettle", ViaNettle())
    graph = build_graph(scenario())
    assert find_route(graph, U1, U2, "via_nettle") == [U1, R2, U2]
    assert find_route(graph, U1, U2, ViaNettle()) == [U1, R2, U2]


def test_users_never_relay() -> None:
    graph = relay_graph(build_graph(scenario()), U1, U2)
    assert U3 not in graph


def test_route_hops_folds_the_switch_into_one_hop() -> None:
    """Marl Relay -> Osier Switch -> Zinnia Office is one heralded hop of 3 + 4 km (common practice)."""
    graph = build_graph(scenario())
    hops = route_hops(graph, [U3, SW, R1, U1])
    assert [(h.a, h.b) for h in hops] == [(U3, R1), (R1, U1)]
    assert [k.name for k in hops[0].links] == [f"{SW}-{U3}", f"{R1}-{SW}"]
    assert hops[0].physics.length_km == pytest.approx(7.0)
    assert hops[0].physics.loss_db == pytest.approx(7.0 * 0.25 + 2 * 1.0)   # defaults: 0.25 dB/km, 1 dB
    lone = graph.edges[R1, U1]["physics"]
    assert hops[1].physics.fidelity == pytest.approx(lone.fidelity, rel=1e-12)
    assert hops[1].physics.rate_per_s == pytest.approx(lone.rate_per_s, rel=1e-12)


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        ((U1, U2, "fastest"), "routing = 'fastest' is not allowed; expected one of least_loss"),
        (("Nowhere", U2, "least_loss"), "site = 'Nowhere' is not allowed; expected one of"),
    ],
)
def test_find_route_errors(args: tuple[str, str, str], fragment: str) -> None:
    with pytest.raises(ParameterError, match=fragment):
        find_route(build_graph(scenario()), *args)


def test_route_hops_errors() -> None:
    graph = build_graph(scenario())
    with pytest.raises(ParameterError, match="at least two sites"):
        route_hops(graph, [U1])
    with pytest.raises(ParameterError, match="starting and ending at memory sites"):
        route_hops(graph, [SW, U3])
    with pytest.raises(ParameterError, match="consecutive sites joined by a link"):
        route_hops(graph, [U1, SW, U3])


def test_least_loss_without_the_view_finds_the_views_routes() -> None:
    # find_route runs the default policy on the full graph with the other users hidden by the
    # weight; it must give the route networkx's Dijkstra gives on the relay view, ties included
    # (a grid of equal links has many equal-loss routes; invariant of the implementation).
    import sys
    from pathlib import Path

    import networkx as nx

    sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
    from metro import geometric_metro, grid_metro, metro_scenario

    from netsim.network.routing import LeastLoss

    checked = 0
    for data in (grid_metro(6, 6, 12, 2, seed=4), geometric_metro(30, 12, 2, seed=8)):
        scenario = metro_scenario(data)
        graph = build_graph(scenario)
        users = [n for n, d in graph.nodes(data=True) if d["site"].role == "user"]
        for a, b in itertools.islice(itertools.combinations(users, 2), 120):
            try:
                on_view = LeastLoss().route(relay_graph(graph, a, b), a, b)
            except nx.NetworkXNoPath:
                with pytest.raises(ParameterError):
                    find_route(graph, a, b)
                continue
            assert find_route(graph, a, b) == on_view
            checked += 1
    assert checked > 150
