"""``netsim link``: the single-span table against closed forms, its formats and its errors."""

from __future__ import annotations

import csv
import io
import json
import math
import subprocess
import sys

import pytest

from netsim.cli import main
from netsim.qinfo.entropy import binary_entropy


def _h(x: float) -> float:
    return float(binary_entropy(x))


def _json_rows(capsys: pytest.CaptureFixture[str], *argv: str) -> list[dict[str, float]]:
    assert main(["link", *argv, "--format", "json"]) == 0
    return json.loads(capsys.readouterr().out)["rows"]


def test_damping_span_matches_closed_forms(capsys: pytest.CaptureFixture[str]) -> None:
    rows = _json_rows(capsys, "--length-km", "10", "50", "--attenuation-db-per-km", "0.2", "--extra-loss-db", "1",
                      "--loss-model", "damping")
    for row, length in zip(rows, (10, 50)):
        loss = 0.2 * length + 1.0
        eta = 10 ** (-loss / 10)
        assert row["loss_db"] == pytest.approx(loss, rel=1e-12)
        assert row["transmissivity"] == pytest.approx(eta, rel=1e-12)
        # Pirandola, Laurenza, Ottaviani & Banchi, Nat. Commun. 8, 15043 (2017)
        assert row["plob_bits_per_use"] == pytest.approx(-math.log2(1 - eta), rel=1e-12)
        # {|0>, |1>} through amplitude damping: chi = h(eta/2) - h(eta)/2 (definition of chi,
        # Holevo 1973, with the damping map of Nielsen & Chuang 2010, Eq. 8.108)
        assert row["holevo_bits"] == pytest.approx(_h(eta / 2) - _h(eta) / 2, abs=1e-12)
        # Bell pair through damping: from the sender's end h(eta/2) - h((1 - eta)/2) (Giovannetti
        # & Fazio, PRA 71, 032314, 2005, coherent information at p = 1/2); from the receiver's end
        # 1 - h((1 - eta)/2), the reverse coherent information (Garcia-Patron, Pirandola, Lloyd &
        # Shapiro, PRL 102, 210501, 2009 (memory)); the larger is reported
        forward, reverse = _h(eta / 2) - _h((1 - eta) / 2), 1 - _h((1 - eta) / 2)
        assert row["coherent_info_ebits"] == pytest.approx(max(0.0, forward, reverse), abs=1e-12)
        assert row["holevo_bits"] <= row["capacity_bits"] + 1e-9 <= 1.0 + 1e-9


def test_capacity_column_matches_giovannetti_fazio(capsys: pytest.CaptureFixture[str]) -> None:
    # 0.2 dB/km x 11.09 km -> eta about 0.6; product-state capacity of amplitude damping
    # (Giovannetti & Fazio 2005), maximised here on a fine grid in the excited population p.
    row = _json_rows(capsys, "--length-km", "11.09", "--loss-model", "damping")[0]
    eta = row["transmissivity"]
    grid = [i / 20000 for i in range(20001)]
    best = max(_h(eta * p) - _h((1 + math.sqrt((1 - 2 * eta * p) ** 2 + 4 * eta * p * (1 - p))) / 2) for p in grid)
    assert row["capacity_bits"] == pytest.approx(best, abs=1e-6)


def test_erasure_span_matches_bennett_divincenzo_smolin(capsys: pytest.CaptureFixture[str]) -> None:
    # Erasure eps = 1 - eta: C = 1 - eps, Q = max(0, 1 - 2 eps) (Bennett, DiVincenzo & Smolin, PRL 78, 3217, 1997).
    rows = _json_rows(capsys, "--length-km", "5", "20", "--loss-model", "erasure", "--encoding", "bb84")
    for row in rows:
        eps = 1 - row["transmissivity"]
        assert row["capacity_bits"] == pytest.approx(1 - eps, abs=1e-6)
        assert row["coherent_info_ebits"] == pytest.approx(max(0.0, 1 - 2 * eps), abs=1e-12)
        # BB84 states average to I/2, so chi equals the capacity here (common practice)
        assert row["holevo_bits"] == pytest.approx(1 - eps, abs=1e-12)


def test_depolarizing_alone_gives_king_capacity(capsys: pytest.CaptureFixture[str]) -> None:
    # Zero length: only the depolarizing p remains; C = 1 - h(p/2) (King, IEEE Trans. Inf. Theory 49, 221, 2003).
    row = _json_rows(capsys, "--length-km", "0", "--depolarizing", "0.1")[0]
    assert row["capacity_bits"] == pytest.approx(1 - _h(0.05), abs=1e-6)
    assert row["plob_bits_per_use"] is None  # infinite at eta = 1; JSON has no infinity


def test_csv_has_one_row_per_length(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["link", "--length-km", "3", "7", "--format", "csv"]) == 0
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out)))
    assert rows[0][:3] == ["length (km)", "loss (dB)", "eta"]
    # 0.2 dB/km (default): 3 km -> 0.6 dB, 7 km -> 1.4 dB
    assert [(float(r[0]), round(float(r[1]), 12)) for r in rows[1:]] == [(3.0, 0.6), (7.0, 1.4)]


@pytest.mark.parametrize("fmt", ["table", "md", "tex"])
def test_text_formats_list_each_length(capsys: pytest.CaptureFixture[str], fmt: str) -> None:
    assert main(["link", "--length-km", "3", "7", "--format", fmt]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert any("length (km)" in line and "repeaterless bound (ebit/use)" in line for line in lines)
    assert sum(1 for line in lines if "0.6" in line and "0.871" in line) == 1  # 3 km: eta = 10^-0.06
    assert sum(1 for line in lines if "1.4" in line and "0.7244" in line) == 1  # 7 km: eta = 10^-0.14


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["--length-km", "-1"], "netsim link: error: --length-km = -1 is not allowed; expected a finite number >= 0"),
        (["--length-km", "inf"], "netsim link: error: --length-km = inf is not allowed; expected a finite number >= 0"),
        (["--length-km", "5", "--attenuation-db-per-km", "-0.2"],
         "netsim link: error: --attenuation-db-per-km = -0.2 is not allowed; expected a finite number >= 0"),
        (["--length-km", "5", "--extra-loss-db", "nan"],
         "netsim link: error: --extra-loss-db = nan is not allowed; expected a finite number >= 0"),
        (["--length-km", "5", "--depolarizing", "1.5"],
         "netsim link: error: --depolarizing = 1.5 is not allowed; expected a number in [0, 1]"),
        (["--length-km", "5", "--encoding", "qam"],
         "netsim link: error: --encoding = 'qam' is not allowed; expected one of binary, bb84"),
        (["--length-km", "5", "--loss-model", "lossy"],
         "netsim link: error: --loss-model = 'lossy' is not allowed; expected one of damping, erasure"),
        (["--length-km", "5", "--format", "xml"],
         "netsim link: error: --format = 'xml' is not allowed; expected one of table, csv, md, tex, json"),
    ],
)
def test_bad_flags_give_one_line_and_exit_2(capsys: pytest.CaptureFixture[str], argv: list[str], message: str) -> None:
    assert main(["link", *argv]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err == message + "\n"


def test_unparsable_number_is_a_one_line_error(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(["link", "--length-km", "ten"])
    assert info.value.code == 2
    err = capsys.readouterr().err
    assert err == "netsim link: error: --length-km = 'ten' is not allowed; expected a number\n"


def test_module_entry_point_exits_2_without_traceback() -> None:
    proc = subprocess.run([sys.executable, "-m", "netsim", "link", "--length-km", "-5"],
                          capture_output=True, text=True, timeout=60, check=False)
    assert proc.returncode == 2
    assert proc.stderr.strip().splitlines() == ["netsim link: error: --length-km = -5 is not allowed; expected a finite number >= 0"]
    assert "Traceback" not in proc.stderr
