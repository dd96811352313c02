"""``netsim sweep``: run a resumable parameter sweep of a scenario into an SQLite store."""

from __future__ import annotations

import argparse
import functools
import math
import sys
from pathlib import Path
from typing import Any

from netsim.cli.run_cmd import DEFAULT_LIMIT, max_link_pairs
from netsim.errors import ParameterError

__all__ = ["register", "run_command"]

_DESCRIPTION = """\
Run the engine at every point of a parameter sweep and store each point's metrics in an SQLite
file as soon as it finishes. Re-running the same command skips finished points, so a sweep that
was interrupted (Ctrl-C, a crash, a killed job) resumes where it stopped and ends with exactly
the results of an uninterrupted run.
Exit status: 0 every point done, 1 some points failed (see --retry-failed), 2 bad input,
130 interrupted (finished points are kept). Every point is checked before the first one runs:
a point whose run is expected to herald more link pairs than --max-link-pairs (or never to
end) refuses the whole sweep at once, naming the points, rather than failing overnight."""

_EPILOG = """\
sweep keys (--vary KEY=VALUES, or KEY = VALUES in the file's [sweep.vary] table):
  sites[SEL].KEY, links[SEL].KEY, demands[SEL].KEY   SEL is * (every entry), an index
      (zero-based) or KEY=VALUE, e.g. sites[role=repeater].t2_s, links[3].length_km,
      links[name=Ashford-Brindle].extra_loss_db (a link's or demand's name is its ends joined by -)
  defaults.site.KEY, defaults.link.KEY, protocol.KEY
  KEY must be a numeric key of that table.
values:
  10,20,40            a list
  lin:FROM:TO:N       N evenly spaced values, both ends included
  log:FROM:TO:N       N values evenly spaced in log (FROM, TO > 0)
  in the file also:   [10, 20, 40] or {from = 1, to = 100, points = 5, scale = "log"}
[sweep] table keys: vary, combine ("grid" | "zip"), repeats, seed, pairs | time_s | precision;
command-line options replace them.

examples:
  netsim sweep scenarios/chain3.toml --vary 'links[*].length_km=lin:5:40:8' --pairs 200
  netsim sweep city.toml --vary 'sites[role=repeater].t2_s=log:0.01:10:7' --repeats 3 --dry-run
  netsim sweep city.toml --cluster local:4 --quiet
  netsim sweep city.toml --retry-failed --point-timeout-s 600"""


def _add_spec_options(parser: argparse.ArgumentParser) -> None:
    from netsim.cli import seed_value

    parser.add_argument("file", metavar="FILE", help="scenario file (TOML)")
    parser.add_argument("--vary", action="append", default=[], metavar="KEY=VALUES",
                        help="vary a numeric key (repeatable); replaces the file's axis with the same key")
    parser.add_argument("--combine", choices=("grid", "zip"), default=None,
                        help="every combination of the axes (grid, default) or their i-th values together (zip)")
    parser.add_argument("--repeats", type=int, default=None, metavar="N",
                        help="independent repetitions of each combination (default 1)")
    parser.add_argument("--seed", type=seed_value, default=None, metavar="S", help="base seed (default 0)")
    stop = parser.add_mutually_exclusive_group()
    stop.add_argument("--pairs", type=int, default=None, metavar="N", help="engine stop rule: N pairs per demand")
    stop.add_argument("--time-s", type=float, default=None, metavar="T", help="engine stop rule: T simulated seconds")
    stop.add_argument("--precision", type=float, default=None, metavar="R",
                      help="engine stop rule: relative 95%% half-width R of every demand's rate")


def _add_run_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--max-link-pairs", metavar="N", default=None,
                        help="refuse the sweep, before any point runs, if a point's run is expected to herald "
                             f"more than N link pairs (default {DEFAULT_LIMIT:g}, minutes per point); the engine "
                             "stops a point at 4 x N")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, default=None, metavar="N",
                       help="local worker processes (default: the number of cores)")
    where.add_argument("--cluster", default=None, metavar="ADDRESS",
                       help="a Dask scheduler address, or local:N for a Dask LocalCluster of N workers "
                            "(needs the 'cluster' extra)")
    parser.add_argument("--store", default=None, metavar="PATH",
                        help="result store (default results/<scenario>/sweep.sqlite)")
    parser.add_argument("--dry-run", action="store_true",
                        help="list the points, the route changes against the base scenario and the entries a "
                             "defaults.* axis does not reach, and estimate the run time from one calibration "
                             "point; run nothing else")
    parser.add_argument("--retry-failed", action="store_true", help="run only the points recorded as failed")
    parser.add_argument("--point-timeout-s", type=float, default=None, metavar="T",
                        help="record a point as failed when it runs longer than T seconds")
    parser.add_argument("--quiet", action="store_true",
                        help="one line per finished point instead of a progress bar")


def register(subparsers: Any) -> None:
    """Add the ``sweep`` subcommand."""
    parser = subparsers.add_parser("sweep", help="run a resumable parameter sweep into an SQLite store",
                                   description=_DESCRIPTION, epilog=_EPILOG,
                                   formatter_class=argparse.RawDescriptionHelpFormatter)
    _add_spec_options(parser)
    _add_run_options(parser)
    parser.set_defaults(func=run_command)


def _check_numbers(args: argparse.Namespace) -> None:
    timeout = args.point_timeout_s
    if timeout is not None and not (math.isfinite(timeout) and timeout > 0):
        raise ParameterError("--point-timeout-s", timeout, "a number of seconds > 0")
    if args.workers is not None and args.workers < 1:
        raise ParameterError("--workers", args.workers, "an integer >= 1")
    if args.cluster is not None:
        from netsim.sweep.executors import parse_cluster

        parse_cluster(args.cluster)  # before the scenario is read or Dask imported


def _plan(args: argparse.Namespace) -> Any:
    from netsim.scenario import load
    from netsim.sweep.plan import make_plan

    scenario = load(args.file)
    return make_plan(scenario, args.vary, combine=args.combine, repeats=args.repeats, seed=args.seed,
                     pairs=args.pairs, time_s=args.time_s, precision=args.precision,
                     max_link_pairs=max_link_pairs(args.max_link_pairs))


def _store_statuses(path: Path, plan: Any) -> dict[str, str]:
    from netsim.sweep.runner import store_meta
    from netsim.sweep.store import open_store, refuse_other

    if not path.exists():
        return {}
    with open_store(path) as store:
        refuse_other(path, store.meta(), store_meta(plan))
        return {row["point_id"]: row["status"] for row in store.points()}


def _dry_run(args: argparse.Namespace, plan: Any, point_function: Any, store: Path) -> int:
    from netsim.sweep.runner import describe_point

    statuses = _store_statuses(store, plan)
    wanted = "failed" if args.retry_failed else "pending"
    todo = [p for p in plan.points if statuses.get(p.point_id, "pending") == wanted]
    for point in plan.points:
        print(describe_point(point, statuses.get(point.point_id)))
    print(f"{len(plan.points)} points, {len(todo)} to run; store {store}"
          f"{'' if statuses else ' (not created yet)'}")
    _print_routes_and_overrides(plan, dry_run=True)
    return _print_estimate(args, plan, point_function, len(todo))


def _print_routes_and_overrides(plan: Any, dry_run: bool) -> None:
    """Route changes across the plan (dry run: each; a run: how many) and the sites or links a
    defaults.* axis does not reach."""
    from netsim.sweep.routes import route_changes, unswept_overrides

    for line in unswept_overrides(plan):
        print(f"not swept: {line}")
    changes = route_changes(plan)
    if dry_run:
        print(f"route changes against the base scenario: {len(changes) or 'none'}")
        for line in changes:
            print(f"  route: {line}")
    elif changes:
        print(f"{len(changes)} point-demand pairs take another route than the base scenario "
              "(--dry-run lists them; the report marks them)")


def _print_estimate(args: argparse.Namespace, plan: Any, point_function: Any, count: int) -> int:
    from netsim.sweep.executors import default_workers
    from netsim.sweep.runner import CALIBRATION_LIMIT_S, calibrate, estimate_s

    limit = min(CALIBRATION_LIMIT_S, args.point_timeout_s or CALIBRATION_LIMIT_S)
    seconds, record = calibrate(plan, point_function, limit)
    workers = args.workers or (_cluster_workers(args.cluster) if args.cluster else default_workers())
    where = f"{workers} worker{'s' if workers != 1 else ''}" if workers else "the cluster's workers"
    total = _duration(estimate_s(seconds, count, workers or 1))
    if record.status == "done":
        print(f"calibration point #0 took {seconds:.2f} s; estimated run time for {count} points on {where}: {total}")
        return 0
    if (record.error or "").startswith("PointTimeout"):
        print(f"calibration point #0 did not finish within {limit:g} s; estimated run time for {count} points "
              f"on {where}: more than {total}")
        return 0
    print(f"calibration point #0 failed after {seconds:.2f} s: {record.error}")
    return 1


def _cluster_workers(cluster: str) -> int | None:
    count = cluster.removeprefix("local:")
    return int(count) if cluster.startswith("local:") and count.isdigit() else None


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def run_command(args: argparse.Namespace, point_function: Any = None) -> int:
    """Run ``netsim sweep`` for parsed ``args``; ``point_function`` defaults to the engine."""
    from netsim.sweep.executors import DaskPool, make_executor
    from netsim.sweep.runner import default_store_path, run_sweep, summary_line
    from netsim.sweep.worker import engine_point

    _check_numbers(args)
    if point_function is None:
        limit = max_link_pairs(args.max_link_pairs)
        point_function = functools.partial(engine_point, max_link_pairs=limit) if args.max_link_pairs else engine_point
    plan = _plan(args)
    store = Path(args.store) if args.store else default_store_path(plan)
    if args.dry_run:
        return _dry_run(args, plan, point_function, store)
    from netsim.cli.outputs import check_output_file

    check_output_file("--store" if args.store else "--store (default)", store)
    _print_routes_and_overrides(plan, dry_run=False)
    executor = make_executor(point_function, args.workers, args.cluster)
    if isinstance(executor, DaskPool) and executor.local_workers is None:
        executor.connect()  # an unreachable scheduler is refused before the store is touched
    try:
        summary = run_sweep(plan, executor, store_path=store, retry_failed=args.retry_failed,
                            point_timeout_s=args.point_timeout_s, quiet=args.quiet)
    finally:
        if isinstance(executor, DaskPool):
            executor.close()
    print(summary_line(summary), file=sys.stdout)
    if summary.done and not summary.failed:
        print(f"tables and figures: netsim report {store}")
    return 0 if summary.failed == 0 else 1
