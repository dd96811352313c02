"""``netsim sensitivity FILE``: which uncertain parameter moves each demand's figures most."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("table", "md", "csv", "json")


def register(subparsers: Any) -> None:
    """Add the ``sensitivity`` subcommand."""
    from netsim.cli import seed_value
    from netsim.cli.outputs import add_force_option

    parser = subparsers.add_parser(
        "sensitivity", help="rank the uncertain parameters by their effect on each demand",
        description="Global sensitivity of each demand's expected rate, expected fidelity and "
                    "useful-pair rate to the scenario's uncertain hardware parameters, varied "
                    "together over their ranges ([sensitivity.ranges] in the scenario, else a "
                    "relative spread around each value): Sobol' indices (first order and total) "
                    "or Morris screening, on the closed forms or on short simulations. Writes "
                    "sensitivity.json, .csv, .md and a tornado chart per demand to "
                    "results/<scenario>/sensitivity/.")
    parser.add_argument("file", metavar="FILE", help="scenario file (TOML)")
    parser.add_argument("--method", default="sobol", help="sobol (default) or morris")
    parser.add_argument("--samples", type=int, default=None, metavar="N",
                        help="Sobol' base samples, a power of two (default 64); Morris trajectories (default 16)")
    parser.add_argument("--spread", type=float, default=None, metavar="S",
                        help="relative half-width of the default ranges (default 0.2, or the "
                             "scenario's sensitivity.spread)")
    parser.add_argument("--simulate", type=int, default=None, metavar="PAIRS",
                        help="evaluate every sample by a short engine run of PAIRS pairs per demand "
                             "instead of the closed forms (slow)")
    parser.add_argument("--max-link-pairs", metavar="N", default=None,
                        help="with --simulate: refuse a sample's run expected to herald more than N link pairs "
                             "(default 1e6, minutes); the engine stops at 4 x N")
    parser.add_argument("--seed", type=seed_value, default=0, metavar="S", help="seed of the sampling (default 0)")
    parser.add_argument("--format", default="table", help="printed format: " + ", ".join(_FORMATS) + " (default table)")
    parser.add_argument("--top", type=int, default=3, metavar="K",
                        help="printed rows per demand and figure (default 3; the files hold every row)")
    parser.add_argument("--out", default=None, metavar="DIR",
                        help="output directory (default results/<scenario>/sensitivity)")
    parser.add_argument("--no-figures", action="store_true", help="write the tables only")
    add_force_option(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from netsim.cli.outputs import check_output_dir, refuse_overwrite, writing
    from netsim.errors import ParameterError
    from netsim.scenario import load
    from netsim.sweep.sensitivity import DEFAULT_SPREAD, rank_parameters
    from netsim.table import Table, render

    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    if args.top < 1:
        raise ParameterError("--top", args.top, "an integer >= 1")
    if args.spread is not None and not 0 < args.spread < 1:
        raise ParameterError("--spread", args.spread, "a number in (0, 1)")
    scenario = load(args.file)
    option = "--out" if args.out else "--out (default)"
    out = check_output_dir(option, args.out or Path("results") / scenario.slug / "sensitivity")
    refuse_overwrite([out], args.force, "sensitivity ranking")
    spread = args.spread if args.spread is not None else DEFAULT_SPREAD
    from netsim.cli.run_cmd import max_link_pairs

    limit = max_link_pairs(args.max_link_pairs)
    result = rank_parameters(scenario, method=args.method, samples=args.samples, spread=spread,
                             seed=args.seed, simulate_pairs=args.simulate, max_link_pairs=limit)
    with writing(option, out):
        written = write_sensitivity(result, out, figures=not args.no_figures)
    table = result.table()
    shown = Table(table.title, table.columns, [r for r in table.rows if r["rank"] <= args.top], table.notes)
    if args.format == "json":
        import json

        print(json.dumps(result.to_dict(), indent=2))
    else:
        print(render(shown if args.format == "table" else table, args.format), end="")
    print(f"wrote {len(written)} files to {out}:", file=sys.stderr)
    for path in written:
        print(f"  {path}", file=sys.stderr)
    return 0


def write_sensitivity(result: Any, out: Path, figures: bool = True) -> list[Path]:
    """The ranking as JSON, CSV and Markdown, and one tornado chart per demand (PNG and PDF)."""
    import json

    from netsim.table import render

    out.mkdir(parents=True, exist_ok=True)
    table = result.table()
    written = []
    for suffix, text in ((".json", json.dumps(result.to_dict(), indent=2) + "\n"),
                         (".csv", render(table, "csv")), (".md", render(table, "md"))):
        path = out / f"sensitivity{suffix}"
        path.write_text(text, encoding="utf-8")
        written.append(path)
    if figures:
        from netsim.report.figures import save_figure
        from netsim.report.tornado import tornado_figures

        for stem, fig in tornado_figures(result).items():
            written += save_figure(fig, out / stem)
    return written
