"""``netsim report SOURCE``: proposal tables and figures from a scenario, a run or a sweep store."""

from __future__ import annotations

import argparse
import time
from pathlib import Path
from typing import Any

__all__ = ["register", "run"]

_FORMATS = ("md", "csv", "tex", "json", "table", "pdf")

#: Columns of the printed summary by default (``--wide``: all; the files always hold every column).
COMPACT = {
    "demand": ("hops", "rate_per_s", "rate_ci95", "fidelity_mean", "fidelity_ci95", "ebits_per_s",
               "bound_single_path_per_s"),
}


def register(subparsers: Any) -> None:
    """Add the ``report`` subcommand."""
    from netsim.cli import seed_value
    from netsim.cli.outputs import add_force_option

    parser = subparsers.add_parser(
        "report", help="capacity tables and figures for a proposal",
        description="Write the per-link capacity table, the per-demand table (simulated numbers "
                    "with 95% intervals beside their bounds) and figures for a scenario (.toml), "
                    "a run result (run.json) or a sweep store (.sqlite, pivot tables over the "
                    "swept parameters). Tables go to one file each; figures as PNG and PDF; with --pdf or "
                    "--format pdf, one proposal document (proposal.pdf) holding all of it.")
    parser.add_argument("source", metavar="SOURCE", help="scenario .toml, run .json or sweep .sqlite")
    parser.add_argument("--format", default="md",
                        help="table format: " + ", ".join(_FORMATS) + " (default md); pdf writes only "
                             "the proposal document (proposal.pdf)")
    parser.add_argument("--pdf", action="store_true",
                        help="also write the proposal document proposal.pdf beside the tables and figures")
    parser.add_argument("--ranking", default="morris",
                        help="sensitivity ranking in the PDF: morris (default), sobol or none")
    parser.add_argument("--out", default=None,
                        help="output directory (default results/<scenario>/report-<source>: "
                             "report-budget for a scenario, report-simulation with --simulate, "
                             "report-run for run.json, report-sweep for sweep.sqlite)")
    parser.add_argument("--simulate", action="store_true",
                        help="scenario (or a store's base scenario): also run the engine")
    parser.add_argument("--scenario", default=None,
                        help="run result or store: the scenario file it was made from (default: "
                             "scenarios/<name>.toml when its name or content hash matches)")
    parser.add_argument("--pairs", type=int, default=None, help="with --simulate: pairs per demand (default 1000)")
    parser.add_argument("--time-s", type=float, default=None, help="with --simulate: simulated seconds instead")
    parser.add_argument("--seed", type=seed_value, default=0, metavar="S", help="random seed of the simulation (--simulate) and of the ranking in the PDF (default 0)")
    parser.add_argument("--metric", action="append", default=None,
                        help="store only: metric to pivot (repeatable; default rate_per_s and fidelity_mean)")
    parser.add_argument("--param", action="append", default=None,
                        help="store only: swept parameter for rows, then columns (repeatable); the "
                             "others get one table per value (default: sweep order)")
    parser.add_argument("--no-figures", action="store_true", help="write tables only")
    add_force_option(parser)
    parser.add_argument("--quiet", action="store_true", help="print only the list of files written")
    parser.add_argument("--wide", action="store_true",
                        help="print every column of the summary table (default: a compact set; the "
                             "files always hold every column)")
    parser.set_defaults(func=run)


def _check(args: argparse.Namespace) -> None:
    from netsim.errors import ParameterError

    if args.format not in _FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(_FORMATS))
    if args.ranking not in ("morris", "sobol", "none"):
        raise ParameterError("--ranking", args.ranking, "one of morris, sobol, none")
    if args.pairs is not None and args.pairs < 1:
        raise ParameterError("--pairs", args.pairs, "an integer >= 1")
    if args.time_s is not None and not args.time_s > 0:
        raise ParameterError("--time-s", args.time_s, "a number of seconds > 0")
    if (args.pairs is not None or args.time_s is not None) and not args.simulate:
        raise ParameterError("--pairs/--time-s", args.pairs or args.time_s, "only together with --simulate")


def _metrics(names: list[str] | None) -> dict[str, str | None] | None:
    if not names:
        return None
    known = {"rate_per_s": "rate_ci95", "fidelity_mean": "fidelity_ci95", "eof_mean": "eof_ci95"}
    return {n: known.get(n, f"{n}_ci95") for n in names}


def default_out(source: str | Path, slug: str, simulate: bool) -> Path:
    """``results/<slug>/report-<source>``: one directory per kind of source, so that the report
    of a run never replaces the report of a sweep or of the closed forms."""
    from netsim.report.build import file_stem

    path = Path(source)
    if path.suffix.lower() == ".toml":
        name = "simulation" if simulate else "budget"
    else:
        name = file_stem(path.stem)
    return Path("results") / slug / f"report-{name}"


def _write_pdf(args: argparse.Namespace, data: Any, tables: Any, path: Path,
               drawn: dict[str, Any]) -> Path:
    """The proposal document, with the sensitivity ranking on the closed forms when the
    scenario is known; figures already drawn (and saved as PNG beside it) are used again."""
    import shlex
    import sys

    from netsim import __version__
    from netsim.report.build import report_figures
    from netsim.report.proposal import Provenance, write_proposal

    ranking = None
    if args.ranking != "none" and data.scenario is not None and data.scenario.demands:
        from netsim.sweep.sensitivity import rank_parameters

        ranking = rank_parameters(data.scenario, method=args.ranking, seed=args.seed)
    figures = drawn or ({} if args.no_figures else report_figures(data, tables, args.param))
    saved = {stem: path.parent / f"{stem}.png" for stem in drawn if (path.parent / f"{stem}.png").is_file()}
    command = "netsim " + " ".join(shlex.quote(a) for a in (getattr(args, "argv", None) or sys.argv[1:]))
    seed = args.seed if (args.simulate or ranking is not None) else None
    return write_proposal(path, data, tables, figures,
                          Provenance(command, str(args.source), seed, __version__), ranking, saved=saved)


def run(args: argparse.Namespace) -> int:
    from netsim.cli.columns import choose_columns
    from netsim.cli.outputs import check_output_dir, refuse_overwrite, writing
    from netsim.report.build import write_report
    from netsim.report.sources import load_source
    from netsim.report.table import render

    _check(args)
    if args.out:  # before any work
        check_output_dir("--out", args.out)
    if args.simulate and args.source.endswith(".toml"):
        from netsim.cli.check_cmd import check_memory_in
        from netsim.scenario import load

        scenario = load(args.source)
        check_memory_in(scenario, args.source)  # named with its file, before the run
        early = check_output_dir("--out" if args.out else "--out (default)",
                                 args.out or default_out(args.source, scenario.slug, True))
        refuse_overwrite([early], args.force, "report")
    started = time.perf_counter()
    options = {"seed": args.seed}
    options.update({"time_s": args.time_s} if args.time_s is not None else {"pairs": args.pairs or 1000})
    data = load_source(args.source, simulate=args.simulate, run_options=options,
                       scenario_path=args.scenario)
    option = "--out" if args.out else "--out (default)"
    out = check_output_dir(option, args.out or default_out(args.source, data.slug, args.simulate))
    refuse_overwrite([out], args.force, "report")
    pdf_only = args.format == "pdf"
    drawn: dict[str, Any] = {}
    with writing(option, out):
        tables, written = write_report(data, out, "md" if pdf_only else args.format,
                                       figures=not args.no_figures and not pdf_only,
                                       metrics=_metrics(args.metric), params=args.param, write=not pdf_only,
                                       drawn=drawn)
        if pdf_only or args.pdf:
            written.append(_write_pdf(args, data, tables, out / "proposal.pdf", drawn))
    if not args.quiet:
        first = next(iter(tables.values()), None)
        summary = first if data.kind == "store" else tables.get("demands", first)
        if summary is not None:
            print(render(choose_columns(summary, "table", args, COMPACT, None), "table"))
            if len(tables) > 1:
                print(f"(1 of {len(tables)} tables shown; every table is in the files below)")
        if data.kind == "store" and data.scenario is None:
            print(f"no link or demand tables and no map: the scenario this store was swept from "
                  f"({data.title!r}) was not found; give it with --scenario FILE")
    print(f"wrote {len(written)} files to {out} in {time.perf_counter() - started:.1f} s:")
    for path in written:
        print(f"  {path}")
    return 0
