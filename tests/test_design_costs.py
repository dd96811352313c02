"""[costs], candidate, cost and min_rate_per_s keys; pricing a network element by element."""

from __future__ import annotations

from typing import Any

import pytest

from netsim.design import cost_table, network_cost
from netsim.errors import ScenarioError
from netsim.report.table import render
from netsim.scenario import load_data


def data(**extra: Any) -> dict[str, Any]:
    """Invented two-lab line through one relay (Yarrow, Zenna)."""
    base: dict[str, Any] = {
        "network": {"name": "Yarrow line"},
        # Hardware stated: the memories the cost-per-useful-pair check was written for (the
        # built-in defaults are now demonstrated NV values, whose pair falls below fidelity 0.5).
        "defaults": {"site": {"t1_s": 10.0, "t2_s": 1.0, "emission_efficiency": 0.5,
                              "memory_efficiency": 0.9, "gate_error": 0.0, "attempt_prep_time_s": 1e-6,
                              "communication_qubits": 1000, "memory_transfer_s": 0.0,
                              "memory_transfer_error": 0.0, "photon_indistinguishability": 1.0,
                              "attempt_dephasing": 0.0},
                     "link": {"phase_noise_rad": 0.0}},
        "costs": {"currency": "kEUR", "fibre_per_km": 3.5, "repeater_site": 150.0, "user_site": 20.0,
                  "memory_slot": 8.0, "mode": 0.75, "detector": 30.0, "heralding_station": 45.0},
        "sites": [{"name": "Yarrow Lab", "role": "user"},
                  {"name": "Mill Relay", "role": "repeater", "memory_slots": 4},
                  {"name": "Zenna Lab", "role": "user", "cost": 0.0}],
        "links": [{"ends": ["Yarrow Lab", "Mill Relay"], "length_km": 12.0, "modes": 4},
                  {"ends": ["Mill Relay", "Zenna Lab"], "length_km": 8.0, "cost": 60.0, "scheme": "direct"}],
        "demands": [{"users": ["Yarrow Lab", "Zenna Lab"], "min_rate_per_s": 25.0}],
    }
    base.update(extra)
    return base


def test_prices_by_hand() -> None:
    """Hand calculation from the pricing rule (fibre priced per route km, a heralding station
    with two detectors per link; common practice):
    Yarrow Lab 20 + 2 x 8 = 36; Mill Relay 150 + 4 x 8 = 182; Zenna Lab own 0 + 2 x 8 = 16;
    Yarrow-Mill 12 x 3.5 = 42 + 45 + 2 x 30 + 2 x 4 x 0.75 = 153; Mill-Zenna own 60 + 2 x 1 x 0.75
    (direct: no station) = 61.5; total 448.5."""
    rows = network_cost(load_data(data()))
    assert [round(r.total, 6) for r in rows] == [36.0, 182.0, 16.0, 153.0, 61.5]
    assert sum(r.total for r in rows) == pytest.approx(448.5)
    text = render(cost_table("Yarrow", rows, "kEUR"), "md")
    assert "448.5" in text and "kEUR" in text


def test_no_costs_no_rows() -> None:
    plain = data()
    del plain["costs"]
    for table in (*plain["sites"], *plain["links"]):
        table.pop("cost", None)
    assert network_cost(load_data(plain)) == []


def test_candidates_are_not_priced_until_built() -> None:
    d = data()
    d["links"].append({"ends": ["Yarrow Lab", "Zenna Lab"], "length_km": 18.0, "candidate": True})
    rows = network_cost(load_data(d))
    assert len(rows) == 5 and sum(r.total for r in rows) == pytest.approx(448.5)


@pytest.mark.parametrize("change, message", [
    (lambda d: d["sites"][1].update(candidate=1), "sites[1].candidate: 1 is not allowed; expected true or false"),
    (lambda d: d["sites"][0].update(candidate=True), "sites[0].candidate: true is not allowed at a user site"),
    (lambda d: d["links"][0].update(cost=-5), "links[0].cost: -5 is not allowed; expected a number >= 0"),
    (lambda d: d["demands"][0].update(min_rate_per_s=-1.0),
     "demands[0].min_rate_per_s: -1 is not allowed; expected a number >= 0 (1/s)"),
    (lambda d: d["costs"].update(fibre_per_kilometre=2), "costs.fibre_per_kilometre: unknown key; did you mean 'fibre_per_km'?"),
    (lambda d: d.update(defaults={"link": {"candidate": True}}), "defaults.link.candidate: unknown key"),
])
def test_bad_keys_one_line(change: Any, message: str) -> None:
    d = data()
    change(d)
    with pytest.raises(ScenarioError) as err:
        load_data(d)
    lines = str(err.value).splitlines()
    assert len(lines) == 1 and lines[0].startswith(message), lines


def test_report_and_compare_show_cost_per_useful_pair() -> None:
    """One demand uses every element of the Yarrow line, so its cost share is the whole 448.5
    (hand calculation above) and its cost per useful pair/s is 448.5 / the closed-form rate (its
    fidelity clears min_fidelity 0.5); a second demand wanting fidelity 0.99 gets no useful pair."""
    from netsim.network import budget
    from netsim.report.build import report_tables
    from netsim.report.compare import candidate_from_scenario, comparison_tables
    from netsim.report.sources import ReportData

    scenario = load_data(data())
    plan = budget(scenario).demands
    rate = plan[0]["expected_rate_per_s"]
    assert plan[0]["expected_fidelity"] >= 0.5 and rate > 0
    report = ReportData("scenario", "yarrow", "Yarrow line", links=budget(scenario).links, demands=plan,
                        scenario=scenario)
    rows = report_tables(report)["demand_costs"].rows
    assert rows[0]["cost_share"] == pytest.approx(448.5)
    assert rows[0]["cost_per_useful_pair_per_s"] == pytest.approx(448.5 / rate)
    assert rows[-1]["demand"] == "network" and rows[-1]["cost_per_useful_pair_per_s"] == pytest.approx(448.5 / rate)

    two = data()
    two["demands"].append({"users": ["Zenna Lab", "Yarrow Lab"], "min_fidelity": 0.99})
    candidate = candidate_from_scenario(load_data(two), None)
    assert candidate.costs[0]["cost_share"] == pytest.approx(448.5 / 2)  # every element shared by two
    assert candidate.costs[1]["useful_rate_per_s"] == 0.0
    assert candidate.costs[1]["cost_per_useful_pair_per_s"] is None
    tables = comparison_tables([candidate])
    totals = tables[1].rows[0]
    assert totals["cost"] == pytest.approx(448.5)
    assert totals["cost_per_useful"] == pytest.approx(448.5 / rate)
    assert tables[-1].title == "Candidates: cost per useful pair per second"
