"""Run every benchmark, print one table and merge the figures into results/benchmarks.json.

Usage::

    python tests/benchmarks/run.py                 # everything
    python tests/benchmarks/run.py --only eof      # benchmarks whose name contains "eof"
    python tests/benchmarks/run.py --only eof_xstate_states_per_s   # the callable behind a figure
    python tests/benchmarks/run.py --list          # list the benchmark callables
    python tests/benchmarks/run.py --strict        # exit 1 when a target is missed

Discovery: every ``bench_*.py`` module beside this file exposes ``BENCHMARKS``, a list of
callables. Each callable takes no arguments and returns a list of records::

    {"name": str, "value": float, "unit": str, "target": float | None,
     "higher_is_better": bool, "baseline": str, "ratio": float | None}

``baseline`` names the plain reference measured in the same run and ``ratio`` is value /
baseline value (a speed-up for rates). ``--only NAME`` runs the callables whose
``module.callable`` contains NAME or whose name is contained in NAME (a figure name).
All work runs on one core: the BLAS thread pools are pinned to one thread before numpy loads.
Speed targets live here and nowhere else (never in the timed test run).
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import importlib.util
import json
import math
import platform
import sys
import time
import traceback
from collections.abc import Callable
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent.parent
RESULTS = ROOT / "results" / "benchmarks.json"
RECORD_KEYS = ("name", "value", "unit", "target", "higher_is_better", "baseline", "ratio")

Benchmark = Callable[[], list[dict[str, Any]]]


def discover(directory: Path = HERE) -> list[tuple[str, Benchmark]]:
    """(``module.callable``, callable) for every entry of ``BENCHMARKS`` in ``bench_*.py``."""
    found: list[tuple[str, Benchmark]] = []
    for path in sorted(directory.glob("bench_*.py")):
        spec = importlib.util.spec_from_file_location(f"netsim_bench_{path.stem}", path)
        if spec is None or spec.loader is None:
            continue
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        for fn in getattr(module, "BENCHMARKS", []):
            found.append((f"{path.stem}.{getattr(fn, '__name__', 'benchmark')}", fn))
    return found


def selects(name: str, label: str) -> bool:
    """``--only NAME`` selects ``module.callable`` when NAME is part of it, or when the callable's
    name is part of NAME (so a figure name such as ``eof_general_states_per_s`` works too)."""
    return name in label or label.rsplit(".", 1)[-1] in name


def met(record: dict[str, Any]) -> bool | None:
    """Whether a record reaches its target (None when it has none)."""
    target, value = record.get("target"), record.get("value")
    if target is None or value is None or not math.isfinite(float(value)):
        return None
    return float(value) >= float(target) if record.get("higher_is_better", True) else float(value) <= float(target)


def check_record(record: dict[str, Any], source: str) -> dict[str, Any]:
    """Fill defaults and complain about a malformed record (a bug in the benchmark module)."""
    missing = [k for k in ("name", "value", "unit") if k not in record]
    if missing:
        raise ValueError(f"{source}: record without {', '.join(missing)}: {record!r}")
    out = {"target": None, "higher_is_better": True, "baseline": "", "ratio": None, **record}
    out["value"] = float(out["value"])
    return {k: out[k] for k in RECORD_KEYS} | {k: v for k, v in out.items() if k not in RECORD_KEYS}


def run(selected: list[tuple[str, Benchmark]]) -> tuple[list[dict[str, Any]], list[str]]:
    """Run the benchmarks; return their records and the error messages of those that failed."""
    records: list[dict[str, Any]] = []
    errors: list[str] = []
    for label, fn in selected:
        start = time.perf_counter()
        print(f"running {label} ...", file=sys.stderr, flush=True)
        try:
            produced = [check_record(r, label) for r in fn()]
        except Exception:  # noqa: BLE001 -- reported below with its traceback; exit code 1
            errors.append(f"{label} failed:\n{traceback.format_exc()}")
            continue
        for r in produced:
            r["benchmark"] = label
            r["seconds"] = round(time.perf_counter() - start, 3)
        records.extend(produced)
    return records, errors


def table_text(records: list[dict[str, Any]]) -> str:
    from netsim.report.table import Column, Table, render

    columns = [Column("name", "figure"), Column("value", "value", 4), Column("unit", "unit"),
               Column("target", "target", 4), Column("met", "met?"), Column("ratio", "ratio", 3),
               Column("engine", "engine"), Column("baseline", "baseline")]
    from netsim.engine import BUILD

    rows = [{"engine": "", **r, "met": met(r)} for r in records]
    return render(Table(f"Benchmarks (one core; event engine {BUILD})", columns, rows), "table")


def merge_results(records: list[dict[str, Any]], path: Path = RESULTS) -> dict[str, Any]:
    """Merge records by name into the JSON file (other figures are kept) and write it."""
    data: dict[str, Any] = {}
    if path.exists():
        data = json.loads(path.read_text())
    figures = data.get("figures", {})
    stamp = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
    for r in records:
        figures[r["name"]] = {**r, "met": met(r), "measured_at": stamp}
    from netsim.engine import BUILD

    data = {"machine": {"python": platform.python_version(), "platform": platform.platform(),
                        "processor": platform.processor() or platform.machine(), "event_engine": BUILD},
            "updated_at": stamp, "figures": dict(sorted(figures.items()))}
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(data, indent=2) + "\n")
    return data


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--only", nargs="+", metavar="NAME", help="run benchmarks whose module.callable contains NAME")
    parser.add_argument("--list", action="store_true", help="list the benchmarks and exit")
    parser.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    parser.add_argument("--output", type=Path, default=RESULTS, help="JSON file to merge results into")
    args = parser.parse_args(argv)
    benchmarks = discover()
    if args.only:
        benchmarks = [(label, fn) for label, fn in benchmarks if any(selects(s, label) for s in args.only)]
    if args.list or not benchmarks:
        print("\n".join(label for label, _ in benchmarks) or "no benchmark matches")
        return 0 if benchmarks or args.list else 2
    start = time.perf_counter()
    records, errors = run(benchmarks)
    print(table_text(records), end="")
    print(f"total {time.perf_counter() - start:.1f} s; results merged into {args.output}")
    merge_results(records, args.output)
    for message in errors:
        print(message, file=sys.stderr)
    missed = any(met(r) is False for r in records)
    return 1 if errors or (args.strict and missed) else 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    raise SystemExit(main())
