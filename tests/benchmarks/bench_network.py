"""Speed of ``netsim check`` and ``netsim budget`` on the bundled scenarios.

``check_s_<scenario>`` and ``budget_s_<scenario>``: wall time of the whole command in a fresh
interpreter (imports included, as a user sees it), best of :data:`REPEATS`; target <= 2 s.
``baseline`` is the wall time of ``python -c "import netsim"`` measured in the same run, and
``ratio`` the command's time over it (how much the command adds to a bare start-up).
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


BENCHMARKS: list[Callable[[], list[dict[str, Any]]]] = [command_times]


if __name__ == "__main__":
    for record in command_times():
        print(record)
