"""Seeded synthetic metro networks for benchmarks and scale tests.

``grid_metro(rows, cols, demands, slots, seed)`` and ``geometric_metro(sites, demands, slots,
seed)`` return a scenario mapping (the parsed-TOML form :func:`netsim.scenario.load_data` takes),
and :func:`metro_scenario` validates it. Every repeater exchange has one end-user site on a short
access fibre; demands join distinct random user pairs. Places are invented ("X3-4", "U3-4").
Same arguments, same network: anyone can rebuild the networks a benchmark figure was measured on.

Hardware (demo values of the same kind as the bundled scenarios; see their comments for the
sources): colour-centre memories (T1 100 s, T2 1 s, emission efficiency 0.2, gate error 0.02,
5 us preparation), single-photon heralding with a midpoint station (alpha 0.05), 0.25 dB/km
deployed fibre with 1 dB of connectors per link (common practice), detectors 0.9 efficient with
1e-6 dark counts per window (common practice), a 0.5 s cut-off (half of T2), least-loss routing,
fair scheduling. ``physics`` adds site keys (e.g. ``{"communication_qubits": 1}``) to every site.

Run as a script to write one of them as TOML::

    python tests/benchmarks/metro.py grid 7 7 --demands 24 --slots 4 --seed 1 > grid7.toml
"""

from __future__ import annotations

import argparse
import math
import sys
from typing import Any

import numpy as np

__all__ = ["clear_result_caches", "geometric_metro", "grid_metro", "metro_scenario", "to_toml"]

ACCESS_KM = 2.0  #: access fibre from a user site to its exchange

_SITE_DEFAULTS: dict[str, Any] = {
    "t1_s": 100.0, "t2_s": 1.0, "emission_efficiency": 0.2, "bsm_success_probability": 1.0,
    "gate_error": 0.02, "attempt_prep_time_s": 5e-6,
}
_LINK_DEFAULTS: dict[str, Any] = {
    "attenuation_db_per_km": 0.25, "extra_loss_db": 1.0, "scheme": "single_photon",
    "bright_state_population": 0.05, "midpoint_fraction": 0.5, "modes": 1,
    "detector_efficiency": 0.9, "dark_count_probability": 1e-6,
}


def _base(name: str, cutoff_s: float | None, physics: dict[str, Any] | None) -> dict[str, Any]:
    protocol: dict[str, Any] = {"routing": "least_loss", "swap_policy": "asap", "scheduling": "fair",
                                "purification": "none"}
    if cutoff_s is not None:
        protocol["cutoff_s"] = cutoff_s
    return {"network": {"name": name},
            "defaults": {"site": {**_SITE_DEFAULTS, **(physics or {})}, "link": dict(_LINK_DEFAULTS)},
            "sites": [], "links": [], "demands": [], "protocol": protocol}


def _add_users_and_demands(data: dict[str, Any], exchanges: list[tuple[str, float, float]], demands: int,
                           slots: int, pairs: int, rng: np.random.Generator) -> None:
    users = []
    for name, x, y in exchanges:
        user = "U" + name[1:]
        users.append(user)
        data["sites"].append({"name": user, "role": "user", "x_km": x + ACCESS_KM / math.sqrt(2),
                              "y_km": y + ACCESS_KM / math.sqrt(2), "memory_slots": slots})
        data["links"].append({"ends": [user, name], "length_km": ACCESS_KM})
    max_pairs = len(users) * (len(users) - 1) // 2
    if demands > max_pairs:
        raise ValueError(f"demands = {demands}: at most {max_pairs} distinct user pairs in this network")
    chosen: set[tuple[int, int]] = set()
    while len(chosen) < demands:
        a, b = sorted(int(v) for v in rng.choice(len(users), size=2, replace=False))
        if (a, b) not in chosen:
            chosen.add((a, b))
            data["demands"].append({"users": [users[a], users[b]], "pairs": pairs})


def grid_metro(rows: int, cols: int, demands: int, slots: int = 4, seed: int = 0, *, spacing_km: float = 5.0,
               pairs: int = 200, cutoff_s: float | None = 0.5,
               physics: dict[str, Any] | None = None) -> dict[str, Any]:
    """A ``rows`` x ``cols`` grid of repeater exchanges ``spacing_km`` apart (fibre length 1.3 x the
    spacing), each with a user site; ``demands`` random user pairs of ``pairs`` pairs each."""
    rng = np.random.default_rng(seed)
    data = _base(f"synthetic grid {rows}x{cols}", cutoff_s, physics)
    exchanges = [(f"X{r}-{c}", c * spacing_km, r * spacing_km) for r in range(rows) for c in range(cols)]
    for name, x, y in exchanges:
        data["sites"].append({"name": name, "role": "repeater", "x_km": x, "y_km": y, "memory_slots": slots})
    for r in range(rows):
        for c in range(cols):
            if c + 1 < cols:
                data["links"].append({"ends": [f"X{r}-{c}", f"X{r}-{c + 1}"], "length_km": 1.3 * spacing_km})
            if r + 1 < rows:
                data["links"].append({"ends": [f"X{r}-{c}", f"X{r + 1}-{c}"], "length_km": 1.3 * spacing_km})
    _add_users_and_demands(data, exchanges, demands, slots, pairs, rng)
    return data


def geometric_metro(sites: int, demands: int, slots: int = 4, seed: int = 0, *, area_km: float = 30.0,
                    radius_km: float = 9.0, pairs: int = 200, cutoff_s: float | None = 0.5,
                    physics: dict[str, Any] | None = None) -> dict[str, Any]:
    """A random geometric metro: ``sites`` exchanges uniform in an ``area_km`` square, joined when
    closer than ``radius_km`` (fibre 1.3 x the distance); isolated parts are joined to their
    nearest neighbour so the network is connected. Each exchange has a user site."""
    rng = np.random.default_rng(seed)
    data = _base(f"synthetic geometric {sites}", cutoff_s, physics)
    xy = rng.uniform(0.0, area_km, size=(sites, 2))
    exchanges = [(f"X{k}", float(x), float(y)) for k, (x, y) in enumerate(xy)]
    for name, x, y in exchanges:
        data["sites"].append({"name": name, "role": "repeater", "x_km": x, "y_km": y, "memory_slots": slots})
    dist = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    edges = {(i, j) for i in range(sites) for j in range(i + 1, sites) if dist[i, j] <= radius_km}
    parent = list(range(sites))

    def root(k: int) -> int:
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k

    for i, j in edges:
        parent[root(i)] = root(j)
    while len({root(k) for k in range(sites)}) > 1:  # join the nearest pair of different parts
        best = min(((dist[i, j], i, j) for i in range(sites) for j in range(i + 1, sites) if root(i) != root(j)))
        edges.add((best[1], best[2]))
        parent[root(best[1])] = root(best[2])
    for i, j in sorted(edges):
        data["links"].append({"ends": [f"X{i}", f"X{j}"], "length_km": round(1.3 * max(float(dist[i, j]), 0.1), 3)})
    _add_users_and_demands(data, exchanges, demands, slots, pairs, rng)
    return data


def clear_result_caches() -> None:
    """Empty the package's in-process caches of computed results, so that a timed run pays for
    everything a fresh ``netsim run`` process computes: the cut-off timeline samples, the route
    estimates, the light paths' physics, the channel figures and the capacity maximisations. A
    benchmark that times the same network twice in one process would otherwise time the second
    run without them."""
    from netsim.network import channel, cutoff, estimate, graph
    from netsim.qinfo import capacity

    cutoff._sample.cache_clear()
    estimate._ESTIMATES.clear()
    graph._PHYSICS_CACHE.clear()
    for cached in (channel.encoding_holevo_bits, channel.link_capacity_bits, channel.werner_eof_ebits,
                   capacity._capacity_cached):
        cached.cache_clear()


def metro_scenario(data: dict[str, Any]) -> Any:
    """Validate a generated mapping into a :class:`netsim.scenario.model.Scenario`."""
    from netsim.scenario import load_data

    return load_data(data, source=data["network"]["name"])


def to_toml(data: dict[str, Any]) -> str:
    """The mapping as a TOML scenario file (flat tables and arrays of tables only)."""

    def value(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    out = []
    for key in ("network", "protocol"):
        out.append(f"[{key}]")
        out += [f"{k} = {value(v)}" for k, v in data[key].items()]
        out.append("")
    for key in ("site", "link"):
        out.append(f"[defaults.{key}]")
        out += [f"{k} = {value(v)}" for k, v in data["defaults"][key].items()]
        out.append("")
    for table in ("sites", "links", "demands"):
        for row in data[table]:
            out.append(f"[[{table}]]")
            out += [f"{k} = {value(v)}" for k, v in row.items()]
            out.append("")
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write a synthetic metro scenario as TOML.")
    parser.add_argument("kind", choices=["grid", "geometric"])
    parser.add_argument("size", type=int, nargs="+", help="grid: ROWS COLS; geometric: SITES")
    parser.add_argument("--demands", type=int, default=24)
    parser.add_argument("--slots", type=int, default=4)
    parser.add_argument("--pairs", type=int, default=200)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args(argv)
    if args.kind == "grid":
        if len(args.size) != 2:
            parser.error("grid takes ROWS COLS")
        data = grid_metro(args.size[0], args.size[1], args.demands, args.slots, args.seed, pairs=args.pairs)
    else:
        data = geometric_metro(args.size[0], args.demands, args.slots, args.seed, pairs=args.pairs)
    sys.stdout.write(to_toml(data))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
