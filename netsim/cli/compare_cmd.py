"""``netsim compare A.toml B.toml ...``: candidate topologies side by side on the same demands."""

from __future__ import annotations

import argparse
import time
from pathlib import Path
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("table", "md", "csv", "tex", "json")
_SUFFIX = {"table": ".txt", "md": ".md", "csv": ".csv", "tex": ".tex", "json": ".json"}
_STEMS = ("compare-demands", "compare-totals", "compare-bottlenecks")


def register(subparsers: Any) -> None:
    """Add the ``compare`` subcommand."""
    from netsim.cli import seed_value
    from netsim.cli.outputs import add_force_option

    parser = subparsers.add_parser(
        "compare", help="compare candidate topologies on the same demands",
        description="Run the engine on each scenario with the same seed and stop rule, then show "
                    "per demand (matched by user pair) the delivered rate, fidelity and minimum-cut "
                    "bound of each candidate, the totals, each candidate's bottleneck links and "
                    "which candidate wins each demand.")
    parser.add_argument("files", metavar="FILE", nargs="+", help="two or more scenario files (TOML)")
    parser.add_argument("--pairs", type=int, default=None, help="pairs per demand per run (default 200)")
    parser.add_argument("--time-s", type=float, default=None, help="simulated seconds per run instead")
    parser.add_argument("--seed", type=seed_value, default=0, metavar="S", help="the seed every candidate runs with (default 0)")
    parser.add_argument("--no-simulate", action="store_true", help="bounds and bottlenecks only")
    parser.add_argument("--format", default="table", help="one of " + ", ".join(_FORMATS) + " (default table)")
    parser.add_argument("--out", default=None,
                        help="also write each table, and a figure of the rates (PNG, PDF), here")
    parser.add_argument("--wide", action="store_true",
                        help="text format: also print each candidate's min-cut bound beside its rate "
                             "(default: rates and fidelities only; the bottleneck table gives the cuts)")
    add_force_option(parser)
    parser.set_defaults(func=run)


def _check(args: argparse.Namespace) -> None:
    from netsim.errors import ParameterError

    if len(args.files) < 2:
        raise ParameterError("FILE", args.files[0], "two or more scenario files to compare")
    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    if args.pairs is not None and args.pairs < 1:
        raise ParameterError("--pairs", args.pairs, "an integer >= 1")
    if args.time_s is not None and not args.time_s > 0:
        raise ParameterError("--time-s", args.time_s, "a number of seconds > 0")
    if args.pairs is not None and args.time_s is not None:
        raise ParameterError("--time-s", args.time_s, "either --pairs or --time-s, not both")


def _printed(tables: list[Any], args: argparse.Namespace) -> list[Any]:
    """The tables as printed: in the text format the side-by-side table leaves out the min-cut
    bounds (repeated in the bottleneck table) unless --wide or nothing was simulated."""
    from netsim.cli.columns import choose_columns

    if args.no_simulate:
        return tables
    n = len(args.files)
    compact = {"demand": [k for i in range(n) for k in (f"r{i}", f"f{i}", f"m{i}")] + ["winner"]}
    return [choose_columns(tables[0], args.format, args, compact, None), *tables[1:]]


def _write_tables(out: Path, tables: list[Any], candidates: Any, args: argparse.Namespace) -> list[Path]:
    from netsim.report.table import render

    out.mkdir(parents=True, exist_ok=True)
    written = [out / (stem + _SUFFIX[args.format]) for stem in _STEMS[:len(tables)]]
    for path, table in zip(written, tables):
        path.write_text(render(table, args.format), encoding="utf-8")
    if not args.no_simulate:
        from netsim.report.compare import comparison_figure
        from netsim.report.figures import save_figure

        written += save_figure(comparison_figure(candidates), out / "compare-rates")
    return written


def run(args: argparse.Namespace) -> int:
    from netsim.report.compare import comparison_tables, run_candidates
    from netsim.report.table import render

    _check(args)
    if args.out:  # refused before any run, not after
        from netsim.cli.outputs import check_output_dir, refuse_overwrite

        check_output_dir("--out", args.out)
        stems = [*_STEMS, "compare-rates"]
        refuse_overwrite([Path(args.out) / (s + suffix) for s in stems for suffix in (_SUFFIX[args.format], ".png")],
                         args.force, "comparison")
    if not args.no_simulate:
        from netsim.cli.check_cmd import check_memory_in
        from netsim.scenario import load

        for path in args.files:  # a memory shortage named with its file, before any run
            check_memory_in(load(path), path)
    started = time.perf_counter()
    candidates = run_candidates(args.files, pairs=args.pairs or 200, time_s=args.time_s,
                                seed=args.seed, simulate=not args.no_simulate)
    tables = comparison_tables(candidates)
    print("\n".join(render(t, args.format) for t in _printed(tables, args)), end="")
    if args.out:
        from netsim.cli.outputs import writing

        out = Path(args.out)
        with writing("--out", out):
            written = _write_tables(out, tables, candidates, args)
        print(f"wrote {len(written)} files to {out}:")
        for path in written:
            print(f"  {path}")
    print(f"compared {len(candidates)} candidates in {time.perf_counter() - started:.1f} s "
          f"(seed {args.seed})")
    return 0
