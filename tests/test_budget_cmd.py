"""``netsim budget``: tables in every format, options and one-line errors."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest

from netsim.cli import main

SCENARIOS = Path(__file__).resolve().parent.parent / "scenarios"
CHAIN = SCENARIOS / "chain3.toml"


def test_table_output_has_units_in_headers(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), "--wide"]) == 0
    out = capsys.readouterr().out
    for header in ("length (km)", "total loss (dB)", "pair rate (pairs/s)", "repeaterless bound (ebit/s)",
                   "Holevo information (bit/qubit)", "multipath bound (ebit/s)"):
        assert header in out
    assert "Alder Row Lab > Brackwater Relay > Cindermoss Campus" in out


def test_csv_rows_match_the_scenario(capsys: pytest.CaptureFixture[str]) -> None:
    """chain3: 10 km at 0.25 dB/km + 1 dB = 3.5 dB (common practice: dB add)."""
    assert main(["budget", str(CHAIN), "--format", "csv", "--only", "links"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert len(rows) == 2
    assert float(rows[0]["total loss (dB)"]) == pytest.approx(3.5)


def test_markdown_output(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), "--format", "md", "--only", "demands"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("**Chain of three: demands**")
    assert "| demand | route |" in out


def test_json_output(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert set(data) == {"scenario", "links", "demands", "warnings"}
    assert data["links"][0]["loss_db"] == pytest.approx(3.5)


def test_routing_override(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(SCENARIOS / "vellmoor-mesh.toml"), "--format", "json", "--only", "demands",
                 "--routing", "fewest_hops"]) == 0
    assert json.loads(capsys.readouterr().out)["demands"]


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (["--format", "xlsx"], "--format = 'xlsx' is not allowed; expected one of table, csv, md, tex, json"),
        (["--routing", "shortest"], "--routing = 'shortest' is not allowed; expected one of least_loss"),
    ],
)
def test_bad_options_exit_2_with_one_line(argv: list[str], fragment: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["budget", str(CHAIN), *argv]) == 2
    err = capsys.readouterr().err
    assert fragment in err and len(err.strip().splitlines()) == 1
