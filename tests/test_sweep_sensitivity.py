"""Sensitivity ranking: Sobol' indices and Morris screening against a case solved by hand.

A lone direct link (emitter at Alder Row, absorbing memory at Brackwater Yard; no dark counts)
delivers at the rate e x eta x m x eta_d / period with eta = 10^(-(a L + x)/10): linear in the
emission efficiency e and exponential in the attenuation a. For f = g(e) h(a) with independent
uniform inputs the variance splits exactly (Sobol', Math. Model. Comput. Exp. 1, 407, 1993;
Saltelli et al., Global Sensitivity Analysis: The Primer, Wiley 2008, ch. 4; memory):
V = E[g^2] E[h^2] - E[g]^2 E[h]^2, S1_e = Var(g) E[h]^2 / V, S1_a = E[g]^2 Var(h) / V,
ST_e = Var(g) E[h^2] / V, ST_a = E[g^2] Var(h) / V.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from netsim.cli import main
from netsim.errors import NetsimError, ScenarioError
from netsim.scenario import load, load_data
from netsim.sweep.sensitivity import rank_parameters, uncertain_parameters

LENGTH_KM = 40.0
E_RANGE = (0.2, 0.8)
A_RANGE = (0.15, 0.35)

LINK = f"""
[network]
name = "Alder Row direct"

[[sites]]
name = "Alder Row"
role = "user"
emission_efficiency = 0.5

[[sites]]
name = "Brackwater Yard"
role = "user"

[[links]]
ends = ["Alder Row", "Brackwater Yard"]
length_km = {LENGTH_KM}
scheme = "direct"
attenuation_db_per_km = 0.25
dark_count_probability = 0.0

[[demands]]
users = ["Alder Row", "Brackwater Yard"]
min_fidelity = 0.9

[sensitivity.ranges]
"sites[name=Alder Row].emission_efficiency" = [{E_RANGE[0]}, {E_RANGE[1]}]
"links[*].attenuation_db_per_km" = [{A_RANGE[0]}, {A_RANGE[1]}]
"""


def _scenario(tmp_path: Path, text: str = LINK):
    path = tmp_path / "direct.toml"
    path.write_text(text)
    return load(path), path


def _analytic() -> dict[str, float]:
    e1, e2 = E_RANGE
    a1, a2 = A_RANGE
    k = math.log(10) / 10 * LENGTH_KM            # h(a) = exp(-k a)
    g1, g2 = (e1 + e2) / 2, (e2 - e1) ** 2 / 12 + ((e1 + e2) / 2) ** 2
    h1 = (math.exp(-k * a1) - math.exp(-k * a2)) / (k * (a2 - a1))
    h2 = (math.exp(-2 * k * a1) - math.exp(-2 * k * a2)) / (2 * k * (a2 - a1))
    var = g2 * h2 - g1 ** 2 * h1 ** 2
    return {"s1_e": (g2 - g1 ** 2) * h1 ** 2 / var, "s1_a": g1 ** 2 * (h2 - h1 ** 2) / var,
            "st_e": (g2 - g1 ** 2) * h2 / var, "st_a": g2 * (h2 - h1 ** 2) / var}


def _rows(result, figure: str = "expected_rate_per_s") -> dict[str, dict]:
    return {r["parameter"].split(".")[-1]: r for r in result.rows if r["figure_key"] == figure}


def test_the_closed_form_really_is_linear_in_e_and_exponential_in_a(tmp_path: Path) -> None:
    """The premise of the analytic case, checked on the budget itself."""
    from netsim.network.budget import expected_figures

    scenario, _ = _scenario(tmp_path)

    def rate(e: float, a: float) -> float:
        data = json.loads(json.dumps(scenario.data))
        data["sites"][0]["emission_efficiency"] = e
        data["links"][0]["attenuation_db_per_km"] = a
        return expected_figures(load_data(data))[0]["expected_rate_per_s"]

    assert rate(0.6, 0.25) / rate(0.3, 0.25) == pytest.approx(2.0, rel=1e-9)
    # 0.1 dB/km more over 40 km is 4 dB: a factor 10^-0.4 (definition of the decibel).
    assert rate(0.5, 0.35) / rate(0.5, 0.25) == pytest.approx(10 ** -0.4, rel=1e-9)


def test_sobol_indices_match_the_variance_decomposition_of_a_product(tmp_path: Path) -> None:
    scenario, _ = _scenario(tmp_path)
    expected = _analytic()
    # The ranges make attenuation matter most, with a visible interaction (S1 sum below 1).
    assert expected["st_a"] > expected["st_e"] > 0.3 and expected["s1_a"] + expected["s1_e"] < 0.95
    result = rank_parameters(scenario, method="sobol", samples=256, seed=1)
    rows = _rows(result)
    assert rows["attenuation_db_per_km"]["rank"] == 1 and rows["emission_efficiency"]["rank"] == 2
    for key, name in (("e", "emission_efficiency"), ("a", "attenuation_db_per_km")):
        assert rows[name]["s1"] == pytest.approx(expected[f"s1_{key}"], abs=0.04)
        assert rows[name]["st"] == pytest.approx(expected[f"st_{key}"], abs=0.04)
    # Each analytic value inside (or within a few widths of) the bootstrap interval.
    low, high = rows["attenuation_db_per_km"]["st_ci95"]
    assert low - 2 * (high - low) <= expected["st_a"] <= high + 2 * (high - low)
    # The heralded state is Phi+ with no dark counts: the fidelity does not move at all.
    fidelity = _rows(result, "expected_fidelity")
    assert all(r["st"] == 0.0 for r in fidelity.values())


def test_morris_screening_ranks_the_same_way_with_elementary_effects_of_the_right_size(tmp_path: Path) -> None:
    scenario, _ = _scenario(tmp_path)
    result = rank_parameters(scenario, method="morris", samples=20, seed=2)
    rows = _rows(result)
    assert rows["attenuation_db_per_km"]["rank"] == 1
    # The one-at-a-time swings are the closed form at the range ends: linear in e exactly.
    e = rows["emission_efficiency"]
    assert e["at_high"] / e["at_low"] == pytest.approx(E_RANGE[1] / E_RANGE[0], rel=1e-9)
    a = rows["attenuation_db_per_km"]
    assert a["at_low"] / a["at_high"] == pytest.approx(10 ** (LENGTH_KM * (A_RANGE[1] - A_RANGE[0]) / 10), rel=1e-9)


def test_useful_rate_steps_to_zero_below_the_minimum_fidelity(tmp_path: Path) -> None:
    """min_fidelity 0.9 is met (F = 1), so the useful rate is the rate; at 1.0 + a dark count
    mixture it is never met and the useful rate is 0 everywhere (no variance, indices 0)."""
    scenario, _ = _scenario(tmp_path)
    result = rank_parameters(scenario, method="morris", samples=4, seed=0)
    useful, rate = _rows(result, "useful_rate_per_s"), _rows(result)
    assert useful["emission_efficiency"]["at_high"] == rate["emission_efficiency"]["at_high"]
    strict = LINK.replace("min_fidelity = 0.9", "min_fidelity = 1.0").replace(
        "dark_count_probability = 0.0", "dark_count_probability = 0.01")
    scenario, _ = _scenario(tmp_path, strict)
    result = rank_parameters(scenario, method="morris", samples=4, seed=0)
    assert all(r["baseline"] == 0.0 and r["mu_star"] == 0.0 for r in _rows(result, "useful_rate_per_s").values())


def test_default_spread_stays_inside_allowed_ranges() -> None:
    """Without [sensitivity.ranges]: 20 % around each value, clipped to what the key allows
    (detector efficiency 0.9 -> [0.72, 1]) and T2 kept at most 2 T1."""
    scenario = load(Path(__file__).resolve().parents[1] / "scenarios" / "chain3.toml")
    params, _notes = uncertain_parameters(scenario)
    by_key = {p.key: p for p in params}
    det = by_key["links[*].detector_efficiency"]
    assert (det.low, det.high) == pytest.approx((0.72, 1.0))
    for site in scenario.sites:
        assert site.t2_s * 1.2 <= 2 * site.t1_s or by_key["sites[*].t2_s"].high <= 2 * site.t1_s


@pytest.mark.parametrize(("replace", "message"), [
    ('"links[*].attenuation_db_per_km" = [0.15, 0.35]', '"links[*].attenuation_db_per_km" = [0.35, 0.15]'),
    ('"links[*].attenuation_db_per_km" = [0.15, 0.35]', '"links[9].attenuation_db_per_km" = [0.15, 0.35]'),
])
def test_bad_ranges_are_one_line_errors(tmp_path: Path, replace: str, message: str) -> None:
    scenario, _ = _scenario(tmp_path, LINK.replace(replace, message))
    with pytest.raises(ScenarioError) as info:
        rank_parameters(scenario, method="morris", samples=4)
    assert len(str(info.value).splitlines()) == 1 and "sensitivity.ranges" in str(info.value)


def test_a_sample_outside_what_a_key_allows_is_named(tmp_path: Path) -> None:
    scenario, _ = _scenario(tmp_path, LINK.replace(f"[{E_RANGE[0]}, {E_RANGE[1]}]", "[0.5, 1.5]"))
    with pytest.raises(NetsimError, match=r"not a valid scenario .*emission_efficiency"):
        rank_parameters(scenario, method="morris", samples=4)


def test_command_writes_json_csv_md_and_a_tornado_chart_and_never_overwrites(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    _, path = _scenario(tmp_path)
    out = tmp_path / "sens"
    argv = ["sensitivity", str(path), "--method", "morris", "--samples", "4", "--out", str(out)]
    assert main(argv) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == ["sensitivity.csv", "sensitivity.json", "sensitivity.md",
                     "tornado-alder-row-brackwater-yard.pdf", "tornado-alder-row-brackwater-yard.png"]
    data = json.loads((out / "sensitivity.json").read_text())
    assert data["method"] == "morris" and {p["key"] for p in data["parameters"]} == {
        "sites[name=Alder Row].emission_efficiency", "links[*].attenuation_db_per_km"}
    capsys.readouterr()
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--force" in err[0] and "--out DIR" in err[0]
    assert main([*argv, "--force"]) == 0


@pytest.mark.parametrize(("extra", "fragment"), [
    (["--method", "fast"], "--method = 'fast' is not allowed; expected one of sobol, morris"),
    (["--samples", "100"], "--samples = 100 is not allowed; expected a power of two"),
    (["--spread", "1.5"], "--spread = 1.5 is not allowed"),
])
def test_bad_options_are_one_line_errors(tmp_path: Path, extra: list[str], fragment: str,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    _, path = _scenario(tmp_path)
    assert main(["sensitivity", str(path), "--out", str(tmp_path / "o"), *extra]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and fragment in err[0], err


def test_short_simulations_rank_the_same_way_on_the_direct_link(tmp_path: Path) -> None:
    """With --simulate each sample is an engine run (same seed for every sample, so the
    comparison is not drowned in noise): a fourfold emission efficiency gives a clearly higher
    delivered rate, and attenuation still matters most."""
    scenario, _ = _scenario(tmp_path)
    result = rank_parameters(scenario, method="morris", samples=3, seed=5, simulate_pairs=60)
    rows = _rows(result)
    e = rows["emission_efficiency"]
    assert e["at_high"] > 2 * e["at_low"]               # rate ~ e: 0.8 / 0.2 = 4 (the closed form)
    assert rows["attenuation_db_per_km"]["rank"] == 1
    assert "short simulations of 60 pairs" in result.table().notes[0]
