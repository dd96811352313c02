"""``netsim budget FILE``: per-link and per-demand budgets and bounds as tables."""

from __future__ import annotations

import argparse
import json
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("table", "csv", "md", "tex", "json")

#: Columns the text format prints by default (``--wide``: all), by the table's first column key.
COMPACT = {
    "link": ("profile", "scheme", "length_km", "loss_db", "pair_rate_per_s", "fidelity", "eof_ebits", "plob_bits_per_s"),
    "demand": ("profile", "hops", "expected_rate_per_s", "expected_fidelity", "min_fidelity", "meets_fidelity",
               "meets_rate", "multipath_bits_per_s"),
}


def register(subparsers: Any) -> None:
    """Add the ``budget`` subcommand."""
    from netsim.cli.columns import add_column_options
    from netsim.scenario.model import ROUTING_POLICIES

    parser = subparsers.add_parser(
        "budget", help="link budgets, expected pair rates and capacity bounds",
        description="Per link: loss budget, heralding figures, entanglement, repeaterless bound "
                    "and Holevo figures. Per demand: route, analytic expectation and network "
                    "capacity bounds. Closed forms only; nothing is simulated.")
    parser.add_argument("file", metavar="FILE", help="scenario file (TOML)")
    parser.add_argument("--format", default="table", help="one of " + ", ".join(_FORMATS) + " (default table)")
    parser.add_argument("--routing", default=None,
                        help="routing policy: " + ", ".join(ROUTING_POLICIES) + " (default: the scenario's)")
    parser.add_argument("--only", choices=("links", "demands"), default=None, help="print one table only")
    add_column_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from netsim.cli.columns import select_tables
    from netsim.errors import ParameterError
    from netsim.network.budget import budget
    from netsim.network.routing import POLICIES
    from netsim.report.table import render
    from netsim.scenario import load

    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    if args.routing is not None and args.routing not in POLICIES:
        raise ParameterError("--routing", args.routing, "one of " + ", ".join(POLICIES))
    result = budget(load(args.file), policy=args.routing)
    tables = [t for t, name in zip(result.tables(), ("links", "demands")) if args.only in (None, name)]
    chosen = select_tables(tables, args.format, args, COMPACT)
    if args.format == "json":
        data = result.to_dict()
        if args.only:
            data = {"scenario": data["scenario"], args.only: data[args.only], "warnings": data["warnings"]}
        print(json.dumps(data, indent=2))
        return 0
    print("\n".join(render(t, args.format) for t in chosen), end="")
    return 0
