"""``netsim run FILE``: simulate every demand of a scenario and write run.json and run.csv."""

from __future__ import annotations

import argparse
import contextlib
import math
import sys
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("table", "csv", "md", "json")
#: The default of --max-link-pairs (netsim.network.workload.DEFAULT_MAX_LINK_PAIRS, kept here so
#: that building the parser imports no physics).
DEFAULT_LIMIT = 1e6

#: Columns the text format prints by default (``--wide``: all), by the table's first column key.
#: The hardware profile is left to ``--wide`` and the files (``netsim check`` and ``netsim budget``
#: show it by default): with the requirement verdicts the compact table must still fit 200 columns.
COMPACT = {
    "demand": ("delivered_pairs", "rate_per_s", "rate_ci95", "fidelity_mean", "fidelity_ci95", "meets_fidelity",
               "useful_rate_per_s", "meets_rate"),
}


def register(subparsers: Any) -> None:
    """Add the ``run`` subcommand."""
    from netsim.cli import seed_value
    from netsim.cli.columns import add_column_options
    from netsim.cli.outputs import add_force_option

    parser = subparsers.add_parser(
        "run", help="simulate Bell-pair delivery and qubit ensembles for every demand",
        description="Event simulation of every demand: heralded links, memories, swaps, cut-offs, "
                    "purification and contention for memory slots. Prints a table and writes "
                    "run.json and run.csv (default directory results/<scenario>/).")
    parser.add_argument("file", metavar="FILE", help="scenario file (TOML)")
    stop = parser.add_mutually_exclusive_group()
    stop.add_argument("--pairs", metavar="N", help="stop after N delivered pairs per demand")
    stop.add_argument("--time-s", metavar="T", help="stop after T simulated seconds")
    stop.add_argument("--precision", metavar="R",
                      help="stop once every rate is known to a relative 95%% half-width R (e.g. 0.05)")
    parser.add_argument("--seed", type=seed_value, default=0, metavar="S", help="random seed (default 0); same seed, same numbers")
    parser.add_argument("--max-link-pairs", metavar="N", default=None,
                        help="refuse a run expected to herald more than N link pairs (default "
                             f"{DEFAULT_LIMIT:g}, a few minutes); the engine stops at 4 x N")
    parser.add_argument("--out", metavar="DIR", default=None, help="output directory (default results/<scenario>/)")
    parser.add_argument("--format", default="table", help="printed format: " + ", ".join(_FORMATS) + " (default table)")
    add_force_option(parser)
    add_column_options(parser)
    parser.set_defaults(func=run)


def _number(name: str, text: str | None, kind: type, allowed: str) -> Any:
    from netsim.errors import ParameterError

    if text is None:
        return None
    try:
        value = kind(text)
    except ValueError:
        raise ParameterError(name, text, allowed) from None
    if isinstance(value, float) and not math.isfinite(value):
        raise ParameterError(name, text, allowed)
    return value


def max_link_pairs(text: str | None) -> float:
    """The ``--max-link-pairs`` value (default :data:`DEFAULT_LIMIT`), checked: a number >= 1."""
    from netsim.errors import ParameterError

    if text is None:
        return DEFAULT_LIMIT
    value = _number("--max-link-pairs", text, float, "a number of link pairs >= 1, e.g. 1e7")
    if not value >= 1:
        raise ParameterError("--max-link-pairs", text, "a number of link pairs >= 1, e.g. 1e7")
    return float(value)


@contextlib.contextmanager
def engine_progress() -> Iterator[Callable[[int], None]]:
    """A progress callback for the event engine: a tqdm counter of heralded link pairs on stderr,
    shown only once the run has taken more than three seconds."""
    from tqdm import tqdm

    with tqdm(desc="netsim run: link pairs heralded", unit=" pairs", unit_scale=True, delay=3.0,
              file=sys.stderr, leave=False, mininterval=1.0) as bar:
        yield bar.update


def run(args: argparse.Namespace) -> int:
    from netsim.cli.check_cmd import check_memory_in
    from netsim.cli.columns import select_tables
    from netsim.cli.outputs import check_output_dir, refuse_overwrite, writing
    from netsim.engine import run as simulate
    from netsim.errors import ParameterError
    from netsim.report.table import render
    from netsim.scenario import load

    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    pairs = _number("--pairs", args.pairs, int, "an integer >= 1")
    time_s = _number("--time-s", args.time_s, float, "a finite time > 0 in seconds")
    precision = _number("--precision", args.precision, float, "a relative half-width in (0, 1), e.g. 0.05")
    seed = args.seed
    limit = max_link_pairs(args.max_link_pairs)
    scenario = load(args.file)
    check_memory_in(scenario, args.file)
    option = "--out" if args.out else "--out (default)"
    out = check_output_dir(option, args.out or Path("results") / scenario.slug)
    refuse_overwrite([out / "run.json", out / "run.csv"], args.force, "run result")  # before the run
    with engine_progress() as progress:
        result = simulate(scenario, pairs=pairs, time_s=time_s, precision=precision, seed=seed,
                          max_link_pairs=limit, progress=progress)
    with writing(option, out):
        written = result.write(out)
    chosen = select_tables(result.tables(), args.format, args, COMPACT)
    if args.format == "json":
        import json

        print(json.dumps(result.to_dict(), indent=2))
    else:
        print("\n".join(render(t, args.format) for t in chosen), end="")
    print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    if result.interrupted:
        print("netsim run: interrupted; the files hold the pairs delivered so far", file=sys.stderr)
        return 130
    return 0
