"""Speed of ``netsim check`` and ``netsim budget`` on the bundled scenarios.

``check_s_<scenario>`` and ``budget_s_<scenario>``: wall time of the whole command in a fresh
interpreter (imports included, as a user sees it), best of :data:`REPEATS`; target <= 2 s.
``baseline`` is the wall time of ``python -c "import netsim"`` measured in the same run, and
``ratio`` the command's time over it (how much the command adds to a bare start-up).

``delivery_time_s_<n>_hops``: one exact expected delivery time of an n-hop chain whose Bell
measurements can fail (the Markov chain of ``network.bounds.expected_delivery_rounds``, computed
once per demand by the budget), best of :data:`REPEATS`; target <= 0.5 s at 8 hops and <= 2 s at
the largest exact size. ``baseline`` is the sure-swap waiting time of the same chain
(inclusion-exclusion) measured in the same run.

``cutoff_estimate_s_<demand>``: one route estimate with the cut-off (the sampled timeline of
``network.cutoff``, its cache and the kept route estimates cleared, plus the mean delivered
state) for the routes of the bundled mesh with two or more hops, best of :data:`REPEATS`; target
<= 0.1 s. ``baseline``: the same route's estimate without a cut-off (closed forms), measured in
the same run.

``grid_estimate_s_cold`` and ``grid_estimate_s_warm``: the planning estimate ``netsim run`` adds
beside each demand (``engine.api._analytic``: the budget's demand rows with the cut-off's sampled
timelines, the widest path and the minimum cut) on the engine benchmark's 7x7 grid (24 demands,
``metro.py``), with the package's result caches emptied (``metro.clear_result_caches``: a user's
single run) and filled (the same network again in one process: the sampled timelines and the
route estimates kept), best of :data:`REPEATS`; target <= 0.25 s. ``baseline``: the same grid
without a cut-off (closed forms), caches emptied.
"""

from __future__ import annotations

import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent.parent
SCENARIOS = sorted((ROOT / "scenarios").glob("*.toml"))
REPEATS = 3
TARGET_S = 2.0


def _best_wall_s(argv: list[str]) -> float:
    best = float("inf")
    for _ in range(REPEATS):
        start = time.perf_counter()
        subprocess.run(argv, check=True, capture_output=True, cwd=ROOT)
        best = min(best, time.perf_counter() - start)
    return best


def command_times() -> list[dict[str, Any]]:
    """Wall time of ``netsim check`` and ``netsim budget`` per bundled scenario."""
    baseline = _best_wall_s([sys.executable, "-c", "import netsim"])
    records = []
    for path in SCENARIOS:
        for command in ("check", "budget"):
            seconds = _best_wall_s([sys.executable, "-m", "netsim", command, str(path)])
            records.append({"name": f"{command}_s_{path.stem}", "value": seconds, "unit": "s",
                            "target": TARGET_S, "higher_is_better": False,
                            "baseline": f"python -c 'import netsim' ({baseline:.3g} s)",
                            "ratio": seconds / baseline})
    return records


def _best_call_s(fn: Callable[[], Any]) -> float:
    best = float("inf")
    for _ in range(REPEATS):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def delivery_times() -> list[dict[str, Any]]:
    """Cost of the exact expected delivery time for chains with uncertain swaps."""
    from netsim.network.bounds import MAX_EXACT_SWAP_HOPS, expected_delivery_rounds, expected_rounds

    records = []
    for n, target in ((8, 0.5), (MAX_EXACT_SWAP_HOPS, 2.0)):
        q = [0.05 + 0.01 * i for i in range(n)]     # distinct hops: nothing cached or symmetric
        exact = _best_call_s(lambda: expected_delivery_rounds(q, [0.6] * (n - 1)))
        sure = _best_call_s(lambda: expected_rounds(q))
        records.append({"name": f"delivery_time_s_{n}_hops", "value": exact, "unit": "s", "target": target,
                        "higher_is_better": False,
                        "baseline": f"sure-swap waiting time of the same chain ({sure:.3g} s)",
                        "ratio": exact / sure if sure > 0 else float("inf")})
    return records


def cutoff_estimate_times() -> list[dict[str, Any]]:
    """Cost of the route estimate with a cut-off on the bundled mesh's multi-hop routes."""
    from netsim.network import build_graph, find_route, route_hops
    from netsim.network import cutoff as sampler
    from netsim.network import estimate as kept
    from netsim.network.estimate import estimate_hops
    from netsim.scenario import load

    scenario = load(ROOT / "scenarios" / "vellmoor-mesh.toml")
    graph = build_graph(scenario)
    records = []
    for demand in scenario.demands:
        hops = route_hops(graph, find_route(graph, demand.a, demand.b, scenario.protocol.routing))
        if len(hops) < 2:
            continue

        def with_cutoff() -> None:
            sampler._sample.cache_clear()
            kept._ESTIMATES.clear()
            estimate_hops(graph, hops)

        def closed_form() -> None:
            kept._ESTIMATES.clear()
            estimate_hops(graph, hops, cutoff_s=None)

        seconds = _best_call_s(with_cutoff)
        closed = _best_call_s(closed_form)
        records.append({"name": f"cutoff_estimate_s_{demand.index}_{len(hops)}_hops", "value": seconds,
                        "unit": "s", "target": 0.1, "higher_is_better": False,
                        "baseline": f"the same route without a cut-off ({closed:.3g} s)",
                        "ratio": seconds / closed if closed > 0 else float("inf")})
    return records


def grid_estimate_times() -> list[dict[str, Any]]:
    """Cost of the planning estimate beside each demand of a run on the benchmark grid."""
    sys.path.insert(0, str(ROOT / "tests" / "benchmarks"))
    from metro import clear_result_caches, grid_metro, metro_scenario

    from netsim.engine.api import _analytic
    from netsim.network import build_graph

    scenario = metro_scenario(grid_metro(7, 7, 24, 4, seed=1))
    closed = metro_scenario(grid_metro(7, 7, 24, 4, seed=1, cutoff_s=None))

    def cold(network: Any) -> None:
        clear_result_caches()
        _analytic(network, build_graph(network))

    cold_s = _best_call_s(lambda: cold(scenario))
    _analytic(scenario, build_graph(scenario))
    warm_s = _best_call_s(lambda: _analytic(scenario, build_graph(scenario)))
    closed_s = _best_call_s(lambda: cold(closed))
    return [{"name": name, "value": seconds, "unit": "s", "target": 0.25, "higher_is_better": False,
             "baseline": f"the same grid without a cut-off, closed forms ({closed_s:.3g} s)",
             "ratio": seconds / closed_s if closed_s > 0 else float("inf")}
            for name, seconds in (("grid_estimate_s_cold", cold_s), ("grid_estimate_s_warm", warm_s))]


BENCHMARKS: list[Callable[[], list[dict[str, Any]]]] = [command_times, delivery_times, cutoff_estimate_times,
                                                   grid_estimate_times]


if __name__ == "__main__":
    for record in command_times() + delivery_times():
        print(record)
