"""Sweep benchmarks (discovered by tests/benchmarks/run.py through ``BENCHMARKS``).

``sweep_parallel_efficiency``: 16 equal CPU-bound points (the synthetic point function burning
0.25 s of CPU each) run by the local process pool with 1 and then 2 workers, each a whole
``run_sweep`` into a fresh store (pool start-up and store writes included). Efficiency =
T(1 worker) / (2 x T(2 workers)); target >= 0.85. ``baseline`` names the 1-worker run and its
time, ``ratio`` is the speed-up T(1) / T(2). Each time is the best of :data:`REPEATS` runs; other load
on the machine (the cores are shared) still lowers the figure.

``sweep_parallel_efficiency_waiting``: the same with points that wait 0.25 s instead of
computing, so it measures the executor's own overhead (start-up, hand-off, store commits)
independent of how busy the cores are.
"""

from __future__ import annotations

import io
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from netsim.scenario import load_data
from netsim.sweep.executors import LocalPool
from netsim.sweep.plan import SweepPlan, make_plan
from netsim.sweep.runner import run_sweep
from netsim.sweep.synthetic import SyntheticPoint

POINTS = 16
BUSY_S = 0.25
TARGET = 0.85
REPEATS = 3

#: An invented two-site link in the fictional town of Quillhaven (benchmark data only).
_SCENARIO = {
    "network": {"name": "Quillhaven benchmark link"},
    "sites": [{"name": "Quillhaven North", "role": "user"}, {"name": "Quillhaven Docks", "role": "user"}],
    "links": [{"ends": ["Quillhaven North", "Quillhaven Docks"], "length_km": 8.0}],
}


def _plan() -> SweepPlan:
    return make_plan(load_data(_SCENARIO), [f"links[*].length_km=lin:5:20:{POINTS}"])


def _timed_run(plan: SweepPlan, function: SyntheticPoint, workers: int, directory: Path) -> float:
    store = directory / f"w{workers}-{time.monotonic_ns()}.sqlite"
    clock = time.perf_counter()
    summary = run_sweep(plan, LocalPool(function, workers), store_path=store, quiet=True, stream=io.StringIO())
    elapsed = time.perf_counter() - clock
    if summary.done != POINTS:
        raise RuntimeError(f"benchmark sweep finished {summary.done} of {POINTS} points")
    return elapsed


def _efficiency(name: str, function: SyntheticPoint, repeats: int) -> dict[str, Any]:
    plan = _plan()
    with tempfile.TemporaryDirectory() as tmp:
        one = min(_timed_run(plan, function, 1, Path(tmp)) for _ in range(repeats))
        two = min(_timed_run(plan, function, 2, Path(tmp)) for _ in range(repeats))
    return {"name": name, "value": one / (2.0 * two), "unit": "", "target": TARGET, "higher_is_better": True,
            "baseline": f"the same sweep on 1 worker: {one:.2f} s (2 workers: {two:.2f} s)", "ratio": one / two}


def sweep_parallel_efficiency() -> list[dict[str, Any]]:
    """2 workers against 1 on 16 equal CPU-bound points, and on 16 equal waiting points."""
    return [_efficiency("sweep_parallel_efficiency", SyntheticPoint(busy_s=BUSY_S), REPEATS),
            _efficiency("sweep_parallel_efficiency_waiting", SyntheticPoint(sleep_s=BUSY_S), 1)]


BENCHMARKS: list[Callable[[], list[dict[str, Any]]]] = [sweep_parallel_efficiency]


if __name__ == "__main__":
    for record in sweep_parallel_efficiency():
        print(record)
