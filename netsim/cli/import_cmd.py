"""``netsim import MAP --out FILE``: a fibre map (GeoJSON, GraphML or CSV tables) -> scenario TOML."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

__all__ = ["import_map", "register"]

#: Tables a ``--with`` file may add to the imported sites and links.
TEMPLATE_TABLES = ("network", "costs", "defaults", "protocol", "encoding", "demands")


def register(subparsers: Any) -> None:
    """Add the ``import`` subcommand."""
    parser = subparsers.add_parser(
        "import", help="turn a fibre map (GeoJSON, GraphML, CSV) into a scenario file",
        description="Read sites and fibres from GeoJSON (Point sites, LineString fibres; lon/lat on "
                    "WGS84, projected to km), GraphML, or a sites CSV with --links LINKS.csv, and "
                    "write a scenario TOML (candidates included). Each bad feature or row is "
                    "reported on one line, and then nothing is written.")
    parser.add_argument("map", metavar="MAP", help="GeoJSON or GraphML file, or the sites CSV table")
    parser.add_argument("--out", metavar="FILE", required=True, help="scenario file to write (TOML)")
    parser.add_argument("--links", metavar="CSV", default=None, help="links CSV table (with a sites CSV)")
    parser.add_argument("--format", default=None, help="geojson, graphml or csv (default: from the suffix)")
    parser.add_argument("--with", dest="template", metavar="TOML", default=None,
                        help="a TOML file whose " + ", ".join(f"[{t}]" for t in TEMPLATE_TABLES)
                             + " go into the scenario")
    parser.add_argument("--name", default=None, help="network name (default: the map's file name)")
    parser.add_argument("--snap-m", metavar="M", default="100",
                        help="largest distance from a fibre's end point to its site (default 100 m)")
    parser.add_argument("--force", action="store_true", help="replace --out if it exists")
    parser.set_defaults(func=import_map)


def _template(path: str | None) -> dict[str, Any]:
    from netsim.errors import Problem, ScenarioError
    from netsim.scenario.loader import read_toml

    if path is None:
        return {}
    data = read_toml(path)  # the limits and messages of a scenario file
    bad = [k for k in data if k not in TEMPLATE_TABLES]
    if bad:
        raise ScenarioError([Problem(k, "not allowed in a --with file; expected only "
                                        + ", ".join(TEMPLATE_TABLES)) for k in bad], source=path)
    return data


def import_map(args: argparse.Namespace) -> int:
    from netsim.cli.outputs import check_output_file, writing
    from netsim.design.fibremap import FORMATS, import_fibre_map
    from netsim.design.tomlout import dumps
    from netsim.errors import ParameterError
    from netsim.scenario import load_data

    if args.format is not None and args.format not in FORMATS:
        raise ParameterError("--format", args.format, "one of " + ", ".join(FORMATS))
    try:
        snap_m = float(args.snap_m)
    except ValueError:
        raise ParameterError("--snap-m", args.snap_m, "a distance >= 0 in metres") from None
    if not snap_m >= 0 or snap_m == float("inf"):
        raise ParameterError("--snap-m", args.snap_m, "a distance >= 0 in metres")
    out = check_output_file("--out", args.out)
    if out.exists() and not args.force:
        raise ParameterError("--out", args.out, "a file that does not exist yet (or add --force to replace it)")
    template = _template(args.template)
    tables = import_fibre_map(args.map, fmt=args.format, links_path=args.links, snap_m=snap_m)
    network = dict(template.get("network", {}))
    if args.name:
        network["name"] = args.name
    network.setdefault("name", Path(args.map).stem)
    data = {"network": network, **{k: v for k, v in template.items() if k != "network"}, **tables}
    order = ["network", "costs", "defaults", "protocol", "encoding", "sites", "links", "demands"]
    data = {k: data[k] for k in order if k in data}
    scenario = load_data(data, source=str(out))
    text = dumps(data, f"{scenario.name}: imported by netsim import from {Path(args.map).name}.")
    with writing("--out", out):
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(text, encoding="utf-8")
    n_sites, n_links = len(scenario.candidate_sites), len(scenario.candidate_links)
    print(f"wrote {out}: {len(scenario.sites) + n_sites} sites ({n_sites} candidates), "
          f"{len(scenario.links) + n_links} links ({n_links} candidates or ending at one), "
          f"{len(scenario.demands)} demands", file=sys.stderr)
    return 0
