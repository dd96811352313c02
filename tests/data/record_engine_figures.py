"""Record the event engine's figures on fixed networks, for the before/after comparison of a
change to the engine's internals (``tests/test_engine_node_physics_reference.py``).

    python tests/data/record_engine_figures.py > tests/data/engine_node_physics_figures.json

Each case is a network (a bundled scenario's data as it is when recorded, or a seeded generated
grid), a pairs rule and a seed; the file keeps the scenario data with every hardware value of
every site and link written out as then in force, so later changes of built-in defaults or of the
bundled files do not move the comparison. Recorded figures per demand: rate and mean fidelity
with their 95 % intervals and the engine; per site the memory occupancy; per link the
utilisation.
"""

from __future__ import annotations

import dataclasses
import json
import sys
import tomllib
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "benchmarks"))

from metro import grid_metro  # noqa: E402

from netsim.engine import run  # noqa: E402
from netsim.scenario import load_data  # noqa: E402

#: Fields of a loaded site or link that are not hardware values (everything else is pinned).
NOT_HARDWARE = {"name", "role", "x_km", "y_km", "profile", "candidate", "cost", "index", "a", "b", "ends"}

#: name -> (scenario data, pairs per demand)
CASES: dict[str, tuple[dict[str, Any], int]] = {
    "chain3": (tomllib.loads((ROOT / "scenarios" / "chain3.toml").read_text()), 1000),
    "chain3-projected": (tomllib.loads((ROOT / "scenarios" / "chain3-projected.toml").read_text()), 1000),
    "vellmoor-star": (tomllib.loads((ROOT / "scenarios" / "vellmoor-star.toml").read_text()), 400),
    "vellmoor-mesh": (tomllib.loads((ROOT / "scenarios" / "vellmoor-mesh.toml").read_text()), 200),
    "grid-4x4-8-demands-slots-2-seed-3": (grid_metro(4, 4, 8, 2, seed=3), 300),
    "grid-7x7-24-demands-slots-4-seed-1": (grid_metro(7, 7, 24, 4, seed=1), 200),
}
SEED = 21


def pinned(data: dict[str, Any]) -> dict[str, Any]:
    """``data`` with every hardware value of every site and link written out as loaded now (so
    neither a profile nor a built-in default is left to resolve)."""
    scenario = load_data(data, source="record")
    sites = {s.name: s for s in scenario.sites}
    links = {(link.a, link.b): link for link in scenario.links}
    out = json.loads(json.dumps(data))
    for site in out.get("sites", []):
        loaded = sites[site["name"]]
        for f in dataclasses.fields(loaded):
            if f.name not in NOT_HARDWARE:
                site.setdefault(f.name, getattr(loaded, f.name))
    for link in out.get("links", []):
        ends = tuple(link["ends"]) if "ends" in link else (link["a"], link["b"])
        loaded = links.get(ends) or links[ends[::-1]]
        for f in dataclasses.fields(loaded):
            if f.name not in NOT_HARDWARE:
                link.setdefault(f.name, getattr(loaded, f.name))
    return out


def record() -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, (data, pairs) in CASES.items():
        data = pinned(data)
        result = run(load_data(data, source=name), pairs=pairs, seed=SEED, ensembles=False)
        out[name] = {
            "pairs": pairs, "seed": SEED, "scenario": data,
            "demands": {row["demand"]: {k: row[k] for k in ("engine", "hops", "delivered_pairs", "rate_per_s",
                                                             "rate_ci95", "fidelity_mean", "fidelity_ci95")}
                        for row in result.demands},
            "sites": {row["site"]: row["memory_occupancy"] for row in result.sites},
            "links": {row["link"]: row["utilisation"] for row in result.links},
        }
        print(name, "done", file=sys.stderr)
    return out


if __name__ == "__main__":
    print(json.dumps(record(), separators=(",", ":")))
