"""Capacity and demand tables: their cells equal the budget's and the run's numbers."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from netsim.report.capacity import demand_rows, demand_table, link_rows, link_table
from netsim.report.sources import link_key_rates, load_source
from netsim.report.table import render

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
MESH = SCENARIOS / "vellmoor-mesh.toml"


def _run_for(demands: list[dict]) -> dict:
    """A run record shaped as the engine documents it (keys from the engine issue)."""
    out = []
    for i, d in enumerate(demands):
        rate = 10.0 + i
        out.append({"name": d["demand"], "delivered_pairs": 200, "simulated_time_s": 200 / rate,
                    "rate_per_s": rate, "rate_ci95": [rate - 1.0, rate + 1.0],
                    "fidelity_mean": 0.8, "fidelity_ci95": [0.79, 0.81], "eof_mean": 0.6,
                    "ebits_per_s": 0.6 * rate, "key_rate_per_s": 0.1 * rate})
    return {"demands": out, "links": []}


def test_link_table_equals_budget_numbers() -> None:
    data = load_source(MESH)
    rows = link_rows(data.links)
    assert len(rows) == len(data.links) == 14
    for row, budget in zip(rows, data.links):
        for key in ("length_km", "loss_db", "transmissivity", "success_probability",
                    "plob_bits_per_use", "plob_bits_per_s", "holevo_bits", "holevo_capacity_bits"):
            assert row[key] == budget[key], key
        assert row["rate_analytic_per_s"] == budget["pair_rate_per_s"]
        assert row["eof"] == budget["eof_ebits"]
        if budget["attempt_period_s"] is not None:
            assert row["attempt_rate_per_s"] == pytest.approx(1.0 / budget["attempt_period_s"])


def test_link_bound_is_plob_of_transmissivity() -> None:
    # -log2(1 - eta) per use (Pirandola, Laurenza, Ottaviani & Banchi, Nat. Commun. 8, 15043, 2017);
    # for small eta about 1.44 eta.
    for row in link_rows(load_source(MESH).links):
        assert row["plob_bits_per_use"] == pytest.approx(-math.log2(1 - row["transmissivity"]), rel=1e-12)
        assert row["plob_bits_per_use"] >= 1.44 * row["transmissivity"] * 0.999


def test_link_key_rate_below_pair_rate() -> None:
    # The BB84 key fraction 1 - h(e_Z) - h(e_X) lies in [0, 1] (Shor & Preskill, PRL 85, 441, 2000).
    data = load_source(MESH)
    for rate, row in zip(link_key_rates(data.scenario), data.links):
        if rate is None:
            assert row["pair_rate_per_s"] is None
        else:
            assert 0.0 <= rate <= row["pair_rate_per_s"]


def test_simulated_link_rate_from_successes_has_poisson_interval() -> None:
    # 10 successes in 2 s: exact 95 % limits [4.795, 18.39] / 2 (Garwood, Biometrika 28, 437, 1936; memory).
    rows = link_rows([{"link": "Aldmoor-Brackwater"}],
                     [{"name": "Brackwater-Aldmoor", "successes": 10, "attempts": 400}], 2.0)
    assert rows[0]["rate_sim_per_s"] == 5.0
    assert rows[0]["rate_sim_ci95"] == pytest.approx([4.795 / 2, 18.39 / 2], abs=5e-3)


def test_demand_table_joins_run_by_user_pair() -> None:
    data = load_source(MESH)
    run = _run_for(data.demands)
    run["demands"][0]["name"] = "-".join(reversed(data.demands[0]["demand"].split("-", 1)))
    rows = demand_rows(data.demands, run["demands"])
    for row, budget, sim in zip(rows, data.demands, run["demands"]):
        assert row["demand"] == budget["demand"]
        assert row["rate_per_s"] == sim["rate_per_s"] and row["rate_ci95"] == sim["rate_ci95"]
        assert row["fidelity_mean"] == sim["fidelity_mean"]
        assert row["bound_single_path_per_s"] == budget["single_path_bits_per_s"]
        assert row["bound_multipath_per_s"] == budget["multipath_bits_per_s"]
        assert row["rate_to_bound"] == sim["rate_per_s"] / budget["single_path_bits_per_s"]
        assert row["expected_rate_per_s"] == budget["expected_rate_per_s"]
        assert row["route"] == budget["route"] and row["hops"] == budget["hops"]


def test_widest_path_never_exceeds_min_cut() -> None:
    # Single-path capacity <= multipath capacity (Pirandola, Commun. Phys. 2, 51, 2019).
    for row in demand_rows(load_source(MESH).demands):
        assert row["bound_single_path_per_s"] <= row["bound_multipath_per_s"] * (1 + 1e-12)


def test_rendered_demand_table_shows_value_and_interval() -> None:
    data = load_source(MESH)
    table = demand_table(demand_rows(data.demands, _run_for(data.demands)["demands"]), data.title)
    text = render(table, "md")
    assert "| 10.0 | [9.0, 11.0] | 0.800 | [0.790, 0.810] |" in text
    assert "delivered rate (pairs/s)" in text and "multipath bound (ebit/s)" in text
    assert len(link_table(link_rows(data.links), data.title).rows) == 14


def test_clopper_pearson_interval() -> None:
    # Exact binomial limits (Clopper & Pearson, Biometrika 26, 404, 1934): for 0 of n the upper
    # limit solves (1 - p)^n = 0.025, i.e. 1 - 0.025^(1/n) (derived here); for 5 of 10 the
    # tabulated interval is [0.187, 0.813] (memory).
    from netsim.report.units import binomial_ci95

    assert binomial_ci95(0, 10) == (0.0, pytest.approx(1 - 0.025 ** 0.1, rel=1e-9))
    low, high = binomial_ci95(5, 10)
    assert low == pytest.approx(0.187, abs=1e-3) and high == pytest.approx(0.813, abs=1e-3)


def test_simulated_link_rate_uses_success_fraction_per_attempt() -> None:
    # Elementary-pair rate = per-round success probability / attempt period (engine contract).
    rows = link_rows([{"link": "Aldmoor-Brackwater", "attempt_period_s": 1e-4}],
                     [{"link": "Aldmoor-Brackwater", "attempts": 1000, "successes": 50}])
    assert rows[0]["rate_sim_per_s"] == pytest.approx(0.05 / 1e-4)
    low, high = rows[0]["rate_sim_ci95"]
    assert low < 500.0 < high
