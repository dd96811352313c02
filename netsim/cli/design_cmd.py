"""``netsim design FILE``: choose candidate sites and links, slots and modes at least cost."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

__all__ = ["design", "register"]


def register(subparsers: Any) -> None:
    """Add the ``design`` subcommand."""
    from netsim.cli import seed_value
    parser = subparsers.add_parser(
        "design", help="choose candidate repeaters, fibres, memory slots and modes at least cost",
        description="Solve a mixed-integer linear program over candidate routes (closed-form rates "
                    "and fidelities) for the cheapest network meeting every demand's min_rate_per_s "
                    "and min_fidelity, simulate it, and tighten it where the simulation misses. "
                    "Writes design.json, design.toml, costs.md/csv, verdicts.md, memory.md and map.png. "
                    "Exit code 2 when no design can meet the demands.")
    parser.add_argument("file", metavar="FILE", help="scenario file (TOML) with candidate sites or links")
    parser.add_argument("--out", metavar="DIR", default=None, help="output directory (default results/<scenario>/design/)")
    parser.add_argument("--routes", metavar="K", default="8", help="routes considered per demand (default 8)")
    parser.add_argument("--max-modes", metavar="M", default="64", help="most modes on one link (default 64)")
    parser.add_argument("--max-slots", metavar="S", default="64", help="most memory slots at one site (default 64)")
    parser.add_argument("--max-utilisation", metavar="U", default="0.8",
                        help="share of time a fibre may be busy, in (0, 1] (default 0.8)")
    parser.add_argument("--time-limit-s", metavar="T", default="60", help="solver time limit (default 60 s)")
    parser.add_argument("--pairs", metavar="N", default="500", help="pairs per demand simulated (default 500)")
    parser.add_argument("--rounds", metavar="R", default="3", help="simulate-and-tighten rounds (default 3)")
    parser.add_argument("--seed", type=seed_value, default=0, metavar="S", help="random seed of the simulation (default 0)")
    parser.add_argument("--wait-target", metavar="W", default="0.05",
                        help="share of slot requests allowed to wait, for the memory sizing (default 0.05)")
    parser.add_argument("--no-simulate", action="store_true", help="solve only; skip the simulation")
    parser.add_argument("--max-link-pairs", metavar="N", default=None,
                        help="refuse a check by simulation expected to herald more than N link pairs "
                             "(default 1e6, minutes); the engine stops at 4 x N")
    parser.set_defaults(func=design)


def _int(name: str, text: str, low: int) -> int:
    from netsim.errors import ParameterError

    try:
        value = int(text)
    except ValueError:
        raise ParameterError(name, text, f"an integer >= {low}") from None
    if value < low:
        raise ParameterError(name, text, f"an integer >= {low}")
    return value


def _float(name: str, text: str, allowed: str, low: float, high: float, low_open: bool = True) -> float:
    import math

    from netsim.errors import ParameterError

    try:
        value = float(text)
    except ValueError:
        raise ParameterError(name, text, allowed) from None
    if not math.isfinite(value) or value > high or value < low or (low_open and value == low):
        raise ParameterError(name, text, allowed)
    return value


def design(args: argparse.Namespace) -> int:
    from netsim.cli.outputs import check_output_dir, writing
    from netsim.design.milp import DesignOptions
    from netsim.design.output import memory_rows, memory_table, verdict_table, write_design
    from netsim.design.verify import design_and_check
    from netsim.report.table import render
    from netsim.scenario import load

    options = DesignOptions(
        routes_per_demand=_int("--routes", args.routes, 1), max_modes=_int("--max-modes", args.max_modes, 1),
        max_slots=_int("--max-slots", args.max_slots, 1),
        max_utilisation=_float("--max-utilisation", args.max_utilisation, "a number in (0, 1]", 0.0, 1.0),
        time_limit_s=_float("--time-limit-s", args.time_limit_s, "a number > 0 (s)", 0.0, float("inf")))
    pairs, rounds = _int("--pairs", args.pairs, 1), _int("--rounds", args.rounds, 1)
    seed = args.seed
    wait_target = _float("--wait-target", args.wait_target, "a number in [0, 1]", 0.0, 1.0, low_open=False)
    scenario = load(args.file)
    from netsim.cli.run_cmd import max_link_pairs

    option = "--out" if args.out else "--out (default)"
    out = check_output_dir(option, args.out or Path("results") / scenario.slug / "design")
    checked = design_and_check(scenario, options, pairs=pairs, seed=seed, rounds=rounds,
                               simulate=not args.no_simulate, max_link_pairs=max_link_pairs(args.max_link_pairs))
    with writing(option, out):
        written = write_design(scenario, checked, out, wait_target)
    d = checked.design
    if d.status == "infeasible" or not d.routes:
        for line in d.problems:
            print(f"netsim design: cannot meet {line}", file=sys.stderr)
        print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
        return 2
    currency = scenario.costs.currency if scenario.costs else "units"
    print(f"{scenario.name}: {d.status}, total cost {d.total_cost:.6g} {currency}"
          + (f" (gap {d.gap:.2g})" if d.gap else ""))
    print(f"  chosen sites: {', '.join(d.chosen_sites) or 'none'}; rejected: {', '.join(d.rejected_sites) or 'none'}")
    print(f"  chosen links: {', '.join(d.chosen_links) or 'none'}; rejected: {', '.join(d.rejected_links) or 'none'}")
    if checked.verdicts:
        print(render(verdict_table(checked), "table"), end="")
        print(render(memory_table(memory_rows(checked.sites, wait_target), wait_target), "table"), end="")
    else:
        print("\n".join(checked.history))
    print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    if checked.interrupted:
        print("netsim design: interrupted; the design is written, its simulation check is not", file=sys.stderr)
        return 130
    return 0 if checked.met or args.no_simulate else 1
