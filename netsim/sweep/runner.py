"""Run a sweep plan into its store: skip finished points, record each outcome as it arrives."""

from __future__ import annotations

import json
import sys
import time
from collections.abc import Generator, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TextIO

from netsim import __version__
from netsim.scenario.loader import content_hash
from netsim.sweep.executors import DaskPool, LocalPool
from netsim.sweep.plan import SweepPlan, describe_parameters
from netsim.sweep.spec import Point
from netsim.sweep.store import PointRecord, SweepStore, create_or_resume
from netsim.sweep.worker import PointTask, utc_now

__all__ = [
    "SweepSummary",
    "calibrate",
    "default_store_path",
    "describe_point",
    "estimate_s",
    "run_sweep",
    "scenario_hash",
    "store_meta",
    "summary_line",
    "tasks_for",
]


@dataclass(frozen=True)
class SweepSummary:
    """Counts after a sweep: points in the sweep, run now, done and failed in the store."""

    store: Path
    total: int
    ran: int
    done: int
    failed: int
    pending: int
    elapsed_s: float


def default_store_path(plan: SweepPlan) -> Path:
    """``results/<scenario slug>/sweep.sqlite`` (relative to the working directory)."""
    return Path("results") / plan.scenario.slug / "sweep.sqlite"


def scenario_hash(plan: SweepPlan) -> str:
    """Content hash of the base scenario without its ``[sweep]`` table (the spec has its own)."""
    return content_hash({k: v for k, v in plan.scenario.data.items() if k != "sweep"})


def store_meta(plan: SweepPlan) -> dict[str, str]:
    """The meta entries a new store records for this plan."""
    return {"scenario_hash": scenario_hash(plan), "scenario_name": plan.scenario.name,
            "spec_hash": plan.spec.hash, "spec": json.dumps(plan.spec.canonical(), sort_keys=True),
            "created_utc": utc_now(), "netsim_version": __version__, "base_routes": _base_routes(plan)}


def _base_routes(plan: SweepPlan) -> str:
    from netsim.sweep.routes import base_routes

    return base_routes(plan)


def tasks_for(plan: SweepPlan, points: Sequence[Point], timeout_s: float | None) -> Iterator[PointTask]:
    """Point tasks, made lazily (each holds a deep copy of the scenario data)."""
    for point in points:
        yield PointTask(point.point_id, point.ordinal, point.seed, plan.data_for(point),
                        plan.scenario.source, dict(plan.spec.stop), timeout_s)


class _Progress:
    """A tqdm bar (done of total, failures, elapsed, ETA; failed points also get a line above it)
    or, when quiet, one line per finished point."""

    def __init__(self, total: int, done: int, failed: int, quiet: bool, stream: TextIO) -> None:
        self.total, self.finished, self.failed = total, done + failed, failed
        self.quiet, self.stream, self.bar = quiet, stream, None
        if not quiet:
            from tqdm import tqdm

            self.bar = tqdm(total=total, initial=self.finished, unit="pt", file=stream,
                            dynamic_ncols=True, desc="sweep")
            self.bar.set_postfix(failed=failed, refresh=False)

    def update(self, point: Point, record: PointRecord) -> None:
        self.finished += 1
        self.failed += record.status == "failed"
        detail = record.error if record.status == "failed" else f"{record.duration_s or 0.0:.2f} s"
        line = (f"point {self.finished}/{self.total} {record.status} #{point.ordinal} "
                f"{describe_parameters(point.parameters)} repeat={point.repeat} seed={point.seed}: {detail}")
        if self.bar is None:
            print(line, file=self.stream, flush=True)
            return
        if record.status == "failed":
            self.bar.write(line, file=self.stream)   # failures stay visible above the bar
        self.bar.set_postfix(failed=self.failed, refresh=False)
        self.bar.update(1)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _selected(plan: SweepPlan, store: SweepStore, retry_failed: bool) -> list[Point]:
    wanted = "failed" if retry_failed else "pending"
    ids = {row["point_id"] for row in store.points(status=wanted)}
    return [p for p in plan.points if p.point_id in ids]


def run_sweep(plan: SweepPlan, executor: LocalPool | DaskPool, *, store_path: str | Path | None = None,
              retry_failed: bool = False, point_timeout_s: float | None = None, quiet: bool = False,
              stream: TextIO | None = None) -> SweepSummary:
    """Run the plan's unfinished points (or only its failed ones) and commit each as it ends.

    Points already ``done`` are skipped. Each outcome is committed in one transaction as soon
    as it arrives, so an interruption at any moment (Ctrl-C, SIGKILL) loses at most the points
    in flight, which run again on the next call. ``KeyboardInterrupt`` propagates after the
    executor has stopped.
    """
    path = Path(store_path) if store_path is not None else default_store_path(plan)
    stream = stream if stream is not None else (sys.stdout if quiet else sys.stderr)
    clock = time.perf_counter()
    with create_or_resume(path, store_meta(plan)) as store:
        store.register((p.point_id, p.ordinal, json.dumps(dict(p.parameters), sort_keys=True), p.repeat, p.seed)
                       for p in plan.points)
        todo = _selected(plan, store, retry_failed)
        counts = store.counts()
        by_id = {p.point_id: p for p in todo}
        failed_before = counts["failed"] - (len(todo) if retry_failed else 0)
        progress = _Progress(len(plan.points), counts["done"], failed_before, quiet, stream)
        records = executor.run(tasks_for(plan, todo, point_timeout_s)) if todo else iter_nothing()
        try:
            for record in records:
                store.record(record)
                progress.update(by_id[record.point_id], record)
        finally:
            records.close()  # stops the workers now, also on Ctrl-C
            progress.close()
        counts = store.counts()
    return SweepSummary(path, len(plan.points), len(todo), counts["done"], counts["failed"],
                        counts["pending"], time.perf_counter() - clock)


def iter_nothing() -> Generator[PointRecord, None, None]:
    """An empty record stream (no executor is started when nothing is left to run)."""
    yield from ()


def summary_line(summary: SweepSummary) -> str:
    """One line for the end of a sweep."""
    text = (f"{summary.done} of {summary.total} points done, {summary.failed} failed, "
            f"{summary.pending} pending ({summary.ran} run now in {summary.elapsed_s:.1f} s); store {summary.store}")
    if summary.failed:
        text += "; rerun with --retry-failed to run the failed points again"
    return text


def describe_point(point: Point, status: str | None = None) -> str:
    """A listing line for ``--dry-run``."""
    state = f" [{status}]" if status else ""
    return (f"#{point.ordinal:<5d} {point.point_id[:12]} repeat={point.repeat} seed={point.seed}{state}  "
            f"{describe_parameters(point.parameters)}")


#: A dry run's calibration point stops after this many seconds (or --point-timeout-s if smaller).
CALIBRATION_LIMIT_S = 60.0


def calibrate(plan: SweepPlan, function: Any, limit_s: float = CALIBRATION_LIMIT_S) -> tuple[float, PointRecord]:
    """Run the plan's first point once in this process (not stored), stopped after ``limit_s``.

    Returns its wall time and record; a record failed with ``PointTimeout`` means "longer than
    ``limit_s``".
    """
    from netsim.sweep.worker import execute

    task = next(tasks_for(plan, plan.points[:1], limit_s))
    clock = time.perf_counter()
    record = execute(function, task)
    return time.perf_counter() - clock, record


def estimate_s(seconds_per_point: float, points: int, workers: int) -> float:
    """Wall time of ``points`` equal points on ``workers`` workers (whole rounds)."""
    return seconds_per_point * -(-points // max(1, workers))
