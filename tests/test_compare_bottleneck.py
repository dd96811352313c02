"""Topology comparison: minimum-cut bottlenecks, winners per demand, side-by-side tables."""

from __future__ import annotations

import networkx as nx
import pytest

from netsim.report.capacity import pair_key
from netsim.report.compare import Candidate, bottleneck, comparison_tables, winner


def _diamond() -> nx.Graph:
    """A diamond worked by hand (capacities in ebit/s).

    Aldmoor-Brackwater 10, Aldmoor-Cindervale 5, Brackwater-Dunmere 4, Cindervale-Dunmere 9,
    Brackwater-Cindervale 3. Cuts separating Aldmoor from Dunmere: {A} 15; {A, B} 5 + 4 + 3 = 12;
    {A, C} 10 + 9 + 3 = 22; {A, B, C} 4 + 9 = 13. The minimum is 12, and a flow of 12 exists
    (A-B-D 4, A-C-D 5, A-B-C-D 3), so by max-flow/min-cut (Ford & Fulkerson, Can. J. Math. 8,
    399, 1956) the multipath bound is 12 (Pirandola, Commun. Phys. 2, 51, 2019).
    """
    graph = nx.Graph()
    for a, b, c in [("Aldmoor", "Brackwater", 10.0), ("Aldmoor", "Cindervale", 5.0),
                    ("Brackwater", "Dunmere", 4.0), ("Cindervale", "Dunmere", 9.0),
                    ("Brackwater", "Cindervale", 3.0)]:
        graph.add_edge(a, b, bound_cut_bits_per_s=c, bound_bits_per_s=c, length_km=10.0)
    return graph


def test_bottleneck_of_worked_diamond() -> None:
    value, cut = bottleneck(_diamond(), "Aldmoor", "Dunmere")
    assert value == pytest.approx(12.0)
    assert cut == [("Aldmoor", "Cindervale"), ("Brackwater", "Cindervale"), ("Brackwater", "Dunmere")]


def test_bottleneck_of_chain_is_its_weakest_link() -> None:
    # A chain is limited by its worst link (Pirandola, Commun. Phys. 2, 51, 2019).
    graph = nx.path_graph(["Aldmoor", "Brackwater", "Cindervale"])
    for (a, b), c in zip(graph.edges(), (7.0, 2.5)):
        graph.edges[a, b]["bound_cut_bits_per_s"] = c
    assert bottleneck(graph, "Aldmoor", "Cindervale") == (2.5, [("Brackwater", "Cindervale")])


def _row(rate: float, ci: tuple[float, float], fidelity: float) -> dict:
    return {"demand": "Aldmoor-Dunmere", "rate_per_s": rate, "rate_ci95": list(ci),
            "fidelity_mean": fidelity, "bound_multipath_per_s": 12.0, "ebits_per_s": rate / 2}


KEY = pair_key("Dunmere-Aldmoor")


def test_winner_rules() -> None:
    mesh = Candidate("mesh", _diamond(), [_row(5.0, (4.5, 5.5), 0.9)], {KEY: 0.8})
    star = Candidate("star", _diamond(), [_row(3.0, (2.5, 3.5), 0.9)], {KEY: 0.8})
    close = Candidate("close", _diamond(), [_row(4.8, (4.2, 5.4), 0.9)], {KEY: 0.8})
    noisy = Candidate("noisy", _diamond(), [_row(9.0, (8.0, 10.0), 0.7)], {KEY: 0.8})
    assert winner([mesh, star], KEY) == "mesh"
    assert winner([star, mesh, noisy], KEY) == "mesh"       # noisy is below min fidelity
    assert winner([mesh, close], KEY) == "tie: mesh, close"
    assert winner([noisy], KEY) == "none"


def test_comparison_tables_carry_each_candidates_numbers() -> None:
    mesh = Candidate("mesh", _diamond(), [_row(5.0, (4.5, 5.5), 0.9)])
    chain = nx.path_graph(["Aldmoor", "Dunmere"])
    chain.edges["Aldmoor", "Dunmere"].update(bound_cut_bits_per_s=1.5, length_km=30.0)
    direct = Candidate("direct", chain, [{**_row(1.0, (0.9, 1.1), 0.95), "demand": "Dunmere-Aldmoor",
                                          "bound_multipath_per_s": 1.5}])
    side, totals, cuts = comparison_tables([mesh, direct])
    assert len(side.rows) == 1                                # matched by user pair
    row = side.rows[0]
    assert (row["r0"], row["r1"], row["b0"], row["b1"], row["winner"]) == (5.0, 1.0, 12.0, 1.5, "mesh")
    assert [r["fibre_km"] for r in totals.rows] == [50.0, 30.0]
    assert [r["wins"] for r in totals.rows] == [1, 0]
    assert [r["cut_bits_per_s"] for r in cuts.rows] == [12.0, 1.5]
    assert cuts.rows[1]["links"] == "Aldmoor-Dunmere"
