"""The shared table renderer: uncertainty-driven figures, CSV round trips, LaTeX structure."""

from __future__ import annotations

import csv
import io
import json
import math

import pytest

from netsim.errors import ParameterError
from netsim.report.latex import check_fragment, compile_fragment, tex_engine
from netsim.report.table import Column, Table, format_number, render, sig_for_interval
from netsim.report.units import mean_ci95, poisson_rate_ci95


def _table() -> Table:
    columns = [Column("link", "link"), Column("length_km", "length (km)", sig=3),
               Column("rate_per_s", "rate (pairs/s)", ci_key="rate_ci95"),
               Column("rate_ci95", "rate 95% CI (pairs/s)", ci_key="rate_ci95"),
               Column("note", "note")]
    rows = [{"link": "Aldmoor-Brackwater", "length_km": 12.5, "rate_per_s": 1234.5678,
             "rate_ci95": [1199.25, 1270.125], "note": "50% duty & spare_1"},
            {"link": "Brackwater-Cindervale", "length_km": 31.0, "rate_per_s": 0.012345678,
             "rate_ci95": [0.0121, 0.0125], "note": None},
            {"link": "Cindervale-Dunmere", "length_km": 7.25, "rate_per_s": 5.5e-7,
             "rate_ci95": None, "note": "#1 {x} ~ ^"}]
    return Table("Links of Greyhaven_test", columns, rows, notes=["a note"])


# Two significant figures on the uncertainty and the value printed to the same decimal place
# (common practice; e.g. the rounding rule of the Particle Data Group, memory).
@pytest.mark.parametrize(("value", "interval", "expected"), [
    (1234.5678, [1199.25, 1270.125], 4),    # half-width 35 -> units -> "1235"
    (0.012345678, [0.0121, 0.0125], 4),     # half-width 2.0e-4 -> 1e-5 place -> "0.01235"
    (98765.0, [90000.0, 107000.0], 3),      # half-width 8500 -> hundreds -> "9.88e4"
    (5.0, None, 4),
    (0.0, [0.0, 1.0], 4),
])
def test_sig_for_interval(value: float, interval: list[float] | None, expected: int) -> None:
    assert sig_for_interval(value, interval) == expected


def test_cells_follow_uncertainty() -> None:
    cells = _table().cells()
    assert cells[0][2:4] == ["1235", "[1199, 1270]"]
    assert cells[1][2:4] == ["0.01235", "[0.01210, 0.01250]"]  # trailing zeros kept
    assert cells[2][2:4] == ["5.5e-7", "-"]
    assert format_number(float("nan")) == "-"


def test_csv_round_trip_keeps_every_number() -> None:
    table = _table()
    reader = csv.reader(io.StringIO(render(table, "csv")))
    header, *rows = list(reader)
    assert header == [c.header for c in table.columns]
    for row, original in zip(rows, table.rows):
        assert row[0] == original["link"]
        assert float(row[1]) == original["length_km"]
        assert float(row[2]) == original["rate_per_s"]
        ci = json.loads(row[3]) if row[3] else None
        assert ci == original["rate_ci95"]


def test_csv_opens_in_pandas() -> None:
    import pandas
    frame = pandas.read_csv(io.StringIO(render(_table(), "csv")))
    assert list(frame["rate (pairs/s)"]) == [1234.5678, 0.012345678, 5.5e-7]


def test_json_records_equal_rows() -> None:
    data = json.loads(render(_table(), "json"))
    assert [r["rate_per_s"] for r in data["rows"]] == [1234.5678, 0.012345678, 5.5e-7]
    assert data["rows"][0]["rate_ci95"] == [1199.25, 1270.125]


def test_markdown_has_one_row_per_record_and_escapes_pipes() -> None:
    table = _table()
    table.rows[0] = {**table.rows[0], "note": "a|b"}
    lines = render(table, "md").splitlines()
    assert lines[2].count(" | ") == len(table.columns) - 1
    assert "a\\|b" in render(table, "md")


def test_latex_fragment_passes_structural_check() -> None:
    text = render(_table(), "tex")
    assert check_fragment(text) == []
    assert r"\toprule" in text and r"50\% duty \& spare\_1" in text


@pytest.mark.parametrize(("mutation", "fragment"), [
    (lambda t: t.replace("\\midrule\n", ""), "once each"),
    (lambda t: t.replace(r"spare\_1", "spare_1"), "unescaped _"),
    (lambda t: t.replace(r"\end{tabular}", ""), "one \\begin{tabular}"),
    (lambda t: t.replace(r"duty \& spare", "duty & spare"), "cells"),
    (lambda t: t.replace(r"\{x\}", "{x"), "brace"),
    (lambda t: t.replace("{lrrll}", "{|lrrll|}"), "vertical rules"),
])
def test_latex_structural_check_catches_broken_fragments(mutation, fragment: str) -> None:
    text = render(_table(), "tex")
    assert "{lrrll}" in text
    problems = check_fragment(mutation(text))
    assert any(fragment in p for p in problems), problems


def test_latex_table_is_a_captioned_labelled_float_fitted_to_the_page() -> None:
    text = render(_table(), "tex")
    lines = text.splitlines()
    assert lines[1] == r"\begin{table}[htbp]" and lines[-1] == r"\end{table}"
    assert r"\caption{Links of Greyhaven\_test}" in text and r"\label{tab:links-of-greyhaven-test}" in text
    assert r"\begin{adjustbox}{max width=\linewidth}" in text
    assert r"\par" in text and "a note" in text  # notes printed under the table


@pytest.mark.parametrize(("mutation", "fragment"), [
    (lambda t: t.replace(r"\caption{Links of Greyhaven\_test}", ""), "caption"),
    (lambda t: t.replace(r"\label{tab:links-of-greyhaven-test}", ""), "label"),
    (lambda t: t.replace(r"\begin{adjustbox}{max width=\linewidth}", "").replace(r"\end{adjustbox}", ""),
     "fitted"),
    (lambda t: t.replace(r"\end{table}", ""), "does not end"),
])
def test_latex_structural_check_wants_the_float(mutation, fragment: str) -> None:
    problems = check_fragment(mutation(render(_table(), "tex")))
    assert any(fragment in p for p in problems), problems


def test_latex_escapes_characters_the_default_font_encoding_prints_wrongly() -> None:
    """Under pdflatex's default OT1 encoding '>' prints as an inverted question mark, '<' as an
    inverted exclamation mark and '|' as an em dash (LaTeX font encodings guide, fntguide;
    memory): a route must be written with text commands."""
    table = Table("Routes", [Column("route", "route")], [{"route": "Alder>Brack|x<y"}])
    text = render(table, "tex")
    assert r"Alder\textgreater{}Brack\textbar{}x\textless{}y" in text
    assert check_fragment(text) == []
    assert any("unescaped" in p for p in check_fragment(text.replace(r"\textgreater{}", ">")))


@pytest.mark.skipif(tex_engine() is None, reason="no pdflatex or latexmk installed")
def test_latex_fragment_compiles() -> None:
    routes = Table("Routes", [Column("route", "route")], [{"route": "Alder > Brack | x < y"}])
    result = compile_fragment([render(_table(), "tex"), render(routes, "tex")])
    assert result is not None and result[0], result


def test_unknown_format_is_one_line_error() -> None:
    with pytest.raises(ParameterError, match=r"--format = 'xls' is not allowed; expected one of"):
        render(_table(), "xls")


def test_poisson_interval_matches_published_values() -> None:
    # Exact Poisson 95 % limits for a count of 0: [0, 3.689]; for 10: [4.795, 18.39]
    # (Garwood, Biometrika 28, 437, 1936; tabulated values, memory).
    low, high = poisson_rate_ci95(0, 1.0)
    assert low == 0.0 and high == pytest.approx(3.689, abs=1e-3)
    low, high = poisson_rate_ci95(10, 2.0)
    assert low == pytest.approx(4.795 / 2, abs=1e-3) and high == pytest.approx(18.39 / 2, abs=1e-2)


def test_mean_interval_uses_student_t() -> None:
    # t_{0.975, 4} = 2.776 (standard t table, e.g. NIST/SEMATECH e-Handbook, memory).
    values = [1.0, 2.0, 3.0, 4.0, 5.0]
    mean, _low, high = mean_ci95(values)
    assert mean == 3.0
    assert high - mean == pytest.approx(2.776 * math.sqrt(2.5) / math.sqrt(5), rel=1e-3)
    assert math.isnan(mean_ci95([1.0])[1])
