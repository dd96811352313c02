"""Damaged run files given to `netsim report`: refused in one line, never a traceback.

Reproduces the hardening report (`report r.json` holding `{"demands": 5}` gave a `TypeError`)
and grows it into a fuzz-style check: every key the report reads, given a value of the wrong
type or out of its range, is refused naming its key path; truncated, non-UTF-8, non-object,
deeply nested and oversized files and NaN anywhere are refused too; and random damage never
makes the command exit other than 0 or 2, or print a traceback.

Outside references: RFC 8259 (The JavaScript Object Notation Data Interchange Format, 2017):
JSON text exchanged between systems is UTF-8 (section 8.1) and has no NaN or Infinity
(section 6); fidelities and shares are probabilities in [0, 1] and rates are non-negative
(common practice); exit code 2 for a usage error (common practice).
"""

from __future__ import annotations

import copy
import json
import math
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from netsim.cli import main
from netsim.engine import run as simulate
from netsim.errors import ParameterError
from netsim.report import runfile
from netsim.report.runfile import DEMAND_KEYS, LINK_KEYS, check_run, read_run_file
from netsim.scenario import load

ROOT = Path(__file__).resolve().parents[1]
CHAIN3 = ROOT / "scenarios" / "chain3.toml"


@pytest.fixture(scope="module")
def good_run() -> dict[str, Any]:
    """A run result as `netsim run` writes it (chain3, a few pairs)."""
    return json.loads(json.dumps(simulate(load(CHAIN3), pairs=5, seed=1).to_dict()))


def _report(tmp_path: Path, text: str | bytes, capsys: pytest.CaptureFixture[str]) -> tuple[int, list[str]]:
    source = tmp_path / "r.json"
    if isinstance(text, bytes):
        source.write_bytes(text)
    else:
        source.write_text(text, encoding="utf-8")
    code = main(["report", str(source), "--no-figures", "--quiet", "--force", "--out", str(tmp_path / "rep")])
    err = capsys.readouterr().err.strip().splitlines()
    return code, err


def _refused(code: int, err: list[str], *fragments: str) -> None:
    assert code == 2, err
    assert len(err) == 1 and "Traceback" not in err[0], err
    for fragment in fragments:
        assert fragment in err[0], err[0]


def test_reported_reproducer_demands_is_a_number(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, err = _report(tmp_path, '{"demands": 5}', capsys)
    _refused(code, err, "demands = 5 is not allowed", "list of demand rows")


def test_reported_reproducer_as_a_process(tmp_path: Path) -> None:
    source = tmp_path / "r.json"
    source.write_text('{"demands": 5}', encoding="utf-8")
    proc = subprocess.run([sys.executable, "-m", "netsim", "report", str(source), "--out", str(tmp_path / "o")],
                          capture_output=True, text=True, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1, proc.stderr


def test_a_run_written_by_netsim_run_passes(good_run: dict[str, Any], tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    assert check_run(copy.deepcopy(good_run)) == good_run
    code, err = _report(tmp_path, json.dumps(good_run), capsys)
    assert code == 0, err


@pytest.mark.parametrize(("text", "fragment"), [
    ('{"demands": [', "JSON syntax error"),                      # truncated
    ('[1, 2, 3]', "a JSON object with 'demands'"),               # not an object
    ('"demands"', "a JSON object with 'demands'"),
    ('{}', "demands = '(missing)'"),                             # required
    ('{"demands": {"A-B": 3}}', "demands.A-B = 3"),
    ('{"demands": [{"rate_per_s": 1.0}]}', "demands[0].demand = '(missing)'"),
    ('{"demands": [], "seed": -1}', "seed = -1"),
    ('{"demands": [], "seed": true}', "seed = True"),
    ('{"demands": [], "stop": {"pairs": 0}}', "stop.pairs = 0"),
    ('{"demands": [], "stop": [1]}', "stop = [1]"),
    ('{"demands": [], "scenario": 7}', "scenario = 7"),
    ('{"demands": [{"demand": "A-B"}], "links": "x"}', "links = 'x'"),
    ('{"demands": [{"demand": "A-B"}], "links": [{"link": "A-B", "attempts": 3, "successes": 5}]}', "links[0].successes = 5"),
    ('{"demands": [{"demand": "A-B", "fidelity_mean": NaN}]}', "demands[0].fidelity_mean = nan"),
    ('{"demands": [{"demand": "A-B", "rate_ci95": [0, Infinity]}]}', "demands[0].rate_ci95[1] = inf"),
    ('{"demands": [{"demand": "A-B", "rate_per_s": 1e999}]}', "demands[0].rate_per_s = inf"),
    ('{"demands": [], "x": ' + "9" * 5000 + "}", "digits"),
    ('{"demands": ' + "[" * 5000 + "]" * 5000 + "}", "nested at most"),
])
def test_malformed_files(text: str, fragment: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, err = _report(tmp_path, text, capsys)
    _refused(code, err, fragment)


def test_not_utf8(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    text = b'{"demands": [{"demand": "A\xff-B"}]}'
    code, err = _report(tmp_path, text, capsys)
    _refused(code, err, "UTF-8", f"byte {text.index(0xFF)} is not")


def test_huge_file(tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(runfile, "MAX_RUN_FILE_BYTES", 1024)
    code, err = _report(tmp_path, json.dumps({"demands": [], "notes": ["x" * 2000]}), capsys)
    _refused(code, err, "at most 0 MiB")


BAD = {  # a value of the wrong kind for each kind of check
    "number": ["fast", True, [1.0], {"v": 1}, -1.0],
    "unit": [1.5, -0.1, "0.9"],
    "count": [2.5, -3, "4", False],
    "text": [5, ["x"], {"n": 1}],
    "flag": ["yes", 1],
    "interval": [[1.0], "0-1", [1.0, "x"], 3.0],
}


def _kind(check: Any) -> str:
    return {id(runfile.NONNEG): "number", id(runfile.POSITIVE): "number", id(runfile.NUMBER): "number",
            id(runfile.UNIT): "unit", id(runfile.COUNT): "count", id(runfile.TEXT): "text", id(runfile.FLAG): "flag",
            id(runfile.INTERVAL): "interval"}.get(id(check), "")


@pytest.mark.parametrize("entity,keys", [("demands", DEMAND_KEYS), ("links", LINK_KEYS)])
def test_every_read_key_is_checked(entity: str, keys: dict[str, Any], good_run: dict[str, Any]) -> None:
    """Each key the report reads, damaged in each way, is refused naming its path."""
    tried = 0
    for key, check in keys.items():
        kind = _kind(check)
        if not kind or check is runfile.NUMBER:  # any finite number is allowed there
            continue
        for bad in BAD[kind]:
            run = copy.deepcopy(good_run)
            run[entity][0][key] = bad
            with pytest.raises(ParameterError, match=rf"{entity}\[0\]\.{key} = "):
                check_run(run, "r.json")
            tried += 1
    assert tried > 40


JSON_VALUES = st.recursive(st.none() | st.booleans() | st.integers(-10**6, 10**6)
                           | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=8),
                           lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner, max_size=3),
                           max_leaves=6)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(where=st.sampled_from(["top", "demand", "link", "site"]), key=st.sampled_from(
    sorted({*DEMAND_KEYS, *LINK_KEYS, "scenario", "stop", "seed", "notes", "demands", "links", "sites"})),
    value=JSON_VALUES)
def test_random_damage_never_gives_a_traceback(where: str, key: str, value: Any, good_run: dict[str, Any],
                                               tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    run = copy.deepcopy(good_run)
    target = run if where == "top" else run[where + "s"][0]
    target[key] = value
    code, err = _report(tmp_path, json.dumps(run), capsys)
    assert code in (0, 2), err
    assert not any("Traceback" in line for line in err)
    if code == 2:
        assert len(err) == 1, err
    if isinstance(value, float) and not math.isfinite(value):
        assert code == 2  # RFC 8259 has no NaN or Infinity


def test_read_run_file_rejects_a_directory(tmp_path: Path) -> None:
    with pytest.raises(ParameterError, match="a readable file"):
        read_run_file(tmp_path)


@pytest.mark.parametrize("text,shown", [
    ('{"demands": {}}', "demands = {} is not allowed; expected at least one demand row"),
    ('{"demands": []}', "demands = [] is not allowed; expected at least one demand row"),
    ('{"demands": [{"demand": "A-B"}], "sites": null}', "sites = None is not allowed; expected a list of site rows"),
    ('{"demands": [{"demand": "A-B"}], "links": null}', "links = None is not allowed; expected a list of link rows"),
])
def test_empty_or_null_tables_are_refused(tmp_path: Path, text: str, shown: str,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    # found by the fuzz campaign: netsim run always writes its demands, links and sites as lists
    # (common practice: a result file is checked as strictly as its writer's contract)
    path = tmp_path / "r.json"
    path.write_text(text, encoding="utf-8")
    code = main(["report", str(path), "--no-figures", "--out", str(tmp_path / "rep")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and shown in err[0], err
