"""Running sweeps: nothing lost after SIGKILL, Ctrl-C, failures, time-outs and dying workers;
identical numbers whichever executor or worker count.

These tests check the sweep machinery, not physics, with the cheap deterministic stand-in
:class:`netsim.sweep.synthetic.SyntheticPoint`. The reference for every comparison is outside the
code under test: each point evaluated directly, in this process, with its own seed
(``execute(function, task)``), or an uninterrupted run. Dying on SIGKILL and keeping only
committed transactions is SQLite's documented behaviour (sqlite.org/atomiccommit.html;
reference library documentation).
"""

from __future__ import annotations

import io
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from test_sweep_support import metric_map, point_map, write_scenario

from netsim.errors import ParameterError, StoreError
from netsim.scenario import load
from netsim.sweep.executors import DaskPool, LocalPool, make_executor
from netsim.sweep.plan import SweepPlan, make_plan
from netsim.sweep.runner import run_sweep, tasks_for
from netsim.sweep.store import open_store
from netsim.sweep.synthetic import SyntheticPoint
from netsim.sweep.worker import execute

SWEEP = ('[sweep]\nrepeats = 2\nseed = 5\n[sweep.vary]\n'
         '"links[*].length_km" = "lin:2:30:15"\n')          # 15 x 2 = 30 points

ROOT = Path(__file__).resolve().parents[1]

RUN_SCRIPT = """
import sys
from netsim.scenario import load
from netsim.sweep.executors import LocalPool
from netsim.sweep.plan import make_plan
from netsim.sweep.runner import run_sweep
from netsim.sweep.synthetic import SyntheticPoint

if __name__ == "__main__":
    plan = make_plan(load(sys.argv[1]))
    run_sweep(plan, LocalPool(SyntheticPoint(sleep_s=float(sys.argv[3])), 2), store_path=sys.argv[2], quiet=True)
"""

CLI_SCRIPT = """
import sys
import netsim.sweep.worker
from netsim.sweep.synthetic import SyntheticPoint
from netsim.cli import main

if __name__ == "__main__":
    netsim.sweep.worker.engine_point = SyntheticPoint(sleep_s=0.15)
    sys.exit(main(["sweep", sys.argv[1], "--store", sys.argv[2], "--workers", "2", "--quiet"]))
"""


def _reference(plan: SweepPlan, function: SyntheticPoint | None = None) -> dict[tuple[str, str, str, str], object]:
    """Every point evaluated directly in this process: the outside reference."""
    function = function or SyntheticPoint()
    out: dict[tuple[str, str, str, str], object] = {}
    for task in tasks_for(plan, plan.points, None):
        record = execute(function, task)
        assert record.status == "done"
        out.update({(task.point_id, k, n, m): v for k, n, m, v in record.metrics})
    return out


@pytest.fixture()
def plan(tmp_path: Path) -> SweepPlan:
    return make_plan(load(write_scenario(tmp_path, SWEEP)))


def _assert_complete(store: Path, plan: SweepPlan, reference: dict) -> None:
    points = point_map(store)
    assert set(points) == {p.point_id for p in plan.points}
    assert {p["status"] for p in points.values()} == {"done"}
    assert {p["attempts"] for p in points.values()} == {1}      # none recorded twice
    assert metric_map(store) == reference                        # number for number


def test_one_and_two_workers_match_the_direct_evaluation(plan: SweepPlan, tmp_path: Path) -> None:
    reference = _reference(plan)
    for workers in (1, 2):
        store = tmp_path / f"w{workers}.sqlite"
        summary = run_sweep(plan, LocalPool(SyntheticPoint(), workers), store_path=store, quiet=True,
                            stream=io.StringIO())
        assert (summary.done, summary.failed, summary.ran) == (30, 0, 30)
        _assert_complete(store, plan, reference)
    again = run_sweep(plan, LocalPool(SyntheticPoint(), 2), store_path=tmp_path / "w2.sqlite", quiet=True,
                      stream=io.StringIO())
    assert again.ran == 0 and again.done == 30                  # finished points are skipped


def test_dask_local_cluster_matches(plan: SweepPlan, tmp_path: Path) -> None:
    import distributed  # noqa: F401  (the `cluster` extra; also in the `test` extra)
    store = tmp_path / "dask.sqlite"
    summary = run_sweep(plan, DaskPool(SyntheticPoint(), "local:2"), store_path=store, quiet=True,
                        stream=io.StringIO())
    assert summary.done == 30
    _assert_complete(store, plan, _reference(plan))


def test_dask_scheduler_address_and_a_dying_dask_worker(plan: SweepPlan, tmp_path: Path) -> None:
    import distributed
    store, marker = tmp_path / "dask-address.sqlite", tmp_path / "died"
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None, silence_logs=40) as cluster:
        function = SyntheticPoint(die_once_marker=str(marker))
        summary = run_sweep(plan, DaskPool(function, cluster.scheduler_address), store_path=store,
                            quiet=True, stream=io.StringIO())
    assert marker.exists()                                        # a Dask worker died mid-point
    assert (summary.done, summary.failed) == (30, 0)
    _assert_complete(store, plan, _reference(plan))


def test_progress_bar_counts_points_and_failures(plan: SweepPlan, tmp_path: Path) -> None:
    stream = io.StringIO()
    run_sweep(plan, LocalPool(SyntheticPoint(fail_at_length_km=10.0), 2), store_path=tmp_path / "s.sqlite",
              stream=stream)
    text = stream.getvalue()
    assert "30/30" in text and "failed=2" in text
    assert text.count("RuntimeError: synthetic failure at length_km = 10") == 2


def test_missing_dask_is_a_clear_error(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(ParameterError, match=r"--cluster = '\(Dask not installed\)' is not allowed; "
                                             r"expected the 'cluster' extra"):
        make_executor(SyntheticPoint(), cluster="local:2")


def test_bad_cluster_and_workers() -> None:
    import distributed  # noqa: F401  (the `cluster` extra; also in the `test` extra)
    with pytest.raises(ParameterError, match=r"--cluster = 'local:zero' is not allowed; expected local:N"):
        make_executor(SyntheticPoint(), cluster="local:zero")
    with pytest.raises(ParameterError, match=r"--workers = 0 is not allowed; expected an integer >= 1"):
        make_executor(SyntheticPoint(), workers=0)


def test_failures_are_recorded_and_retried(plan: SweepPlan, tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    store = tmp_path / "s.sqlite"
    failing = SyntheticPoint(fail_at_length_km=10.0)
    summary = run_sweep(plan, LocalPool(failing, 2), store_path=store, quiet=True)
    assert (summary.done, summary.failed) == (28, 2)
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 30 and sum(" failed " in line for line in lines) == 2
    failed = open_store(store).points(status="failed")
    assert {p["parameters"]["links[*].length_km"] for p in failed} == {10.0}
    assert all(p["error"].startswith("RuntimeError: synthetic failure at length_km = 10") for p in failed)
    assert run_sweep(plan, LocalPool(failing, 2), store_path=store, quiet=True).ran == 0
    retried = run_sweep(plan, LocalPool(SyntheticPoint(), 2), store_path=store, retry_failed=True, quiet=True)
    assert (retried.ran, retried.done, retried.failed) == (2, 30, 0)
    assert metric_map(store) == _reference(plan)
    assert sorted(p["attempts"] for p in point_map(store).values())[-2:] == [2, 2]


def test_point_timeout_fails_the_point_and_the_sweep_goes_on(plan: SweepPlan, tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    summary = run_sweep(plan, LocalPool(SyntheticPoint(hang_at_length_km=4.0), 2), store_path=store,
                        point_timeout_s=0.3, quiet=True, stream=io.StringIO())
    assert (summary.done, summary.failed) == (28, 2)
    failed = open_store(store).points(status="failed")
    assert all(p["error"] == "PointTimeout: the point ran longer than --point-timeout-s 0.3" for p in failed)
    assert all(0.3 <= p["duration_s"] < 5.0 for p in failed)


def test_point_blocked_outside_python_is_stopped_by_the_pool(plan: SweepPlan, tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    summary = run_sweep(plan, LocalPool(SyntheticPoint(block_at_length_km=4.0), 2), store_path=store,
                        point_timeout_s=0.3, quiet=True, stream=io.StringIO())
    assert (summary.done, summary.failed) == (28, 2)
    failed = open_store(store).points(status="failed")
    assert {p["parameters"]["links[*].length_km"] for p in failed} == {4.0}
    assert all(p["error"].endswith("did not respond; its worker was stopped") for p in failed)
    reference = _reference(plan)
    done = {k: v for k, v in reference.items() if point_map(store)[k[0]]["status"] == "done"}
    assert metric_map(store) == done


def test_a_dying_worker_loses_nothing(plan: SweepPlan, tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    marker = tmp_path / "died"
    summary = run_sweep(plan, LocalPool(SyntheticPoint(die_once_marker=str(marker)), 2), store_path=store,
                        quiet=True, stream=io.StringIO())
    assert marker.exists()                                        # a worker did die mid-point
    assert (summary.done, summary.failed) == (30, 0)
    _assert_complete(store, plan, _reference(plan))


def test_a_point_that_always_kills_its_worker_fails_alone(plan: SweepPlan, tmp_path: Path) -> None:
    store = tmp_path / "s.sqlite"
    summary = run_sweep(plan, LocalPool(SyntheticPoint(die_at_length_km=6.0), 2), store_path=store,
                        quiet=True, stream=io.StringIO())
    assert (summary.done, summary.failed) == (28, 2)
    points = point_map(store)
    failed = [p for p in points.values() if p["status"] == "failed"]
    assert {p["parameters"]["links[*].length_km"] for p in failed} == {6.0}
    assert all(p["error"] == "WorkerDied: the worker process died 3 times while running this point" for p in failed)
    reference = _reference(plan)
    assert metric_map(store) == {k: v for k, v in reference.items() if points[k[0]]["status"] == "done"}


def _start(script: str, *args: str) -> subprocess.Popen[bytes]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.Popen([sys.executable, "-c", script, *args], cwd=ROOT, env=env, start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def _done_count(store: Path) -> int:
    try:
        with open_store(store) as s:
            return s.counts()["done"]
    except StoreError:        # not created yet, or tables not yet written
        return 0


def _wait_for(store: Path, done: int, process: subprocess.Popen[bytes], limit_s: float = 60.0) -> None:
    end = time.monotonic() + limit_s
    while _done_count(store) < done and process.poll() is None:
        if time.monotonic() > end:
            pytest.fail(f"no progress to {done} points within {limit_s} s")
        time.sleep(0.005)


def test_sigkill_at_random_moments_then_resume(plan: SweepPlan, tmp_path: Path) -> None:
    scenario, store = Path(str(plan.scenario.source)), tmp_path / "killed.sqlite"
    rng = np.random.default_rng(20261202)
    early = float(rng.uniform(0.05, 0.6))                 # during start-up or registration
    targets = sorted(rng.choice(np.arange(2, 28), size=4, replace=False))
    seen = []
    for round_, target in enumerate([None, *targets]):
        process = _start(RUN_SCRIPT, str(scenario), str(store), "0.04")
        if target is None:
            time.sleep(early)
        else:
            _wait_for(store, int(target), process)
            time.sleep(float(rng.uniform(0.0, 0.05)))       # land anywhere, also inside a commit
        os.killpg(process.pid, signal.SIGKILL)
        process.wait(timeout=30)
        seen.append(_done_count(store))
    print("done after each kill:", seen)
    assert any(0 < n < 30 for n in seen), seen            # at least one kill hit a sweep in progress
    final = _start(RUN_SCRIPT, str(scenario), str(store), "0.0")
    _, err = final.communicate(timeout=120)
    assert final.returncode == 0, err.decode()
    _assert_complete(store, plan, _reference(plan))


def _group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    return True


def test_killed_coordinator_leaves_no_working_orphans(plan: SweepPlan, tmp_path: Path) -> None:
    scenario, store = Path(str(plan.scenario.source)), tmp_path / "orphans.sqlite"
    process = _start(RUN_SCRIPT, str(scenario), str(store), "0.3")
    _wait_for(store, 2, process)
    os.kill(process.pid, signal.SIGKILL)                  # the coordinator only, not its workers
    process.wait(timeout=30)
    end = time.monotonic() + 15.0
    while _group_alive(process.pid) and time.monotonic() < end:
        time.sleep(0.1)
    alive = _group_alive(process.pid)
    if alive:
        os.killpg(process.pid, signal.SIGKILL)
    assert not alive, "workers kept running after their coordinator was killed"


def test_ctrl_c_stops_cleanly_and_the_sweep_resumes(plan: SweepPlan, tmp_path: Path) -> None:
    scenario, store = Path(str(plan.scenario.source)), tmp_path / "interrupted.sqlite"
    process = _start(CLI_SCRIPT, str(scenario), str(store))
    _wait_for(store, 3, process)
    os.killpg(process.pid, signal.SIGINT)                 # as a terminal's Ctrl-C does
    _, err = process.communicate(timeout=30)
    text = err.decode()
    assert process.returncode == 130, text
    assert "interrupted; results written so far are kept" in text and "Traceback" not in text
    done = open_store(store).counts()["done"]
    assert 3 <= done < 30
    reference = _reference(plan)
    partial = metric_map(store)
    assert partial == {k: v for k, v in reference.items() if k in partial}   # whole points only
    assert len({k[0] for k in partial}) == done
    run_sweep(plan, LocalPool(SyntheticPoint(), 2), store_path=store, quiet=True, stream=io.StringIO())
    _assert_complete(store, plan, reference)


def _cli(scenario: Path, *options: str):
    from netsim.cli import build_parser

    return build_parser().parse_args(["sweep", str(scenario), "--quiet", *options])


def test_cli_exit_codes_retry_failed_and_cluster(plan: SweepPlan, tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    from netsim.cli.sweep_cmd import run_command

    scenario, store = Path(str(plan.scenario.source)), tmp_path / "cli.sqlite"
    args = _cli(scenario, "--store", str(store), "--workers", "2")
    assert run_command(args, point_function=SyntheticPoint(fail_at_length_km=10.0)) == 1
    last = capsys.readouterr().out.splitlines()[-1]
    assert last.startswith("28 of 30 points done, 2 failed, 0 pending (30 run now in")
    assert last.endswith("rerun with --retry-failed to run the failed points again")
    assert run_command(_cli(scenario, "--store", str(store), "--retry-failed"), point_function=SyntheticPoint()) == 0
    assert "30 of 30 points done, 0 failed, 0 pending (2 run now" in capsys.readouterr().out
    assert metric_map(store) == _reference(plan)
    dask_store = tmp_path / "cli-dask.sqlite"
    assert run_command(_cli(scenario, "--store", str(dask_store), "--cluster", "local:1"),
                       point_function=SyntheticPoint()) == 0
    assert metric_map(dask_store) == metric_map(store)
