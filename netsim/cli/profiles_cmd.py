"""``netsim profiles [NAME]``: the bundled hardware profiles, or every value of one with its source."""

from __future__ import annotations

import argparse
import json
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("table", "csv", "md", "tex", "json")


def register(subparsers: Any) -> None:
    """Add the ``profiles`` subcommand."""
    parser = subparsers.add_parser(
        "profiles", help="list the hardware profiles a scenario can name, with their sources",
        description="Without NAME: one line per bundled hardware profile (platform, variant, "
                    "headline values). With NAME: every value of that profile and its source. A "
                    "scenario picks a profile with profile = \"NAME\" on a site, a link, "
                    "[defaults.site] or [defaults.link]; keys written in the file override it.")
    parser.add_argument("name", metavar="NAME", nargs="?", default=None, help="a profile name")
    parser.add_argument("--format", default="table", help="one of " + ", ".join(_FORMATS) + " (default table)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from netsim.errors import ParameterError
    from netsim.report.profiles import profile_detail, profile_list, profile_record
    from netsim.report.table import render
    from netsim.scenario.profiles import profile_names

    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    if args.format == "json":
        names = [args.name] if args.name is not None else list(profile_names())
        records = [profile_record(n) for n in names]
        print(json.dumps(records[0] if args.name is not None else records, indent=2))
        return 0
    table = profile_detail(args.name) if args.name is not None else profile_list()
    print(render(table, args.format), end="")
    return 0
