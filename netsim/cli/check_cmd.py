"""``netsim check FILE``: validate a scenario and print a short summary with planning warnings."""

from __future__ import annotations

import argparse
import json
from typing import Any

__all__ = ["check_memory_in", "register", "run"]


def register(subparsers: Any) -> None:
    """Add the ``check`` subcommand."""
    parser = subparsers.add_parser(
        "check", help="validate a scenario file and summarise it",
        description="Validate a scenario file; print counts of sites, links and demands and "
                    "planning warnings (links beyond what their scheme can bridge, routes below "
                    "a demand's min_fidelity or min_rate_per_s, purification that hurts), for a demand "
                    "below its min_fidelity what would fix it, and the hardware profiles it names "
                    "(--profiles: their values and sources). Exit 0 if valid, 2 if not; with --strict, 1 when "
                    "there are warnings.")
    parser.add_argument("file", metavar="FILE", help="scenario file (TOML)")
    parser.add_argument("--format", choices=("text", "json"), default="text", help="output format (default text)")
    parser.add_argument("--strict", action="store_true", help="exit with code 1 when there are warnings")
    parser.add_argument("--profiles", action="store_true",
                        help="explain the hardware profiles the scenario uses: every value with its source, "
                             "the sites and links resting on it and the values the file overrides")
    parser.add_argument("--no-scan", action="store_true",
                        help="for a demand below its min_fidelity, advise without the scan of cut-offs "
                             "(sampled timelines) that looks for the best one")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from netsim.network.audit import audit, summary
    from netsim.scenario import load

    from netsim.report.profiles import profile_record, scenario_usage, usage_tables
    from netsim.report.table import render

    scenario = load(args.file)
    check_memory_in(scenario, args.file)
    from netsim.engine.api import work_warnings

    facts, warnings = summary(scenario), audit(scenario) + work_warnings(scenario)
    from netsim.engine.advice import demand_advice

    usage = scenario_usage(scenario)
    advice = demand_advice(scenario, simulate=not args.no_scan)
    if args.format == "json":
        extra: dict[str, Any] = {"profiles": usage}
        if args.profiles:
            extra["profile_values"] = {u["profile"]: profile_record(u["profile"]) for u in usage}
        print(json.dumps({"file": args.file, "valid": True, **facts, **extra, "warnings": warnings,
                          "advice": advice}, indent=2))
    else:
        print(_text(args.file, facts, warnings, usage))
        if advice:
            print("\n".join(f"  fix: {line}" for line in advice))
        if args.profiles:
            print("".join("\n" + render(t, "table") for t in usage_tables(scenario)), end="")
    return 1 if (args.strict and warnings) else 0


def check_memory_in(scenario: Any, path: str) -> None:
    """Too few memory slots on a demand's route (the engine would refuse the run), reported like
    every other scenario problem: ``FILE: sites[4].memory_slots: 1 is not allowed; expected ...``."""
    from netsim.engine.api import check_memory
    from netsim.errors import ParameterError, Problem, ScenarioError, format_value

    _needs_design(scenario, path)
    try:
        check_memory(scenario)
    except ParameterError as exc:
        message = f"{format_value(exc.value)} is not allowed; expected {exc.allowed}"
        raise ScenarioError([Problem(exc.name, message)], source=path) from None


def _needs_design(scenario: Any, path: str) -> None:
    """Demands that only candidate sites or links could serve: one line each, pointing at
    ``netsim design`` (candidates exist only once a design chooses them)."""
    if not scenario.candidate_sites and not scenario.candidate_links:
        return
    import networkx as nx

    from netsim.errors import Problem, ScenarioError, format_value
    from netsim.network import build_graph
    from netsim.network.routing import relay_graph

    graph = build_graph(scenario)
    problems = []
    for d in scenario.demands:
        relays = relay_graph(graph, d.a, d.b)
        if not nx.has_path(relays, d.a, d.b):
            problems.append(Problem(f"demands[{d.index}].users", f"[{format_value(d.a)}, {format_value(d.b)}] is not allowed here; only "
                                    "candidate sites or links join them, which exist once a design chooses "
                                    "them; expected a built route (run netsim design FILE first)"))
    if problems:
        raise ScenarioError(problems, source=path)


def _text(path: str, facts: dict[str, Any], warnings: list[str], usage: list[dict[str, Any]]) -> str:
    lines = [
        f"{path}: valid scenario {facts['name']!r}",
        (f"  sites: {facts['sites']} ({facts['users']} user, {facts['repeaters']} repeater, "
         f"{facts['switches']} switch)"),
        f"  links: {facts['links']} ({facts['fibre_km']:.4g} km of fibre)",
        f"  demands: {facts['demands']} (routing: {facts['routing']})",
    ]
    for use in usage:
        parts = [f"{len(use['sites'])} site(s)"] * bool(use["sites"]) + [f"{len(use['links'])} link(s)"] * bool(use["links"])
        lines.append(f"  profile: {use['profile']} ({use['variant']}) for {', '.join(parts)}"
                     + (f"; overridden at {len(use['overrides'])}" if use["overrides"] else ""))
    if not usage:
        lines.append("  profile: none named; built-in defaults (see netsim profiles)")
    lines.append(f"  warnings: {len(warnings)}" if warnings else "  warnings: none")
    lines += [f"  warning: {w}" for w in warnings]
    return "\n".join(lines)
