"""Link and demand budgets (netsim.network.budget) and the bundled scenarios."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import assert_probability, assert_within_bound

from netsim.network import budget, build_graph, find_route, route_hops
from netsim.report.table import render
from netsim.scenario import load, load_data

SCENARIOS = sorted((Path(__file__).resolve().parent.parent / "scenarios").glob("*.toml"))


def chain(bsm: float = 0.5, gate: float = 0.02, encoding: object = "bb84", min_fidelity: float = 0.5):  # type: ignore[no-untyped-def]
    """Invented two-hop chain: Hollin Lab -- 15 km -- Ives Relay -- 15 km -- Jura Lab."""
    return load_data({
        "network": {"name": "Hollin chain"},
        "encoding": {"states": encoding},
        # The worked point is the textbook swap of two hops without transfer errors, on fast
        # hardware with long coherence: stated here (the built-in defaults are demonstrated NV values).
        "defaults": {"site": {"memory_transfer_error": 0.0, "memory_transfer_s": 0.0, "attempt_dephasing": 0.0,
                              "communication_qubits": 2, "emission_efficiency": 0.5, "t2_s": 1.0,
                              "attempt_prep_time_s": 1e-6}},
        "sites": [{"name": "Hollin Lab", "role": "user"},
                  {"name": "Ives Relay", "role": "repeater", "bsm_success_probability": bsm, "gate_error": gate},
                  {"name": "Jura Lab", "role": "user"}],
        "links": [{"ends": ["Hollin Lab", "Ives Relay"], "length_km": 15.0, "attenuation_db_per_km": 0.2,
                   "extra_loss_db": 1.5},
                  {"ends": ["Ives Relay", "Jura Lab"], "length_km": 15.0, "attenuation_db_per_km": 0.2,
                   "extra_loss_db": 1.5}],
        "demands": [{"users": ["Hollin Lab", "Jura Lab"], "min_fidelity": min_fidelity}],
    })


def test_link_rows_loss_arithmetic() -> None:
    """15 km x 0.2 dB/km = 3 dB fibre, + 1.5 dB extra = 4.5 dB, eta = 10^-0.45 (common practice)."""
    row = budget(chain()).links[0]
    assert row["fibre_loss_db"] == pytest.approx(3.0)
    assert row["extra_loss_db"] == pytest.approx(1.5)
    assert row["loss_db"] == pytest.approx(4.5)
    assert row["transmissivity"] == pytest.approx(10 ** -0.45)
    # Repeaterless bound -log2(1 - eta) (Pirandola et al., Nat. Commun. 8, 15043, 2017).
    assert row["plob_bits_per_use"] == pytest.approx(-math.log2(1 - 10 ** -0.45))
    assert row["plob_bits_per_s"] == pytest.approx(row["plob_bits_per_use"] * row["mode_rate_per_s"])


@pytest.mark.parametrize(
    ("encoding", "noiseless_chi"),
    [
        ("bb84", 1.0),     # four BB84 states, average I/2: chi = 1 (Nielsen & Chuang 2010, Sec. 12.1)
        ("binary", 1.0),   # two orthogonal states: one bit (Nielsen & Chuang 2010, Sec. 12.1)
        # {|0>, |+>} equally likely: chi = h(cos^2(pi/8)) ~ 0.6 (Nielsen & Chuang 2010, Sec. 12.1.1)
        ([[0.0, 0.0, 1.0], [1.0, 0.0, 0.0]], -sum(x * math.log2(x) for x in
                                               (math.cos(math.pi / 8) ** 2, math.sin(math.pi / 8) ** 2))),
    ],
)
def test_holevo_through_the_erasure_channel(encoding: object, noiseless_chi: float) -> None:
    """A flagged erasure keeps the fraction 1 - eps = eta of chi (Bennett, DiVincenzo & Smolin,
    PRL 78, 3217, 1997); the erasure channel's capacity is eta (same source)."""
    row = budget(chain(encoding=encoding)).links[0]
    eta = 10 ** -0.45
    assert row["holevo_bits"] == pytest.approx(eta * noiseless_chi, abs=1e-9)
    assert row["holevo_capacity_bits"] == pytest.approx(eta, abs=1e-12)


def test_demand_expectation_at_a_worked_point() -> None:
    """Two equal hops, BSM success 1/2, gate error 0.02:
    rate = p_bsm / (tau (3 - 2q) / (q (2 - q))) (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019)
    and, swapping Bell-diagonal parts, F = sum_k p1_k p2_k over the four Bell weights, then
    F' = (1 - 0.02) F + 0.02 / 4 for the depolarizing gate error (Duer, Briegel, Cirac & Zoller,
    PRA 59, 169, 1999 (memory)); for Werner hops this is (1 + 3 w^2 (1 - 0.02)) / 4. The estimate
    swaps the heralded states themselves, which are not Werner (their Psi+- weights differ from
    Phi-), so the Werner form is only within ~3e-4 of it."""
    scenario = chain()
    graph = build_graph(scenario)
    hop = graph.edges["Hollin Lab", "Ives Relay"]["physics"]
    q, tau = hop.round_success_probability, hop.attempt_period_s
    w = (4 * hop.fidelity - 1) / 3
    s = 2 ** -0.5
    bell = [np.array(v) * s for v in ([1, 0, 0, 1], [1, 0, 0, -1], [0, 1, 1, 0], [0, 1, -1, 0])]
    other = graph.edges["Ives Relay", "Jura Lab"]["physics"].state
    swapped = sum(float(np.real(v @ hop.state @ v)) * float(np.real(v @ other @ v)) for v in bell)
    row = budget(scenario).demands[0]
    assert row["route"] == "Hollin Lab > Ives Relay > Jura Lab"
    assert row["hops"] == 2
    assert row["expected_rate_per_s"] == pytest.approx(0.5 / (tau * (3 - 2 * q) / (q * (2 - q))), rel=1e-9)
    assert row["expected_fidelity_no_decay"] == pytest.approx(0.98 * swapped + 0.02 / 4, rel=1e-12)
    assert row["expected_fidelity_no_decay"] == pytest.approx((1 + 3 * w * w * 0.98) / 4, abs=3e-4)
    # Wootters (PRL 80, 2245, 1998): a Werner state with F > 1/2 has C = 2F - 1.
    c = 2 * row["expected_fidelity"] - 1
    h = (1 + math.sqrt(1 - c * c)) / 2
    assert row["expected_eof_ebits"] == pytest.approx(-h * math.log2(h) - (1 - h) * math.log2(1 - h), abs=1e-9)


def test_min_fidelity_shortfall_is_a_warning() -> None:
    result = budget(chain(min_fidelity=0.95))
    assert any("demands[0]" in w and "below min_fidelity 0.95" in w for w in result.warnings)
    assert not budget(chain(min_fidelity=0.5)).warnings


def test_to_dict_is_json_ready() -> None:
    data = budget(chain()).to_dict()
    text = json.dumps(data, allow_nan=False)
    assert json.loads(text)["links"][0]["link"] == "Hollin Lab-Ives Relay"


@pytest.mark.parametrize("path", SCENARIOS, ids=[p.stem for p in SCENARIOS])
def test_every_bundled_scenario_loads_and_budgets(path: Path) -> None:
    """Invariants on the bundled networks (Pirandola, Commun. Phys. 2, 51, 2019): the route's weakest
    link <= widest path <= minimum cut; expected rates never above the slowest hop's pair rate."""
    scenario = load(path)
    result = budget(scenario)
    assert len(result.links) == len(scenario.links) and len(result.demands) == len(scenario.demands)
    graph = build_graph(scenario)
    for demand, row in zip(scenario.demands, result.demands):
        assert_within_bound(row["route_bound_bits_per_s"], row["single_path_bits_per_s"])
        assert_within_bound(row["single_path_bits_per_s"], row["multipath_bits_per_s"])
        hops = route_hops(graph, find_route(graph, demand.a, demand.b, scenario.protocol.routing))
        assert_within_bound(row["expected_rate_per_s"], min(h.physics.rate_per_s for h in hops))
        assert_probability([row["expected_fidelity"]])
    for row in result.links:
        assert_within_bound(row["holevo_bits"], row["holevo_capacity_bits"], atol=1e-9)
        if row["fidelity"] is not None:
            assert_probability([row["fidelity"], row["success_probability"]])
    for table in result.tables():
        for fmt in ("table", "csv", "md", "tex", "json"):
            assert render(table, fmt)


def test_route_bound_counts_a_switched_light_path_as_one_channel() -> None:
    """Quillby Lab -(4 km)- Orrin Switch -(6 km)- Pell Relay: one light path of 4 dB (1 + 0.5 + 1.5 + 1),
    heralded at its midpoint station 5 km from Quillby Lab. The station is a node, so the hop is
    bounded by its worse arm (Pirandola, Commun. Phys. 2, 51, 2019): 1.5 dB + 1 km x 2.5/6 dB/km =
    1.9167 dB on Quillby's side, 2.0833 dB on Pell's; -log2(1 - eta) of the 2.0833 dB arm
    (Pirandola et al., Nat. Commun. 8, 15043, 2017) is below either fibre's own bound."""
    scenario = load_data({
        "network": {"name": "Quillby switched"},
        "sites": [{"name": "Quillby Lab", "role": "user"}, {"name": "Orrin Switch", "role": "switch"},
                  {"name": "Pell Relay", "role": "repeater"}, {"name": "Rook Lab", "role": "user"}],
        "links": [{"ends": ["Quillby Lab", "Orrin Switch"], "length_km": 4.0, "extra_loss_db": 0.5},
                  {"ends": ["Orrin Switch", "Pell Relay"], "length_km": 6.0},
                  {"ends": ["Pell Relay", "Rook Lab"], "length_km": 2.0}],
        "demands": [{"users": ["Quillby Lab", "Rook Lab"]}],
    })
    graph = build_graph(scenario)
    hops = route_hops(graph, find_route(graph, "Quillby Lab", "Rook Lab"))
    first = hops[0].physics
    assert first.loss_db == pytest.approx(4.0)
    worse_arm_db = 4.0 - (1.5 + 2.5 / 6)
    expected = -math.log2(1 - 10 ** (-worse_arm_db / 10)) * first.modes / first.attempt_period_s
    row = budget(scenario).demands[0]
    assert row["hops"] == 2
    assert row["route_bound_bits_per_s"] == pytest.approx(expected, rel=1e-12)
    assert row["route_bound_bits_per_s"] < graph.edges["Quillby Lab", "Orrin Switch"]["bound_bits_per_s"]
    # A link at the switch is heralded only inside the light path: it shows no scheme of its
    # own (the path's scheme comes from its reference link); a memory-to-memory link does.
    links = {r["link"]: r for r in budget(scenario).links}
    assert links["Quillby Lab-Orrin Switch"]["scheme"] is None
    assert links["Orrin Switch-Pell Relay"]["scheme"] is None
    assert links["Pell Relay-Rook Lab"]["scheme"] == "single_photon"
    text = render(budget(scenario).tables()[0], "table")
    assert "Quillby Lab-Orrin Switch" in text and text.count("single_photon") == 1
