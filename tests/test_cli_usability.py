"""What a planner reads: names in outputs match the scenario file as written."""

from __future__ import annotations

from pathlib import Path

import pytest

from netsim.cli import main

CHAIN = """
[network]
name = "Yarrowby spur"

[[sites]]
name = "Yarrowby Lab"
role = "user"

[[sites]]
name = "Quillmere Relay"
role = "repeater"

[[sites]]
name = "Ashwick Campus"
role = "user"

[[links]]
ends = ["Yarrowby Lab", "Quillmere Relay"]
length_km = 6.0

[[links]]
ends = ["Quillmere Relay", "Ashwick Campus"]
length_km = 14.0

[[demands]]
users = ["Yarrowby Lab", "Ashwick Campus"]
pairs = 20
"""


def test_bottleneck_link_is_named_as_in_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A chain's minimum cut is its weakest link (Pirandola, Commun. Phys. 2, 51, 2019): here the
    longer 14 km link, which the file and the budget table call 'Quillmere Relay-Ashwick Campus'
    (its ends in file order, not sorted)."""
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    twin = tmp_path / "spur-b.toml"
    twin.write_text(CHAIN.replace("length_km = 6.0", "length_km = 5.0"))
    assert main(["compare", str(path), str(twin), "--no-simulate", "--format", "csv"]) == 0
    out = capsys.readouterr().out
    assert "Quillmere Relay-Ashwick Campus" in out
    assert "Ashwick Campus-Quillmere Relay" not in out
    assert main(["budget", str(path), "--format", "csv", "--only", "links"]) == 0
    assert "Quillmere Relay-Ashwick Campus" in capsys.readouterr().out


def test_rate_vs_distance_legend_sits_clear_of_the_curves() -> None:
    """The scheme legend is drawn above the plotting area, so no curve runs under it."""
    import numpy as np

    from netsim.report.figures import rate_vs_distance

    lengths = np.linspace(1.0, 120.0, 20)
    eta = 10 ** (-0.2 * lengths / 10)
    rates = {name: k * eta for name, k in
             (("two_photon", 0.1), ("single_photon", 0.3), ("midpoint_source", 0.01), ("direct", 0.5))}
    fig = rate_vs_distance(lengths, rates, -np.log2(1 - eta))
    fig.canvas.draw()
    ax = fig.axes[0]
    legend = ax.get_legend().get_window_extent()
    assert legend.y0 >= ax.get_window_extent().y1 - 1.0


def _inside(inner, outer, slack: float = 1.0) -> bool:
    return (inner.x0 >= outer.x0 - slack and inner.x1 <= outer.x1 + slack
            and inner.y0 >= outer.y0 - slack and inner.y1 <= outer.y1 + slack)


def test_sweep_figure_labels_fit_and_legend_clears_the_bands() -> None:
    """A swept link named by its ends makes a long axis label: it is broken onto two lines and
    stays inside the figure; the legend and the title sit above the axes, apart."""
    import numpy as np

    from netsim.report.figures import metric_vs_parameter
    from netsim.report.units import param_label

    label = param_label("links[name=Harlowmere Relay-Pennick Vale Archive].length_km")
    assert label == "length (km),\nlinks[name=Harlowmere Relay-Pennick Vale Archive]"
    assert param_label("sites[role=repeater].t2_s") == "t2 (s), sites[role=repeater]"
    x = np.array([5.0, 10.0, 20.0])
    curves = {name: (x, y, y - 2, y + 2) for name, y in
              (("Harlowmere Lab-Pennick Vale Archive", 40 - x / 5), ("Ostrey Court-Pennick Vale Archive", 20 + 0 * x))}
    fig = metric_vs_parameter(curves, xlabel=label, ylabel="delivered rate (pairs/s)", title="demand Ostrey")
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    whole = fig.bbox
    assert _inside(ax.xaxis.label.get_window_extent(renderer), whole)
    legend = ax.get_legend().get_window_extent(renderer)
    title = fig.get_suptitle()
    assert title == "demand Ostrey"
    assert legend.y0 >= ax.get_window_extent(renderer).y1 - 1.0 and _inside(legend, whole)
    assert fig._suptitle.get_window_extent(renderer).y0 >= legend.y1 - 1.0


def test_figure_named_after_a_key_path_keeps_the_whole_key(tmp_path: Path) -> None:
    """'rate_per_s-vs-links[*].length_km' was saved as 'rate_per_s-vs-links-.png' (the key lost)."""
    from matplotlib.figure import Figure

    from netsim.report.build import file_stem
    from netsim.report.figures import save_figure

    stem = file_stem("rate_per_s-vs-links[*].length_km")
    assert stem == "rate_per_s-vs-links.length_km"
    paths = save_figure(Figure(), tmp_path / stem)
    assert [p.name for p in paths] == ["rate_per_s-vs-links.length_km.png", "rate_per_s-vs-links.length_km.pdf"]
    assert all(p.is_file() for p in paths)


def test_map_key_shows_utilisation_only_when_simulated() -> None:
    """A scenario report draws every fibre at its thinnest: a key reading 'utilisation 0%' would
    tell the reader the fibres are idle, when nothing was simulated."""
    from netsim.report.netmap import MapLink, MapSite, network_map

    sites = [MapSite("Orrin Quay", "user", 0.0, 0.0), MapSite("Velt Relay", "repeater", 8.0, 1.0),
             MapSite("Sorrow Fen", "user", 15.0, 4.0)]
    plain = [MapLink("Orrin Quay", "Velt Relay", 2e4), MapLink("Velt Relay", "Sorrow Fen", 1e4)]
    used = [MapLink("Orrin Quay", "Velt Relay", 2e4, 0.3), MapLink("Velt Relay", "Sorrow Fen", 1e4, 0.9)]

    def key_texts(links: list[MapLink]) -> set[str]:
        key = network_map(sites, links).axes[1]
        return {t.get_text() for t in key.get_legend().get_texts()}

    assert "fibre (not simulated)" in key_texts(plain)
    assert not any("utilisation" in t for t in key_texts(plain))
    assert {"utilisation 0%", "utilisation 100%"} <= key_texts(used)


def test_comparison_figure_keys_its_abbreviations(tmp_path: Path) -> None:
    """Bars are labelled 'YL-AC'; the figure itself says what the initials stand for."""
    from netsim.report.compare import comparison_figure, run_candidates

    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    twin = tmp_path / "spur-b.toml"
    twin.write_text(CHAIN.replace("length_km = 6.0", "length_km = 5.0"))
    fig = comparison_figure(run_candidates([str(path), str(twin)], pairs=20, seed=1))
    assert [t.get_text() for t in fig.axes[0].get_yticklabels()] == ["YL-AC"]
    key = fig.get_supxlabel()
    assert "YL: Yarrowby Lab" in key and "AC: Ashwick Campus" in key


def test_compare_lists_every_file_it_wrote(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    twin = tmp_path / "spur-b.toml"
    twin.write_text(CHAIN.replace("length_km = 6.0", "length_km = 5.0"))
    out = tmp_path / "cmp"
    assert main(["compare", str(path), str(twin), "--pairs", "20", "--format", "md", "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert f"wrote 5 files to {out}:" in printed
    for name in ("compare-demands.md", "compare-totals.md", "compare-bottlenecks.md", "compare-rates.png"):
        assert f"  {out / name}" in printed and (out / name).is_file()


def test_check_reports_too_few_memory_slots_as_run_would(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A repeater between two hops holds one qubit per hop end (common practice: one memory per
    link pair awaiting the swap), so one slot cannot serve the spur; check used to say 'valid'."""
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN.replace('role = "repeater"', 'role = "repeater"\nmemory_slots = 1'))
    expected = (f"{path}: sites[1].memory_slots: 1 is not allowed; expected an integer >= 2 for demand "
                "Yarrowby Lab-Ashwick Campus")
    for command in ("check", "run"):
        assert main([command, str(path), "--out", str(tmp_path)] if command == "run" else [command, str(path)]) == 2
        captured = capsys.readouterr()
        err = captured.err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith(f"netsim {command}: error: {expected}")
        assert "Traceback" not in captured.err


def test_integer_key_written_as_a_float_is_shown_as_written(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN.replace("length_km = 14.0", "length_km = 14.0\nmodes = 2.0"))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.endswith("links[1].modes: 2.0 is not allowed; expected an integer in [1, 1000000], written without a decimal point")


def test_sweep_rejects_points_with_too_few_slots_before_running(tmp_path: Path,
                                                                capsys: pytest.CaptureFixture[str]) -> None:
    """Every point is checked as a whole before any runs: a point whose repeater has one slot used
    to run, fail, and invite --retry-failed, which fails again."""
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    argv = ["sweep", str(path), "--vary", "sites[role=repeater].memory_slots=1,2", "--pairs", "10",
            "--store", str(tmp_path / "s.sqlite")]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert "sweep point 0 (sites[role=repeater].memory_slots=1): is refused: " \
           "sites[1].memory_slots: 1 is not allowed; expected an integer >= 2" in err[0]
    assert not (tmp_path / "s.sqlite").exists()


@pytest.mark.parametrize("command", ["compare", "report"])
def test_simulating_commands_name_the_file_with_too_few_slots(command: str, tmp_path: Path,
                                                              capsys: pytest.CaptureFixture[str]) -> None:
    bad = tmp_path / "spur.toml"
    bad.write_text(CHAIN.replace('role = "repeater"', 'role = "repeater"\nmemory_slots = 1'))
    good = tmp_path / "spur-b.toml"
    good.write_text(CHAIN)
    argv = ([command, str(bad), str(good)] if command == "compare"
            else [command, str(bad), "--simulate", "--out", str(tmp_path / "r")])
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and f"error: {bad}: sites[1].memory_slots: 1 is not allowed" in err[0]


def test_compare_text_leaves_min_cut_to_the_bottleneck_table(tmp_path: Path,
                                                              capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    twin = tmp_path / "spur-b.toml"
    twin.write_text(CHAIN.replace("length_km = 6.0", "length_km = 5.0"))
    base = ["compare", str(path), str(twin), "--pairs", "20"]
    assert main(base) == 0
    side = capsys.readouterr().out.split("\n\n")[0]
    assert "spur: rate (pairs/s)" in side and "min-cut bound" not in side and "--wide prints all" in side
    assert main([*base, "--wide"]) == 0
    assert "spur: min-cut bound (ebit/s)" in capsys.readouterr().out.split("\n\n")[0]
    assert main([*base, "--format", "csv"]) == 0
    assert "spur: min-cut bound (ebit/s)" in capsys.readouterr().out
    assert main([*base, "--no-simulate"]) == 0  # nothing simulated: the bounds are the content
    assert "spur: min-cut bound (ebit/s)" in capsys.readouterr().out.split("\n\n")[0]


def test_report_says_how_many_tables_it_wrote(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    assert main(["report", str(path), "--no-figures", "--out", str(tmp_path / "r")]) == 0
    out = capsys.readouterr().out
    assert "(1 of 2 tables shown; every table is in the files below)" in out
    assert out.index("Demands: Yarrowby spur") < out.index("1 of 2 tables") < out.index("wrote 2 files")


def test_store_report_without_its_scenario_says_so(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    """Reporting a store from another directory: --simulate used to be ignored without a word,
    and the link and demand tables silently missing."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "spur.toml").write_text(CHAIN)
    assert main(["sweep", "spur.toml", "--vary", "links[*].length_km=8,12", "--pairs", "10",
                 "--workers", "1", "--quiet", "--store", "far/away/sweep.sqlite"]) == 0
    (tmp_path / "spur.toml").unlink()
    capsys.readouterr()
    assert main(["report", "far/away/sweep.sqlite", "--no-figures", "--simulate"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--simulate needs the scenario this store was swept from ('Yarrowby spur')" in err[0]
    assert "--scenario FILE" in err[0]
    assert main(["report", "far/away/sweep.sqlite", "--no-figures"]) == 0
    assert "no link or demand tables and no map" in capsys.readouterr().out


@pytest.mark.parametrize(("argv", "line"), [
    (["report", "x.toml", "--pairs", "ten"], "netsim report: error: --pairs = 'ten' is not allowed; expected an integer"),
    (["compare", "a.toml", "b.toml", "--time-s", "soon"],
     "netsim compare: error: --time-s = 'soon' is not allowed; expected a number"),
    (["budget", "x.toml", "--only", "link"],
     "netsim budget: error: --only = 'link' is not allowed; expected one of links, demands"),
    (["frobnicate"], "netsim: error: COMMAND = 'frobnicate' is not allowed; expected one of link, check, budget, "
                     "run, sweep, sensitivity, report, compare, profiles, design, import"),
])
def test_option_type_errors_take_the_house_form(argv: list[str], line: str,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2
    assert capsys.readouterr().err.strip().splitlines() == [line]


def test_interrupted_sweep_says_how_to_resume(monkeypatch: pytest.MonkeyPatch,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    import netsim.cli.sweep_cmd as sweep_cmd

    def interrupted(_args: object) -> int:
        raise KeyboardInterrupt

    monkeypatch.setattr(sweep_cmd, "run_command", interrupted)
    assert main(["sweep", "x.toml"]) == 130
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["netsim sweep: interrupted; results written so far are kept; run the same command "
                   "again to resume (finished points are not rerun)"]


def test_units_are_written_alike_in_every_command(capsys: pytest.CaptureFixture[str]) -> None:
    """Unit symbols take no plural (common practice, as for SI symbols): 'bit/use', as the budget
    and report tables write it, not 'bits/use'."""
    assert main(["link", "--length-km", "10"]) == 0
    out = capsys.readouterr().out
    assert "repeaterless bound (ebit/use)" in out and "(bit/qubit)" in out and "coherent info (ebit/pair)" in out
    assert "bits/" not in out and "ebits/pair" not in out


def test_map_labels_stay_inside_the_frame() -> None:
    """The label of the east-most site was drawn to its right, across the map's frame."""
    from netsim.report.netmap import MapLink, MapSite, network_map

    sites = [MapSite("Orrin Quay", "user", 0.0, 0.0), MapSite("Velt Relay", "repeater", 9.0, 11.0),
             MapSite("Wrenholt Far East Campus", "user", 22.0, 16.0)]
    links = [MapLink("Orrin Quay", "Velt Relay", 2e4), MapLink("Velt Relay", "Wrenholt Far East Campus", 1e4)]
    fig = network_map(sites, links)
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    frame = ax.get_window_extent(renderer)
    for text in ax.texts:
        box = text.get_window_extent(renderer)
        assert frame.x0 - 1 <= box.x0 and box.x1 <= frame.x1 + 1, text.get_text()


def test_finished_sweep_names_the_next_command(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    store = tmp_path / "s.sqlite"
    assert main(["sweep", str(path), "--vary", "links[*].length_km=8,12", "--pairs", "10", "--workers", "1",
                 "--quiet", "--store", str(store)]) == 0
    assert capsys.readouterr().out.splitlines()[-1] == f"tables and figures: netsim report {store}"


def test_unused_link_explains_its_empty_simulated_cells(tmp_path: Path) -> None:
    spare = CHAIN + '''
[[sites]]
name = "Brindle Yard"
role = "user"

[[links]]
ends = ["Quillmere Relay", "Brindle Yard"]
length_km = 4.0
'''
    path = tmp_path / "spur.toml"
    path.write_text(spare)
    assert main(["report", str(path), "--simulate", "--pairs", "20", "--no-figures", "--quiet",
                 "--out", str(tmp_path / "r")]) == 0
    text = (tmp_path / "r" / "links.md").read_text()
    assert "| Quillmere Relay-Brindle Yard |" in text
    assert "'-' in the simulated columns: no demand's route uses the link." in text


@pytest.mark.parametrize(("argv", "line"), [
    (["run", "x.toml", "--sed", "3"],
     "netsim run: error: --sed 3: not an option or argument of netsim run; did you mean --seed? see netsim run --help"),
    # A prefix is not the option: '--pair 10' once replaced a 3000-pair run (argparse default).
    (["run", "x.toml", "--pair", "10"],
     "netsim run: error: --pair 10: not an option or argument of netsim run; did you mean --pairs? see netsim run --help"),
    (["report", "x.toml", "--sim"],
     "netsim report: error: --sim: not an option or argument of netsim report; did you mean --simulate? see netsim report --help"),
    (["budget", "a.toml", "b.toml"],
     "netsim budget: error: b.toml: not an option or argument of netsim budget; see netsim budget --help"),
])
def test_unknown_option_names_the_command(argv: list[str], line: str, capsys: pytest.CaptureFixture[str]) -> None:
    """argparse said 'netsim: error: unrecognized arguments: --sed 3', without the command."""
    assert main(argv) == 2
    assert capsys.readouterr().err.strip().splitlines() == [line]


def test_one_name_per_quantity_in_every_table() -> None:
    """The repeaterless bound, the network bounds and the Holevo figures are named alike by
    budget, run, report, compare and link (a planner comparing two outputs must not wonder
    whether 'PLOB (bit/use)' and 'repeaterless bound (ebit/use)' differ)."""
    import argparse
    import importlib

    from netsim.cli.link_cmd import link_table
    from netsim.report import capacity

    plan = importlib.import_module("netsim.network.budget")      # the module, not the function
    run_result = importlib.import_module("netsim.engine.result")

    canonical = {"plob_bits_per_use": "repeaterless bound (ebit/use)",
                 "plob_bits_per_s": "repeaterless bound (ebit/s)",
                 "bound_bits_per_s": "link bound as heralded (ebit/s)",
                 "holevo_bits": "Holevo information (bit/qubit)",
                 "holevo_capacity_bits": "Holevo capacity (bit/use)",
                 "route_bound_bits_per_s": "route bound (ebit/s)",
                 "single_path_bits_per_s": "single-path bound (ebit/s)",
                 "bound_single_path_per_s": "single-path bound (ebit/s)",
                 "multipath_bits_per_s": "multipath bound (ebit/s)",
                 "bound_multipath_per_s": "multipath bound (ebit/s)"}
    args = argparse.Namespace(length_km=[10.0], attenuation_db_per_km=0.2, extra_loss_db=0.0,
                              depolarizing=0.0, encoding="bb84", loss_model="erasure")
    columns = [*plan.LINK_COLUMNS, *plan.DEMAND_COLUMNS, *capacity.LINK_COLUMNS, *capacity.DEMAND_COLUMNS,
               *run_result.DEMAND_COLUMNS, *link_table(args).columns]
    seen = [(c.key, c.header) for c in columns if c.key in canonical]
    assert len({k for k, _ in seen}) >= 8
    assert [(k, h) for k, h in seen if h != canonical[k]] == []
    assert not any("PLOB" in c.header or "Holevo chi" in c.header for c in columns)


def test_a_run_never_replaces_an_earlier_result_silently(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A second run into the same directory (once a mistyped --pair 10 over a 3000-pair run)
    is refused before it simulates, in one line saying how to proceed; the first result stays."""
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    out = tmp_path / "out"
    assert main(["run", str(path), "--pairs", "15", "--out", str(out)]) == 0
    before = (out / "run.json").read_text()
    capsys.readouterr()
    assert main(["run", str(path), "--pairs", "5", "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"netsim run: error: {out / 'run.json'} already holds an earlier run result; "
                   "pass --force to replace it, or --out DIR to keep both"]
    assert (out / "run.json").read_text() == before
    assert main(["report", str(path), "--no-figures", "--out", str(tmp_path / "r"), "--quiet"]) == 0
    assert main(["report", str(path), "--no-figures", "--out", str(tmp_path / "r"), "--quiet"]) == 2
    assert "already holds an earlier report" in capsys.readouterr().err
