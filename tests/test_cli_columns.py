"""Printed tables fit a terminal: compact default columns, ``--wide``, ``--columns``, wrapped notes.

An aligned text table is read in a terminal of 80 to 200 columns (common practice); the budget of
the bundled Vellmoor mesh printed in full is over 300 characters wide. These tests pin the compact
default of the text format, the options that bring every column back, and that the files and the
machine-readable formats keep every column.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pytest

from netsim.cli import main
from netsim.report.table import NOTE_WIDTH, Column, Table, render

SCENARIOS = Path(__file__).resolve().parent.parent / "scenarios"
MESH = SCENARIOS / "vellmoor-mesh.toml"
CHAIN = SCENARIOS / "chain3.toml"
TERMINAL = 200


def _table_lines(out: str) -> list[str]:
    """Header, rule and body lines of printed text tables (notes excluded: they start with text)."""
    return [line for line in out.splitlines() if "  " in line.rstrip() and not line.startswith("  ")]


def test_budget_text_fits_a_terminal_and_says_how_to_see_more(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(MESH)]) == 0
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= TERMINAL
    assert "pair rate (pairs/s)" in out and "fidelity" in out and "multipath bound (ebit/s)" in out
    assert "Holevo capacity (bit/use)" not in out
    assert "--wide prints all 20" in out and "--wide prints all 19" in out


def test_budget_wide_prints_every_column(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(MESH), "--wide"]) == 0
    out = capsys.readouterr().out
    assert "Holevo capacity (bit/use)" in out and "all hops ready (s)" in out
    assert "columns shown" not in out
    assert max(len(line) for line in _table_lines(out)) > TERMINAL


def test_budget_csv_keeps_every_column_by_default(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(MESH), "--format", "csv", "--only", "links"]) == 0
    header = next(csv.reader(io.StringIO(capsys.readouterr().out)))
    assert len(header) == 20 and "Holevo capacity (bit/use)" in header


def test_budget_columns_chooses_by_key(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), "--format", "csv", "--columns", "fidelity,holevo_bits"]) == 0
    out = capsys.readouterr().out
    header = next(csv.reader(io.StringIO(out)))
    assert header == ["link", "fidelity", "Holevo information (bit/qubit)"]
    assert "demand" not in out  # the demands table holds neither key: it is left out


@pytest.mark.parametrize(("argv", "fragments"), [
    (["--columns", "fidelty"], ["--columns = 'fidelty' is not allowed", "pair_rate_per_s", "route"]),
    (["--columns", "fidelity", "--format", "json"], ["--columns = 'fidelity'", "--format table, csv, md or tex"]),
    (["--columns", ","], ["--columns = ','", "comma-separated column keys"]),
])
def test_budget_bad_columns_is_one_line(argv: list[str], fragments: list[str],
                                        capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), *argv]) == 2
    captured = capsys.readouterr()
    err = captured.err.strip().splitlines()
    assert len(err) == 1 and captured.out == "" and "Traceback" not in captured.err
    for fragment in fragments:
        assert fragment in err[0]


def test_run_text_is_compact_and_wide_restores(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    argv = ["run", str(MESH), "--pairs", "30", "--out", str(tmp_path)]
    assert main(argv) == 0
    compact = capsys.readouterr().out
    assert max(len(line) for line in compact.splitlines()) <= TERMINAL
    assert "rate 95% CI (pairs/s)" in compact and "Holevo information, simulated (bit/qubit)" not in compact
    assert main([*argv, "--wide", "--force"]) == 0                    # replaces the earlier run
    assert "Holevo information, simulated (bit/qubit)" in capsys.readouterr().out
    header = next(csv.reader((tmp_path / "run.csv").open()))
    assert any("chi" in h for h in header)  # the file keeps every field


def test_report_summary_is_compact_files_are_complete(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", str(MESH), "--no-figures", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= TERMINAL
    assert "wrote 2 files to" in out and str(tmp_path / "demands.md") in out
    assert "--columns" not in out  # report offers --wide only
    text = (tmp_path / "demands.md").read_text()
    assert "expected rate, analytic (pairs/s)" in text and "route" in text


def test_unsimulated_demand_table_says_how_to_fill_it(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", str(CHAIN), "--no-figures", "--out", str(tmp_path)]) == 0
    assert "--simulate" in capsys.readouterr().out
    assert "--simulate" in (tmp_path / "demands.md").read_text()
    assert main(["report", str(CHAIN), "--no-figures", "--simulate", "--pairs", "20",
                 "--out", str(tmp_path / "sim")]) == 0
    assert "Not simulated" not in (tmp_path / "sim" / "demands.md").read_text()


def test_text_notes_are_wrapped_rows_are_not() -> None:
    long_name = "Marrowgate North Exchange-Pellinwick Science Park East Annex " * 2
    note = "A note on the bounds " * 20
    table = Table("t", [Column("link", "link"), Column("x", "x (1/s)")], [{"link": long_name, "x": 1.5}], [note])
    lines = render(table, "table").splitlines()
    assert any(long_name.strip() in line for line in lines)
    note_lines = lines[4:]
    assert len(note_lines) > 1 and all(len(line) <= NOTE_WIDTH for line in note_lines)
    assert " ".join(line.strip() for line in note_lines) == note.strip()
    assert render(table, "md").count(note.strip()) == 1  # other formats keep the note whole


def test_run_table_prints_intervals_to_their_precision() -> None:
    """A fidelity known to +-3e-5 is printed to six places, not rounded to its own interval's end."""
    from netsim.engine.result import DEMAND_COLUMNS

    table = Table("demands", DEMAND_COLUMNS, [{"demand": "A-B", "fidelity_mean": 0.914972,
                                               "fidelity_ci95": [0.914943, 0.915001]}])
    text = render(table, "table")
    assert "0.914972" in text and "[0.914943, 0.915001]" in text


def test_latex_types_powers_of_ten_and_keeps_the_notes() -> None:
    """'3.59e4' in a typeset proposal reads as code; the fragment writes 3.59 x 10^4 in text mode
    (no $ or ^, so the structural check still holds) and prints the table's notes below it."""
    from netsim.report.latex import check_fragment, compile_fragment, tex_engine

    table = Table("Bounds of Marrowgate", [Column("link", "link"), Column("b", "bound (ebit/s)"),
                                           Column("ci", "95% CI")],
                  [{"link": "Marrowgate-Pell 2e5 Annex", "b": 35900.0, "ci": [1.2e-5, 3e4]}],
                  ["Bounds after a cited source (100% of them)."])
    text = render(table, "tex")
    assert r"3.59\ensuremath{\times}10\textsuperscript{4}" in text
    assert r"[1.2\ensuremath{\times}10\textsuperscript{\ensuremath{-}5}, 3\ensuremath{\times}10\textsuperscript{4}]" in text
    assert "Marrowgate-Pell 2e5 Annex" in text  # names are text, not numbers
    assert r"Bounds after a cited source (100\% of them).\par" in text
    assert check_fragment(text) == []
    if tex_engine() is not None:
        ok, log = compile_fragment([text])
        assert ok, log[-500:]
