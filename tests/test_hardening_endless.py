"""Runs that never end on inputs ``check`` accepted: each reported input as a regression test.

Reported (bundled chain, cut-off 0.5 s): ``attempt_prep_time_s = 0.5`` or ``2.0`` at the
repeater, ``bsm_success_probability = 1e-9``, ``emission_efficiency = 5e-324``: ``run --pairs 1``
did not finish and ``check`` printed no warning for some. Each command must now finish within
a minute: exit 2 with one line naming the key, its value and the limit, or complete.

Expected values come from elementary probability: the number of rounds to the first success
of a Bernoulli(q) trial is geometric with mean 1/q, and the chance of at least one success in k
rounds is 1 - (1 - q)^k (Feller, An Introduction to Probability Theory, vol. 1, ch. XIII,
(memory)); a two-hop chain whose Bell measurement succeeds with probability p needs 1/p swap
tries on average, two link pairs each (the same geometric law).
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[1]
CHAIN3 = (ROOT / "scenarios" / "chain3.toml").read_text(encoding="utf-8")
_REPEATER = "memory_slots = 4              # a repeater"


def _variant(tmp_path: Path, name: str, *lines: str) -> Path:
    assert _REPEATER in CHAIN3
    path = tmp_path / f"{name}.toml"
    path.write_text(CHAIN3.replace(_REPEATER, "\n".join(lines) + "\n" + _REPEATER), encoding="utf-8")
    return path


def _netsim(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "netsim", *args], capture_output=True, text=True, cwd=cwd,
                          env=env, timeout=60, check=False)


def _one_line(done: subprocess.CompletedProcess[str]) -> str:
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2, done.stderr[-1500:]
    assert len(lines) == 1 and "Traceback" not in done.stderr, done.stderr[-1500:]
    return lines[0]


@pytest.mark.parametrize("prep", ["0.5", "2.0"])
@pytest.mark.parametrize("command", [["check"], ["budget"], ["run", "--pairs", "1"]])
def test_preparation_time_beyond_the_cutoff_is_an_error(tmp_path: Path, prep: str, command: list[str]) -> None:
    # the hop's attempt period is the preparation time plus the light's round trip, so its pair is
    # usable only > prep seconds after its round starts: never within a 0.5 s cut-off
    path = _variant(tmp_path, "prep", f"attempt_prep_time_s = {prep}")
    line = _one_line(_netsim(command[0], str(path), *command[1:], cwd=tmp_path))
    assert f"sites[1].attempt_prep_time_s: {float(prep):g} is not allowed" in line
    assert "cutoff_s = 0.5" in line


def test_hops_taking_turns_longer_than_the_cutoff_is_an_error(tmp_path: Path) -> None:
    # each hop is usable 0.3 s after its round starts; at the repeater's one communication qubit
    # the second starts only once the first is in memory: 0.6 s > 0.5 s cut-off
    path = _variant(tmp_path, "turns", "attempt_prep_time_s = 0.3")
    line = _one_line(_netsim("run", str(path), "--pairs", "1", cwd=tmp_path))
    assert "sites[1].communication_qubits: 1 is not allowed" in line and "cutoff_s = 0.5" in line


def test_two_communication_qubits_make_the_same_hops_deliverable(tmp_path: Path) -> None:
    # the remedy the message names works: hops in parallel, each usable 0.3 s < 0.5 s after its round
    path = _variant(tmp_path, "parallel", "attempt_prep_time_s = 0.3", "communication_qubits = 2")
    out = tmp_path / "out"
    done = _netsim("run", str(path), "--pairs", "1", "--out", str(out), "--format", "csv", cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-1500:]
    assert (out / "run.json").is_file()


def test_failing_bell_measurement_is_refused_by_its_range(tmp_path: Path) -> None:
    # a Bell measurement succeeding once in 1e9 tries: refused by the key's range (at least 0.01),
    # in one line, by every command, before any work
    path = _variant(tmp_path, "bsm", "bsm_success_probability = 1e-9")
    for command in (["run", "--pairs", "1"], ["check", "--no-scan"]):
        line = _one_line(_netsim(command[0], str(path), *command[1:], cwd=tmp_path))
        assert "sites[1].bsm_success_probability" in line and "1e-09" in line


def _dark(tmp_path: Path) -> Path:
    # emission 5e-324 at every site and almost no dark counts: a hop heralds about once in 1e12
    # rounds, and both hops must herald within the 0.5 s cut-off of each other: the run would take
    # ~1e10 link pairs
    text = CHAIN3.replace("memory_slots = 2              # qubits",
                          "emission_efficiency = 5e-324\nmemory_slots = 2              # qubits")
    text = text.replace("midpoint_fraction = 0.5", "dark_count_probability = 1e-12\nmidpoint_fraction = 0.5")
    assert text.count("5e-324") == 1 and text.count("1e-12") == 1
    path = tmp_path / "dark.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_endless_run_is_warned_by_check(tmp_path: Path) -> None:
    checked = _netsim("check", str(_dark(tmp_path)), "--no-scan", cwd=tmp_path)
    assert checked.returncode == 0, checked.stderr
    assert "warnings: none" not in checked.stdout
    assert "link pairs" in checked.stdout and "refuses it" in checked.stdout


def test_sweep_with_an_endless_point_is_refused_before_it_starts(tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    done = _netsim("sweep", str(_dark(tmp_path)), "--vary", "links[0].length_km=10,20", "--pairs", "5",
                   "--store", str(store), cwd=tmp_path)
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2 and "Traceback" not in done.stderr, done.stderr[-1500:]
    # one line per refused point, as for every scenario problem
    assert len(lines) == 2 and [("sweep point 0" in lines[0]), ("sweep point 1" in lines[1])] == [True, True]
    assert all("--max-link-pairs" in line for line in lines)
    assert not store.exists()  # nothing ran


def test_sweep_with_an_out_of_range_point_is_refused_before_it_starts(tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    line = _one_line(_netsim("sweep", str(ROOT / "scenarios" / "chain3.toml"), "--vary",
                             "sites[1].bsm_success_probability=1,1e-9", "--pairs", "5", "--store", str(store),
                             cwd=tmp_path))
    assert "sweep point 1" in line and "bsm_success_probability" in line
    assert not store.exists()  # nothing ran


def test_subnormal_emission_efficiency_finishes(tmp_path: Path) -> None:
    # dark counts still herald (fidelity far below the requirement): the run must end either way
    path = _variant(tmp_path, "emission", "emission_efficiency = 5e-324")
    out = tmp_path / "out"
    done = _netsim("run", str(path), "--pairs", "1", "--out", str(out), "--format", "csv", cwd=tmp_path)
    assert done.returncode in (0, 2), done.stderr[-1500:]
    if done.returncode == 2:
        _one_line(done)
    else:
        assert (out / "run.json").is_file()


def test_raising_the_limit_lets_a_refused_run_go(tmp_path: Path) -> None:
    # about 200 pairs x 3 link pairs on the bundled chain: refused at a limit of 100, run at 1e4
    path = ROOT / "scenarios" / "chain3.toml"
    line = _one_line(_netsim("run", str(path), "--pairs", "200", "--max-link-pairs", "100", "--out",
                             str(tmp_path / "a"), cwd=tmp_path))
    assert "above the limit of 100 link pairs" in line
    done = _netsim("run", str(path), "--pairs", "200", "--max-link-pairs", "1e4", "--out", str(tmp_path / "b"),
                   "--format", "csv", cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-1500:]
    bad = _one_line(_netsim("run", str(path), "--max-link-pairs", "0", cwd=tmp_path))
    assert "--max-link-pairs" in bad and "'0'" in bad


def test_engine_guard_stops_a_run_beyond_its_bound() -> None:
    from netsim.engine.api import chains_from_scenario
    from netsim.engine.des import DesOptions, simulate_des
    from netsim.engine.metrics import StopRule
    from netsim.engine.workload import RunLimitError
    from netsim.scenario import load

    scenario = load(ROOT / "scenarios" / "chain3.toml")
    chains = chains_from_scenario(scenario)
    seen: list[int] = []
    options = DesOptions(cutoff_s=scenario.protocol.cutoff_s, max_link_pairs=10_000, progress=seen.append)
    with pytest.raises(RunLimitError, match="stopped after heralding 12288 link pairs"):
        simulate_des(chains, StopRule(pairs=10**9), [np.random.default_rng(1)], options)
    assert sum(seen) == 12288  # progress told every 4096 pairs


def test_route_work_one_hop_is_the_geometric_mean() -> None:
    from netsim.network.workload import route_work

    for q in (0.3, 1e-9, 5e-324):
        work = route_work([q], [1e-4], [2e-4], [], None)
        # E[K] T = T / q (geometric mean), in logs: finite even where T / q overflows a float
        assert work.log_seconds == pytest.approx(math.log(1e-4) - math.log(q), rel=1e-12)
        assert work.log_link_pairs == 0.0
    assert route_work([5e-324], [1e-4], [2e-4], [], None).seconds == math.inf


def test_route_work_two_hops_with_a_failing_swap() -> None:
    from netsim.network.workload import route_work

    for p in (0.5, 1e-9, 5e-324):
        work = route_work([0.01, 0.02], [1e-4, 1e-4], [2e-4, 2e-4], [p], None)
        assert work.link_pairs == pytest.approx(2.0 / p, rel=1e-9) if 2.0 / p < math.inf else work.link_pairs == math.inf
        assert math.isfinite(work.log_link_pairs)


def test_route_work_with_a_cutoff_counts_tries() -> None:
    from netsim.network.workload import route_work

    q, period, ready, cutoff = 0.001, 1e-3, 2e-4, 0.1002
    work = route_work([q, q], [period, period], [ready, ready], [1.0], cutoff)
    # the other hop has (c - ready) / T = 100 rounds: a try succeeds with 1 - (1 - q)^100
    tries = 1.0 / (1.0 - (1.0 - q) ** 100)
    assert work.link_pairs == pytest.approx(2.0 * tries, rel=1e-9)
    # a try lasts until some hop has a pair (rate 2 q / T) plus the cut-off window
    assert work.seconds == pytest.approx(tries * (period / (2 * q) + cutoff), rel=1e-9)
    # a subnormal success probability: finite logs, first-order tail k q
    tiny = route_work([5e-324, 5e-324], [period, period], [ready, ready], [1.0], cutoff)
    assert tiny.log_link_pairs == pytest.approx(math.log(2.0) - math.log(100.0) - math.log(5e-324), rel=1e-9)


def test_design_check_by_simulation_obeys_the_limit(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from test_design_milp import PRICES, ring

    from netsim.cli import main
    from netsim.design.tomlout import dumps

    src = tmp_path / "ring.toml"
    src.write_text(dumps(ring((40.0, 20.0), PRICES[0]).data), encoding="utf-8")
    # 200 pairs per demand need at least 200 link pairs: refused at a limit of 10, in one line
    assert main(["design", str(src), "--out", str(tmp_path / "o"), "--pairs", "200", "--max-link-pairs", "10"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "above the limit of 10 link pairs" in err[0]


def test_sensitivity_simulation_obeys_the_limit(tmp_path: Path) -> None:
    line = _one_line(_netsim("sensitivity", str(ROOT / "scenarios" / "chain3.toml"), "--simulate", "50",
                             "--samples", "2", "--max-link-pairs", "10", "--out", str(tmp_path / "s"), cwd=tmp_path))
    assert "above the limit of 10 link pairs" in line


def test_command_line_default_is_the_engine_default() -> None:
    from netsim.cli.run_cmd import DEFAULT_LIMIT
    from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS

    assert DEFAULT_LIMIT == DEFAULT_MAX_LINK_PAIRS


_PROBABILITY = st.one_of(st.sampled_from([5e-324, 1e-310, 1e-300, 1e-9, 1.0]), st.floats(5e-324, 1.0))
_TIME = st.one_of(st.sampled_from([5e-324, 1e-300, 1e300]), st.floats(1e-9, 1e3))


@settings(max_examples=300, deadline=None)
@given(q=st.lists(_PROBABILITY, min_size=1, max_size=5), period=_TIME, ready=_TIME,
       swap=_PROBABILITY, cutoff=st.one_of(st.none(), _TIME), shared=st.booleans(), rounds=st.integers(0, 3))
def test_route_work_never_fails_at_the_extremes(q: list[float], period: float, ready: float, swap: float,
                                                 cutoff: float | None, shared: bool, rounds: int) -> None:
    """Fuzz over the ranges' extremes (subnormal, huge, boundary): never an exception or NaN, and
    never fewer link pairs than the hops need (one per hop, doubled per purification round)."""
    from netsim.network.workload import route_work

    n = len(q)
    work = route_work(q, [period] * n, [ready] * n, [swap] * (n - 1), cutoff, [shared] * (n - 1), rounds)
    assert not math.isnan(work.log_link_pairs) and not math.isnan(work.log_seconds)
    assert work.log_link_pairs >= math.log(n) + rounds * math.log(2.0) - 1e-9
    if cutoff is not None and n > 1 and ready >= cutoff:
        assert work.log_link_pairs == math.inf  # no pair is ever usable before its cut-off


def test_subnormal_emission_without_dark_counts_is_refused(tmp_path: Path) -> None:
    # refused in one line before it starts (it ran without end before)
    path = _dark(tmp_path)
    line = _one_line(_netsim("run", str(path), "--pairs", "1", cwd=tmp_path))
    assert "demands[0]" in line and "above the limit of 1e+06 link pairs" in line
