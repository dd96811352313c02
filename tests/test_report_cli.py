"""``netsim report``: the files written for a scenario, a run result and a sweep store, and the
numbers in them equal the run's and the store's."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from netsim.errors import ParameterError

from netsim import engine
from netsim.cli import main
from netsim.report.frames import to_dataframe
from netsim.report.latex import check_fragment, compile_fragment, tex_engine
from netsim.report.sources import load_source, store_records
from netsim.scenario import load

CHAIN3 = Path(__file__).resolve().parents[1] / "scenarios" / "chain3.toml"


def _csv_rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


def test_scenario_report_with_simulation_equals_the_run(tmp_path: Path) -> None:
    out = tmp_path / "report"
    assert main(["report", str(CHAIN3), "--simulate", "--pairs", "40", "--seed", "3",
                 "--format", "csv", "--out", str(out), "--quiet"]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == ["demands.csv", "links.csv", "network-map.pdf", "network-map.png",
                     "rate-vs-distance.pdf", "rate-vs-distance.png"]
    run = engine.run(load(CHAIN3), pairs=40, seed=3).to_dict()
    row = _csv_rows(out / "demands.csv")[0]
    sim = run["demands"][0]
    assert float(row["delivered rate (pairs/s)"]) == sim["rate_per_s"]
    assert json.loads(row["rate 95% CI (pairs/s)"]) == sim["rate_ci95"]
    assert float(row["fidelity"]) == sim["fidelity_mean"]
    assert float(row["ebits/s (ebit/s)"]) == sim["ebits_per_s"]
    assert float(row["delivered rate / single-path bound"]) == pytest.approx(
        sim["rate_per_s"] / sim["single_path_bits_per_s"], rel=1e-12)
    links = _csv_rows(out / "links.csv")
    assert all(float(r["pair rate, simulated (pairs/s)"]) > 0 for r in links)


def test_run_json_report_finds_its_scenario(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "scenarios").mkdir()
    (tmp_path / "scenarios" / "chain3.toml").write_text(CHAIN3.read_text())
    result = engine.run(load(tmp_path / "scenarios" / "chain3.toml"), pairs=30, seed=1, ensembles=False)
    result.write(tmp_path / "results" / "chain3")
    assert main(["report", "results/chain3/run.json", "--format", "tex", "--quiet"]) == 0
    out = tmp_path / "results" / "chain3" / "report-run"    # named for its source
    fragments = [(out / name).read_text() for name in ("links.tex", "demands.tex")]
    assert [check_fragment(f) for f in fragments] == [[], []]
    if tex_engine() is not None:                      # compile only where TeX is installed
        result = compile_fragment(fragments)
        assert result is not None and result[0], result
    data = load_source(tmp_path / "results" / "chain3" / "run.json")
    assert data.scenario is not None and len(data.links) == 2


def _store(tmp_path: Path) -> Path:
    from netsim.sweep.store import PointRecord, create_or_resume

    path = tmp_path / "results" / "aldmoor" / "sweep.sqlite"
    with create_or_resume(path, {"scenario_hash": "h", "spec_hash": "s",
                                 "scenario_name": "Aldmoor test"}) as store:
        points = []
        for i, (alpha, t2) in enumerate([(0.2, 0.1), (0.2, 1.0), (0.3, 0.1), (0.3, 1.0)]):
            params = json.dumps({"defaults.link.attenuation_db_per_km": alpha, "sites[*].t2_s": t2})
            points.append((f"p{i}", i, params, 0, i))
        store.register(points)
        for i in range(4):
            rate = 100.0 + 10 * i
            store.record(PointRecord(f"p{i}", "done", metrics=(
                ("demand", "Aldmoor-Cinderfold", "rate_per_s", rate),
                ("demand", "Aldmoor-Cinderfold", "rate_ci95_low", rate - 5.0),
                ("demand", "Aldmoor-Cinderfold", "rate_ci95_high", rate + 5.0),
                ("demand", "Aldmoor-Cinderfold", "fidelity_mean", 0.8 + 0.01 * i),
                ("link", "Aldmoor-Brackmere", "attempts", 1000.0))))
    return path


def test_store_report_pivots_the_stored_numbers(tmp_path: Path, capsys) -> None:
    path = _store(tmp_path)
    out = tmp_path / "out"
    assert main(["report", str(path), "--format", "json", "--out", str(out)]) == 0
    assert "delivered rate (pairs/s), demand Aldmoor-Cinderfold" in capsys.readouterr().out
    table = json.loads((out / "pivot-rate_per_s-aldmoor-cinderfold.json").read_text())
    rows = {r["defaults.link.attenuation_db_per_km"]: r for r in table["rows"]}
    c0, c1 = "rate_per_s at sites[*].t2_s=0.1", "rate_per_s at sites[*].t2_s=1"   # real names
    assert (rows[0.2][c0], rows[0.2][c1], rows[0.3][c0], rows[0.3][c1]) == (100.0, 110.0, 120.0, 130.0)
    assert rows[0.3]["rate_per_s_ci95 at sites[*].t2_s=1"] == [125.0, 135.0]
    figures = sorted(p.name for p in out.glob("*.png"))
    assert "heatmap-rate_per_s-aldmoor-cinderfold.png" in figures
    assert "lines-fidelity_mean-aldmoor-cinderfold.png" in figures


def test_store_records_rebuild_intervals(tmp_path: Path) -> None:
    from netsim.sweep.store import open_store

    with open_store(_store(tmp_path)) as store:
        records = store_records(store)
    demand = [r for r in records if r["kind"] == "demand"]
    assert len(demand) == 4 and demand[0]["rate_ci95"] == [95.0, 105.0]
    frame = to_dataframe(load_source_table(tmp_path))
    assert list(frame["rate_per_s_ci95 at sites[*].t2_s=0.1_low"]) == [95.0, 115.0]


def load_source_table(tmp_path: Path):
    from netsim.report.build import report_tables

    data = load_source(tmp_path / "results" / "aldmoor" / "sweep.sqlite")
    return report_tables(data, params=["defaults.link.attenuation_db_per_km", "sites[*].t2_s"])[
        "pivot-rate_per_s-aldmoor-cinderfold"]


@pytest.mark.parametrize(("argv", "message"), [
    (["nowhere.toml"], "SOURCE = 'nowhere.toml' is not allowed; expected an existing file"),
    (["data.xlsx"], "SOURCE = 'data.xlsx' is not allowed; expected a scenario (.toml)"),
    ([str(CHAIN3), "--format", "docx"], "--format = 'docx' is not allowed; expected one of md"),
    ([str(CHAIN3), "--format", "pdf", "--ranking", "fast"], "--ranking = 'fast' is not allowed; expected one of morris"),
    ([str(CHAIN3), "--pairs", "10"], "--pairs/--time-s = 10 is not allowed; expected only together with --simulate"),
    ([str(CHAIN3), "--simulate", "--pairs", "0"], "--pairs = 0 is not allowed"),
])
def test_bad_input_is_one_line(capsys, argv: list[str], message: str) -> None:
    assert main(["report", *argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0], err


def test_corrupt_store_is_refused_in_one_line(tmp_path: Path, capsys) -> None:
    bad = tmp_path / "sweep.sqlite"
    bad.write_bytes(b"not a database at all" * 50)
    assert main(["report", str(bad)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not a netsim sweep store" in err[0]


def test_store_report_adds_base_scenario_tables_when_found(tmp_path: Path, monkeypatch) -> None:
    # A real (tiny) sweep of the learning scenario, then the report of its store: pivots plus the
    # base scenario's capacity tables and map, found as scenarios/<slug>.toml by content hash.
    monkeypatch.chdir(tmp_path)
    (tmp_path / "scenarios").mkdir()
    (tmp_path / "scenarios" / "chain3.toml").write_text(CHAIN3.read_text())
    assert main(["sweep", "scenarios/chain3.toml", "--vary", "links[*].length_km=8,12",
                 "--pairs", "20", "--workers", "1", "--quiet"]) == 0
    assert main(["report", "results/chain3/sweep.sqlite", "--quiet", "--no-figures"]) == 0
    out = tmp_path / "results" / "chain3" / "report-sweep"  # a run's report would not replace it
    names = {p.name for p in out.iterdir()}
    assert {"links.md", "demands.md", "pivot-rate_per_s-alder-row-lab-cindermoss-campus.md"} <= names
    (tmp_path / "scenarios" / "chain3.toml").write_text(CHAIN3.read_text().replace("= 10.0", "= 11.0", 1))
    data = load_source(tmp_path / "results" / "chain3" / "sweep.sqlite")
    assert data.scenario is None and not data.links          # edited scenario: hash differs


def test_run_json_without_its_scenario_says_so(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    result = engine.run(load(CHAIN3), pairs=20, seed=1, ensembles=False)
    result.write(tmp_path / "elsewhere")
    from netsim.report.build import report_tables

    tables = report_tables(load_source(tmp_path / "elsewhere" / "run.json"))
    assert any("--scenario" in note for note in tables["links"].notes)
    assert tables["demands"].rows[0]["rate_per_s"] == result.to_dict()["demands"][0]["rate_per_s"]


def test_report_frames_for_python_users() -> None:
    from netsim.report import report_frames

    frames = report_frames(CHAIN3)
    assert set(frames) == {"links", "demands"}
    links = frames["links"]
    assert list(links["length_km"]) == [10.0, 12.0]
    assert links.attrs["headers"]["plob_bits_per_s"] == "repeaterless bound (ebit/s)"


def test_report_frames_takes_loaded_data_and_a_run_in_memory() -> None:
    """What load_source returns and a RunResult held in memory give the same frames as files."""
    from netsim.report import report_frames

    data = load_source(CHAIN3)
    assert list(report_frames(data)["links"]["length_km"]) == [10.0, 12.0]
    scenario = load(CHAIN3)
    result = engine.run(scenario, pairs=20, seed=4, ensembles=False)
    frames = report_frames(result, scenario=scenario)
    demands = frames["demands"]
    assert demands["rate_per_s"][0] == result.to_dict()["demands"][0]["rate_per_s"]
    assert demands["expected_rate_per_s"][0] == pytest.approx(data.demands[0]["expected_rate_per_s"])
    assert report_frames(result)["demands"]["rate_per_s"][0] == demands["rate_per_s"][0]
    with pytest.raises(ParameterError, match="source = 'int' is not allowed"):
        report_frames(3)


def test_param_order_and_no_averaging_across_swept_values(tmp_path: Path) -> None:
    from netsim.report.build import report_tables

    data = load_source(_store(tmp_path))
    tables = report_tables(data, params=["sites[*].t2_s"], metrics={"rate_per_s": "rate_ci95"})
    table = tables["pivot-rate_per_s-aldmoor-cinderfold"]
    assert table.columns[0].key == "sites[*].t2_s"          # rows: t2; columns: attenuation
    c0, c1 = (f"rate_per_s at defaults.link.attenuation_db_per_km={v}" for v in (0.2, 0.3))
    assert {(r["sites[*].t2_s"], r[c0], r[c1]) for r in table.rows} == {(0.1, 100.0, 120.0),
                                                                        (1.0, 110.0, 130.0)}
    from netsim.errors import ParameterError

    with pytest.raises(ParameterError, match=r"--param = 'links\[\*\]\.t1_s' is not allowed; expected a swept parameter"):
        report_tables(data, params=["links[*].t1_s"])


def test_any_stored_metric_can_be_pivoted(tmp_path: Path, capsys) -> None:
    from netsim.report.build import report_tables

    data = load_source(_store(tmp_path))
    tables = report_tables(data, metrics={"attempts": None})          # a link metric
    table = tables["pivot-attempts-aldmoor-brackmere"]
    assert table.title.startswith("attempts, link Aldmoor-Brackmere")
    assert {r[f"attempts at sites[*].t2_s={v}"] for r in table.rows for v in (0.1, 1)} == {1000.0}
    assert main(["report", str(_store(tmp_path / "b")), "--metric", "rate", "--no-figures"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--metric = 'rate' is not allowed; expected a stored demand" in err[0]
    assert "did you mean 'rate_per_s'" in err[0]
    assert "attenuation_db_per_km" not in err[0] and "_ci95" not in err[0]  # parameters, bounds: not metrics
