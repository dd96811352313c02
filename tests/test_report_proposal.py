"""The proposal document: one PDF, opened again with pypdfium2 (a reference PDF reader, the
library behind Chromium's viewer) to check its sections, that every demand appears, that the
summary holds on page one and that nothing is printed beyond the page."""

from __future__ import annotations

from pathlib import Path

import pypdfium2 as pdfium
import pytest

from netsim import __version__
from netsim.cli import main
from netsim.report.proposal import Provenance, column_groups, summary, write_proposal
from netsim.report.sources import ReportData
from netsim.table import Column, Table

#: 1 mm in PDF points (72 pt per inch, 25.4 mm per inch; ISO 32000 user space units).
MM = 72 / 25.4

# Invented sites; the names carry characters Typst and LaTeX treat specially.
SCENARIO = """
[network]
name = "Quillon & Marsh #2 test net"
purpose = "Two labs and a clinic of the town of Quillon share one relay (a test of $pecial_chars*)."

[defaults.site]
t2_s = 1.0
emission_efficiency = 0.2

[[sites]]
name = "Quillon Lab <North>"
role = "user"
x_km = 0.0
y_km = 0.0

[[sites]]
name = "Marsh Relay"
role = "repeater"
memory_slots = 4
x_km = 8.0
y_km = 1.0

[[sites]]
name = "Tarn Clinic [East]"
role = "user"
x_km = 15.0
y_km = 0.0

[[sites]]
name = "Osier Works"
role = "user"
x_km = 8.0
y_km = 9.0

[[links]]
ends = ["Quillon Lab <North>", "Marsh Relay"]
length_km = 10.0

[[links]]
ends = ["Marsh Relay", "Tarn Clinic [East]"]
length_km = 9.0

[[links]]
ends = ["Marsh Relay", "Osier Works"]
length_km = 11.0

[[demands]]
users = ["Quillon Lab <North>", "Tarn Clinic [East]"]
min_fidelity = 0.6

[[demands]]
users = ["Osier Works", "Tarn Clinic [East]"]
min_fidelity = 0.99
"""

DEMANDS = ("Quillon Lab <North>-Tarn Clinic [East]", "Osier Works-Tarn Clinic [East]")
SECTIONS = ("Summary", "Assumptions", "Tables", "Figures", "Which parameter matters most",
            "Method notes", "Cautions", "Provenance")


def _pages(path: Path) -> list[tuple[str, list[tuple[float, float, float, float]], float, float]]:
    """Per page: its text, the boxes of its characters and its size (points)."""
    pdf = pdfium.PdfDocument(str(path))
    pages = []
    for i in range(len(pdf)):
        page = pdf[i]
        text = page.get_textpage()
        boxes = [text.get_charbox(k) for k in range(text.count_chars())]
        pages.append((text.get_text_range(), boxes, page.get_width(), page.get_height()))
    return pages


def _flat(text: str) -> str:
    return " ".join(text.replace("\r", " ").replace("\n", " ").split())


@pytest.fixture(scope="module")
def document(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("proposal")
    path = root / "quillon.toml"
    path.write_text(SCENARIO)
    assert main(["report", str(path), "--format", "pdf", "--out", str(root / "out"), "--quiet"]) == 0
    return root / "out" / "proposal.pdf"


def test_the_pdf_has_every_section_in_order(document: Path) -> None:
    text = _flat(" ".join(p[0] for p in _pages(document)))
    at = [text.find(f"{n}. {s}") for n, s in enumerate(SECTIONS, start=1)]
    assert all(a >= 0 for a in at) and at == sorted(at), dict(zip(SECTIONS, at))
    assert "Quillon & Marsh #2 test net" in text
    assert "(a test of $pecial_chars*)" in text                     # the purpose, verbatim
    assert f"netsim {__version__}" in text and "seed 0" in text and "--format pdf" in text
    assert "IEC 60825-1" in text and "IEC 60825-2" in text          # the README cautions


def test_the_summary_is_page_one_and_names_every_demand_met_or_missed(document: Path) -> None:
    first = _flat(_pages(document)[0][0])
    for name in DEMANDS:
        assert name in first, name
    # min_fidelity 0.99 cannot be met by a swapped chain with these emitters; 0.6 is met.
    assert "1 of 2 demands met" in first
    assert "missed" in first and "fidelity below 0.99" in first
    assert "Bottleneck links" in first
    assert "2. Assumptions" not in first


def test_every_demand_appears_in_the_tables_and_figures_are_numbered(document: Path) -> None:
    text = _flat(" ".join(p[0] for p in _pages(document)))
    for name in DEMANDS:
        assert text.count(name) >= 3, name        # summary, demand table, sensitivity ranking
    assert "Figure 1:" in text and "Figure 2:" in text
    assert "Closed forms at the scenario's values" in text


def test_no_character_lies_outside_the_page(document: Path) -> None:
    """Every glyph at least 5 mm inside the paper edge: no table runs off the page."""
    for n, (_text, boxes, width, height) in enumerate(_pages(document)):
        assert boxes
        for left, bottom, right, top in boxes:
            assert left >= 5 * MM and right <= width - 5 * MM, (n, left, right, width)
            assert bottom >= 5 * MM and top <= height - 5 * MM, (n, bottom, top, height)


def test_a_table_far_wider_than_the_page_is_split_into_column_groups(tmp_path: Path) -> None:
    columns = [Column("name", "name")] + [Column(f"c{i}", f"quantity number {i} (pairs/s)") for i in range(40)]
    rows = [{"name": f"Row {r} of Quillon", **{f"c{i}": 123456.789 * (i + 1) * (r + 1) for i in range(40)}}
            for r in range(5)]
    wide = Table("A very wide table", columns, rows)
    groups = column_groups(wide)
    assert len(groups) >= 3 and all(g[0] == 0 for g in groups)
    assert sorted({i for g in groups for i in g}) == list(range(41))        # no column lost
    data = ReportData("scenario", "quillon", "Quillon wide test")
    path = write_proposal(tmp_path / "wide.pdf", data, {"wide": wide}, {},
                          Provenance("netsim report wide.toml --format pdf", "wide.toml", None, __version__))
    pages = _pages(path)
    text = _flat(" ".join(p[0] for p in pages))
    assert f"(columns 1 of {len(groups)})" in text and "quantity number 39" in text
    for _text, boxes, width, height in pages:
        assert all(5 * MM <= b[0] and b[2] <= width - 5 * MM for b in boxes)


def test_verdict_fields_decide_met_and_missed_when_present() -> None:
    """Tables from other work may carry meets_fidelity / meets_rate; they take precedence."""
    columns = [Column("demand", "demand"), Column("expected_rate_per_s", "rate"),
               Column("expected_fidelity", "fidelity"), Column("meets_rate", "meets rate")]
    rows = [{"demand": "A-B", "expected_rate_per_s": 5.0, "expected_fidelity": 0.95, "meets_rate": False,
             "meets_fidelity": True},
            {"demand": "C-D", "expected_rate_per_s": 50.0, "expected_fidelity": 0.55},
            {"demand": "E-F", "expected_rate_per_s": 9.0, "expected_fidelity": 0.99}]
    data = ReportData("scenario", "t", "t", demands=[{"demand": "A-B", "min_fidelity": 0.9},
                                                     {"demand": "C-D", "min_fidelity": 0.6}])
    found = summary(data, {"demands": Table("d", columns, rows)})
    verdicts = {d["demand"]: (d["met"], d["why"]) for d in found["demands"]}
    assert verdicts == {"A-B": (False, "misses rate"), "C-D": (False, "fidelity below 0.6"),
                        "E-F": (None, "requirement not known (scenario not found)")}  # never "met" by default


def test_pdf_beside_the_tables_reuses_the_saved_figures(tmp_path: Path) -> None:
    """--pdf writes the tables and figures as before plus proposal.pdf, whose figures are the
    PNG files just written (not drawn a second time); --ranking none leaves the ranking out."""
    path = tmp_path / "quillon.toml"
    path.write_text(SCENARIO)
    out = tmp_path / "out"
    assert main(["report", str(path), "--pdf", "--ranking", "none", "--out", str(out), "--quiet"]) == 0
    names = {p.name for p in out.iterdir()}
    assert {"links.md", "demands.md", "network-map.png", "rate-vs-distance.png", "proposal.pdf"} <= names
    text = _flat(" ".join(p[0] for p in _pages(out / "proposal.pdf")))
    assert "Figure 2:" in text and "Which parameter matters most" not in text
