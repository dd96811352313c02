"""``netsim compare``: same demands, same seed, numbers equal to each candidate's own run."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from netsim import engine
from netsim.cli import main
from netsim.report.compare import comparison_tables, run_candidates
from netsim.scenario import load

COMMON = """
[defaults.site]
memory_slots = 2
t1_s = 100.0
t2_s = 1.0
emission_efficiency = 0.2
attempt_prep_time_s = 5e-6

[defaults.link]
attenuation_db_per_km = 0.25
extra_loss_db = 1.0
scheme = "single_photon"

[[sites]]
name = "Aldmoor Lab"
role = "user"
x_km = 0.0
y_km = 0.0

[[sites]]
name = "Cinderfold Campus"
role = "user"
x_km = 16.0
y_km = 0.0
"""

CHAIN = """
[network]
name = "Aldmoor chain"
purpose = "Invented two-hop candidate."
""" + COMMON + """
[[sites]]
name = "Brackmere Relay"
role = "repeater"
x_km = 8.0
y_km = 1.0
memory_slots = 4

[[links]]
ends = ["Aldmoor Lab", "Brackmere Relay"]
length_km = 8.0

[[links]]
ends = ["Brackmere Relay", "Cinderfold Campus"]
length_km = 10.0

[[demands]]
users = ["Aldmoor Lab", "Cinderfold Campus"]
pairs = 100
"""

DIRECT = """
[network]
name = "Aldmoor direct"
purpose = "Invented one-link candidate."
""" + COMMON + """
[[links]]
ends = ["Aldmoor Lab", "Cinderfold Campus"]
length_km = 18.0

[[demands]]
users = ["Cinderfold Campus", "Aldmoor Lab"]
pairs = 100
"""


@pytest.fixture
def files(tmp_path: Path) -> list[str]:
    (tmp_path / "chain.toml").write_text(CHAIN)
    (tmp_path / "direct.toml").write_text(DIRECT)
    return [str(tmp_path / "chain.toml"), str(tmp_path / "direct.toml")]


def test_side_by_side_equals_each_run(files: list[str]) -> None:
    candidates = run_candidates(files, pairs=60, seed=7)
    side, totals, _cuts = comparison_tables(candidates)
    assert len(side.rows) == 1                       # the demand is matched across user order
    for i, path in enumerate(files):
        own = engine.run(load(path), pairs=60, seed=7, ensembles=False).to_dict()["demands"][0]
        assert side.rows[0][f"r{i}"] == own["rate_per_s"]
        assert side.rows[0][f"r{i}_ci"] == own["rate_ci95"]
        assert side.rows[0][f"f{i}"] == own["fidelity_mean"]
    assert [r["links"] for r in totals.rows] == [2, 1]
    assert [r["fibre_km"] for r in totals.rows] == [18.0, 18.0]


def test_chain_bottleneck_is_its_weaker_link(files: list[str]) -> None:
    # A chain is limited by its worst link (Pirandola, Commun. Phys. 2, 51, 2019): the longer
    # 10 km link; the direct candidate's cut is its only link. Heralded at its midpoint station,
    # that link is two channels of sqrt(eta) each (half the dB either side), so its capacity is
    # -log2(1 - sqrt(eta)) at its mode rate (Pirandola et al., Nat. Commun. 8, 15043, 2017, per
    # arm; the worse arm bounds the chain, Pirandola 2019).
    from netsim.network import build_graph

    candidates = run_candidates(files, simulate=False)
    cuts = comparison_tables(candidates)[2].rows
    assert cuts[0]["links"] == "Brackmere Relay-Cinderfold Campus"
    graph = build_graph(load(files[1]))
    edge = graph.edges["Aldmoor Lab", "Cinderfold Campus"]
    eta = edge["transmissivity"]
    assert cuts[1]["cut_bits_per_s"] == pytest.approx(-math.log2(1 - math.sqrt(eta)) * edge["mode_rate_per_s"])


def test_cli_prints_and_writes_tables(files: list[str], tmp_path: Path, capsys) -> None:
    out = tmp_path / "cmp"
    assert main(["compare", *files, "--pairs", "30", "--format", "csv", "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "chain: rate (pairs/s)" in printed and "direct: rate (pairs/s)" in printed
    assert sorted(p.name for p in out.iterdir()) == ["compare-bottlenecks.csv", "compare-demands.csv",
                                                      "compare-rates.pdf", "compare-rates.png",
                                                      "compare-totals.csv"]


@pytest.mark.parametrize(("argv", "message"), [
    (["--pairs", "0"], "--pairs = 0 is not allowed; expected an integer >= 1"),
    (["--format", "xls"], "--format = 'xls' is not allowed"),
    (["--pairs", "5", "--time-s", "1"], "either --pairs or --time-s"),
])
def test_cli_bad_options_are_one_line_errors(files: list[str], capsys, argv: list[str], message: str) -> None:
    assert main(["compare", *files, *argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]


def test_cli_needs_two_candidates(files: list[str], capsys) -> None:
    assert main(["compare", files[0]]) == 2
    assert "two or more scenario files" in capsys.readouterr().err


def test_comparison_figure_has_a_bar_per_candidate_and_demand(files: list[str]) -> None:
    from matplotlib.patches import Rectangle

    from netsim.report.compare import comparison_figure

    candidates = run_candidates(files, pairs=30, seed=2)
    ax = comparison_figure(candidates).axes[0]
    bars = [p for p in ax.patches if isinstance(p, Rectangle)]
    assert len(bars) == 2
    assert sorted(b.get_width() for b in bars) == sorted(c.demands[0]["rate_per_s"] for c in candidates)
    assert ax.get_xlabel() == "delivered rate (pairs/s)"
    assert [t.get_text() for t in ax.get_yticklabels()] == ["AL-CC"]
    assert {t.get_text() for t in ax.get_legend().get_texts()} == {"chain", "direct"}
