"""The network graph: edge attributes, loss budgets and repeaterless bounds (netsim.network.graph)."""

from __future__ import annotations

import math

import pytest

from netsim import qinfo
from netsim.network import build_graph, plob_bits_per_use
from netsim.scenario import load_data


def scenario():  # type: ignore[no-untyped-def]
    """Invented town: two labs, a repeater and a passive switch."""
    return load_data({
        "network": {"name": "Quillby test town"},
        "sites": [
            {"name": "Quillby Lab", "role": "user"},
            {"name": "Orrin Switch", "role": "switch"},
            {"name": "Pell Relay", "role": "repeater"},
            {"name": "Rook Lab", "role": "user"},
        ],
        "links": [
            {"ends": ["Quillby Lab", "Orrin Switch"], "length_km": 4.0, "extra_loss_db": 0.5},
            {"ends": ["Orrin Switch", "Pell Relay"], "length_km": 6.0},
            {"ends": ["Pell Relay", "Rook Lab"], "length_km": 20.0, "attenuation_db_per_km": 0.2,
             "extra_loss_db": 2.0, "modes": 4},
        ],
        "demands": [{"users": ["Quillby Lab", "Rook Lab"]}],
    })


@pytest.mark.parametrize(
    ("eta", "expected"),
    [
        # -log2(1 - eta) (Pirandola, Laurenza, Ottaviani & Banchi, Nat. Commun. 8, 15043, 2017):
        (0.5, 1.0),                      # exactly one bit per use at 3.01 dB
        (0.75, 2.0),                     # -log2(1/4)
        (0.1, -math.log2(0.9)),          # 0.152 bits
    ],
)
def test_plob_values(eta: float, expected: float) -> None:
    assert plob_bits_per_use(eta) == pytest.approx(expected, rel=1e-12)
    assert plob_bits_per_use(eta) == pytest.approx(float(qinfo.plob_bound(eta)), rel=1e-12)


def test_plob_is_about_1_44_eta_for_small_eta() -> None:
    # About 1.44 eta for small eta (Pirandola et al. 2017): 1/ln 2 = 1.4427.
    assert plob_bits_per_use(1e-4) == pytest.approx(1.4427e-4, rel=1e-3)


def test_edge_attributes_and_loss_budget() -> None:
    graph = build_graph(scenario())
    edge = graph.edges["Pell Relay", "Rook Lab"]
    # 20 km x 0.2 dB/km + 2 dB = 6 dB (common practice: dB add).
    assert edge["loss_db"] == pytest.approx(6.0)
    assert edge["transmissivity"] == pytest.approx(10 ** -0.6)
    assert edge["length_km"] == 20.0
    assert edge["plob_bits_per_use"] == pytest.approx(-math.log2(1 - 10 ** -0.6))
    physics = edge["physics"]
    assert edge["mode_rate_per_s"] == pytest.approx(4 / physics.attempt_period_s)
    assert edge["plob_bits_per_s"] == pytest.approx(edge["plob_bits_per_use"] * edge["mode_rate_per_s"])
    assert graph.nodes["Orrin Switch"]["site"].role == "switch"


def test_links_at_a_switch_have_no_physics_of_their_own() -> None:
    graph = build_graph(scenario())
    edge = graph.edges["Quillby Lab", "Orrin Switch"]
    assert edge["physics"] is None
    assert edge["loss_db"] == pytest.approx(4.0 * 0.25 + 0.5)   # default 0.25 dB/km
    assert edge["mode_rate_per_s"] > 0 and edge["plob_bits_per_s"] > 0
