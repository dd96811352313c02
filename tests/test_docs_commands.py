"""The README's commands run: each one, as written, in a fresh directory holding a copy of the
bundled scenarios, through ``python -m netsim`` in a subprocess with this checkout on PYTHONPATH.

test_docs.py checks that every README command parses; here they are executed and must exit 0 with
a sensible output (the tables, files and counts the README says they give). Commands that take
more than about 20 s run under ``-m slow``; every README command is
listed below in exactly one of the two groups, so a new command cannot go unrun unnoticed.
"""

from __future__ import annotations

import json
import os
import shlex
import shutil
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest
from test_docs import _netsim_commands

from netsim.scenario import load

ROOT = Path(__file__).resolve().parent.parent

Check = Callable[[Path, str], None]


def _netsim(cwd: Path, argv: list[str], timeout_s: float = 600.0) -> str:
    """Run one README command; exit 0, no traceback; returns stdout then stderr (notes such as
    "wrote FILE" go to stderr)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), MPLBACKEND="Agg")
    done = subprocess.run([sys.executable, "-m", "netsim", *argv], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=timeout_s, check=False)
    assert done.returncode == 0, (shlex.join(argv), done.stdout[-2000:], done.stderr[-2000:])
    assert "Traceback" not in done.stderr, done.stderr[-2000:]
    return done.stdout + done.stderr


def _workdir(tmp_path: Path) -> Path:
    shutil.copytree(ROOT / "scenarios", tmp_path / "scenarios")
    return tmp_path


def _lines_starting(out: str, *prefixes: str) -> None:
    starts = [line.split()[0] for line in out.splitlines() if line.split()]
    for prefix in prefixes:
        assert prefix in starts, (prefix, out[:2000])


def _check_link(cwd: Path, out: str) -> None:
    assert "Holevo information" in out and "repeaterless bound" in out
    _lines_starting(out, "10", "25", "50")  # one row per requested length


def _check_budget(cwd: Path, out: str) -> None:
    # Markdown tables: a bold title and the alignment row of a pipe table (CommonMark + GFM tables)
    assert "**Vellmoor metro mesh: links**" in out and "|:---|" in out
    demands = out.split("**Vellmoor metro mesh: demands**", 1)[1]
    rows = [[cell.strip() for cell in line.strip().strip("|").split("|")]
            for line in demands.splitlines() if line.startswith("| ")]
    header, body = rows[0], rows[1:]
    rate, fidelity = header.index("expected rate (pairs/s)"), header.index("expected fidelity")
    assert len(body) >= 3
    for row in body:  # a rate is positive; a fidelity to Phi+ lies in [0, 1] (common practice)
        assert float(row[rate]) > 0 and 0.0 <= float(row[fidelity]) <= 1.0, row


def _check_run(cwd: Path, out: str) -> None:
    data = json.loads((cwd / "results" / "chain3" / "run.json").read_text(encoding="utf-8"))
    assert len(data["demands"]) == 1 and (cwd / "results" / "chain3" / "run.csv").is_file()
    assert "Alder Row Lab-Cindermoss Campus   2000" in out  # the 2,000 pairs asked for


def _check_sweep(cwd: Path, out: str) -> None:
    # lin:5:40:8 gives 8 lengths, times 3 values of t2_s: 24 points
    assert "24 of 24 points done, 0 failed" in out
    assert (cwd / "results" / "chain3" / "sweep.sqlite").is_file()


def _check_compare(cwd: Path, out: str) -> None:
    assert "vellmoor-mesh: rate (pairs/s)" in out and "vellmoor-star: rate (pairs/s)" in out
    assert "compared 2 candidates" in out


def _check_import(cwd: Path, out: str) -> None:
    path = cwd / "results" / "examples" / "tarrowby" / "tarrowby.toml"
    scenario = load(path)
    built, candidates = len(scenario.sites), len(scenario.candidate_sites)
    assert f"{built + candidates} sites ({candidates} candidates)" in out, out


def _check_profiles(cwd: Path, out: str) -> None:
    for name in ("nv-diamond-demonstrated", "nv-diamond-projected", "trapped-ion-demonstrated"):
        assert name in out


def _check_profile(cwd: Path, out: str) -> None:
    assert out.startswith("Profile trapped-ion-demonstrated") or "\nProfile trapped-ion-demonstrated" in out
    assert "t2_s" in out and "source" in out


def _check_check(cwd: Path, out: str) -> None:
    assert "valid scenario 'Chain of three'" in out and "sites: 3" in out


#: The README commands run in the default test run: (check of the output).
QUICK: dict[str, Check] = {
    "link --length-km 10 25 50 --depolarizing 0.02 --encoding bb84": _check_link,
    "budget scenarios/vellmoor-mesh.toml --format md": _check_budget,
    "run scenarios/chain3.toml --pairs 2000 --seed 1": _check_run,
    "sweep scenarios/chain3.toml --vary 'links[*].length_km=lin:5:40:8' --vary 'sites[role=repeater].t2_s=0.1,1,10'":
        _check_sweep,
    "compare scenarios/vellmoor-mesh.toml scenarios/vellmoor-star.toml": _check_compare,
    "import scenarios/tarrowby/fibre.geojson --with scenarios/tarrowby/plan.toml --out "
    "results/examples/tarrowby/tarrowby.toml": _check_import,
    "profiles": _check_profiles,
    "profiles trapped-ion-demonstrated": _check_profile,
    "check scenarios/chain3.toml --profiles": _check_check,
}

#: The README commands that take longer, run in order by the slow tests below (each group in one
#: directory, since a report reads the store or design its predecessor wrote).
SLOW_GROUPS: dict[str, list[str]] = {
    "chain3 sweep report": [
        "sweep scenarios/chain3.toml --vary 'links[*].length_km=lin:5:40:8' --vary 'sites[role=repeater].t2_s=0.1,1,10'",
        "report results/chain3/sweep.sqlite --format tex",
    ],
    "chain3 proposal": ["report scenarios/chain3.toml --simulate --format pdf"],
    "sensitivity": ["sensitivity scenarios/vellmoor-mesh.toml --method morris"],
    "tarrowby design": [
        "import scenarios/tarrowby/fibre.geojson --with scenarios/tarrowby/plan.toml --out "
        "results/examples/tarrowby/tarrowby.toml",
        "design results/examples/tarrowby/tarrowby.toml --out results/examples/tarrowby/design",
        "report results/examples/tarrowby/design/design.toml --simulate --no-figures --out "
        "results/examples/tarrowby/report",
    ],
    "vellmoor main job": [
        "sweep scenarios/vellmoor-mesh.toml --quiet",
        "report results/vellmoor-mesh/sweep.sqlite --simulate --pdf",
        "report results/vellmoor-mesh/sweep.sqlite --simulate --pdf --out results/examples/vellmoor-mesh --force --quiet",
    ],
}


def _files(cwd: Path, pattern: str) -> list[Path]:
    return sorted(cwd.glob(pattern))


#: What each slow group must leave behind (beyond exit 0 at every step).
SLOW_CHECKS: dict[str, Callable[[Path, list[str]], None]] = {
    "chain3 sweep report": lambda cwd, outs: (
        _check_sweep(cwd, outs[0]),
        _assert(any("\\begin{" in p.read_text(encoding="utf-8") for p in _files(cwd, "results/chain3/report-sweep/*.tex"))),
    ),
    "chain3 proposal": lambda cwd, outs: _assert_pdf(cwd / "results" / "chain3" / "report-simulation" / "proposal.pdf"),
    "sensitivity": lambda cwd, outs: _assert("which parameter matters most" in outs[0]
                                             and "sites[*].emission_efficiency" in outs[0]),
    "tarrowby design": lambda cwd, outs: (
        _check_import(cwd, outs[0]),
        _assert(load(cwd / "results/examples/tarrowby/design/design.toml") is not None),
        _assert((cwd / "results/examples/tarrowby/report/demand_costs.md").is_file()),
    ),
    "vellmoor main job": lambda cwd, outs: (
        _assert((cwd / "results/vellmoor-mesh/sweep.sqlite").is_file()),
        _assert_pdf(cwd / "results/examples/vellmoor-mesh/proposal.pdf"),
    ),
}


def _assert(condition: bool) -> None:
    assert condition


def _assert_pdf(path: Path) -> None:
    # A PDF file starts with "%PDF-" (ISO 32000-1, 7.5.2)
    assert path.is_file() and path.read_bytes()[:5] == b"%PDF-", path


def test_every_readme_command_is_run_by_a_test() -> None:
    readme = {shlex.join(argv) for argv in _netsim_commands()}
    slow = {command for group in SLOW_GROUPS.values() for command in group}
    listed = set(QUICK) | slow
    assert readme == listed, (sorted(readme - listed), sorted(listed - readme))
    assert SLOW_GROUPS.keys() == SLOW_CHECKS.keys()


@pytest.mark.parametrize("command", list(QUICK), ids=[c[:50] for c in QUICK])
def test_readme_command_runs(command: str, tmp_path: Path) -> None:
    cwd = _workdir(tmp_path)
    out = _netsim(cwd, shlex.split(command))
    QUICK[command](cwd, out)


@pytest.mark.slow
@pytest.mark.timeout(3600)  # the main job on the metro mesh sweeps for several minutes
@pytest.mark.parametrize("group", list(SLOW_GROUPS))
def test_readme_long_commands_run(group: str, tmp_path: Path) -> None:
    cwd = _workdir(tmp_path)
    outs = [_netsim(cwd, shlex.split(command), timeout_s=1800.0) for command in SLOW_GROUPS[group]]
    SLOW_CHECKS[group](cwd, outs)
