"""A cheap, deterministic stand-in point function for testing and benchmarking the sweep machinery.

It is *not* physics: its "metrics" are arbitrary functions of the scenario's link lengths and a
few draws from ``numpy.random.default_rng(seed)``, so that results depend on every parameter and
on the seed, exactly as engine results do. Tests use it to check resumption, determinism across
executors, failures, time-outs and dying workers without paying for simulations; the benchmark
uses its ``busy_s`` mode for equal CPU-bound points.
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["SyntheticPoint"]


@dataclass(frozen=True)
class SyntheticPoint:
    """A picklable point function with optional waiting, busy work, failure, hang and crash.

    Parameters
    ----------
    sleep_s : float
        Wall time to wait (in 10 ms steps, so time-outs interrupt it).
    busy_s : float
        CPU time to burn in a pure-Python loop (for parallel-efficiency measurements).
    fail_at_length_km, hang_at_length_km : float, optional
        Raise ``RuntimeError`` / wait forever (in short Python steps) when the first link's
        ``length_km`` equals this.
    block_at_length_km : float, optional
        Block in one long C call (``time.sleep(3600)``), which no in-thread time-out interrupts.
    die_at_length_km : float, optional
        Kill the worker process (``os._exit``) every time the first link's ``length_km`` equals this.
    die_once_marker : str, optional
        Kill the worker process (``os._exit``) the first time a point runs, creating this file
        so that the second attempt succeeds.
    """

    sleep_s: float = 0.0
    busy_s: float = 0.0
    fail_at_length_km: float | None = None
    hang_at_length_km: float | None = None
    block_at_length_km: float | None = None
    die_at_length_km: float | None = None
    die_once_marker: str | None = None

    def __call__(self, data: dict[str, Any], *, source: str | None, seed: int,
                 stop: Mapping[str, float | int]) -> dict[str, Any]:
        lengths = [float(link.get("length_km", 0.0)) for link in data.get("links", [])]
        first = lengths[0] if lengths else 0.0
        self._misbehave(first)
        self._work()
        rng = np.random.default_rng(seed)
        return _metrics(data, lengths, rng, stop)

    def _misbehave(self, first_km: float) -> None:
        if self.die_once_marker is not None:
            marker = Path(self.die_once_marker)
            if not marker.exists():
                marker.write_text("died once\n")
                os._exit(3)
        if self.die_at_length_km is not None and first_km == self.die_at_length_km:
            os._exit(4)
        if self.fail_at_length_km is not None and first_km == self.fail_at_length_km:
            raise RuntimeError(f"synthetic failure at length_km = {first_km:g}")
        while self.hang_at_length_km is not None and first_km == self.hang_at_length_km:
            time.sleep(0.01)
        if self.block_at_length_km is not None and first_km == self.block_at_length_km:
            time.sleep(3600.0)

    def _work(self) -> None:
        end = time.perf_counter() + self.sleep_s
        while time.perf_counter() < end:
            time.sleep(min(0.01, max(0.0, end - time.perf_counter())))
        end_cpu = time.process_time() + self.busy_s
        acc = 0.0
        while time.process_time() < end_cpu:
            for i in range(2000):
                acc += math.sqrt(i)


def _metrics(data: dict[str, Any], lengths: list[float], rng: np.random.Generator,
             stop: Mapping[str, float | int]) -> dict[str, Any]:
    total = sum(lengths)
    scale = float(stop.get("pairs", 100))
    links = [{"name": "-".join(map(str, link.get("ends", ["?", "?"]))),
              "transmissivity": 10 ** (-0.025 * length), "attempts": int(rng.integers(1, 10_000))}
             for link, length in zip(data.get("links", []), lengths)]
    demands = []
    for demand in data.get("demands", []):
        rate = math.exp(-0.05 * total) * (1.0 + 0.1 * rng.standard_normal())
        demands.append({"name": "-".join(map(str, demand.get("users", ["?", "?"]))),
                        "rate_per_s": rate, "rate_ci95": [rate * 0.9, rate * 1.1],
                        "fidelity_mean": float(rng.uniform(0.5, 1.0)), "delivered_pairs": scale,
                        "label": "synthetic"})
    return {"demands": demands, "links": links, "simulated_time_s": float(rng.exponential(1.0))}
