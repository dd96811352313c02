"""Shared helpers of the sweep tests (no tests here): a small invented scenario and store readers."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from netsim.sweep.store import open_store

#: A three-site chain in the invented town of Farrowmere (demo data only).
SCENARIO_TOML = """\
[network]
name = "Farrowmere test chain"

[[sites]]
name = "Farrowmere Lab"
role = "user"

[[sites]]
name = "Gull's Reach Relay"
role = "repeater"

[[sites]]
name = "Hobb Quay"
role = "user"

[[links]]
ends = ["Farrowmere Lab", "Gull's Reach Relay"]
length_km = 10.0

[[links]]
ends = ["Gull's Reach Relay", "Hobb Quay"]
length_km = 12.0

[[demands]]
users = ["Farrowmere Lab", "Hobb Quay"]
pairs = 50
"""


def write_scenario(directory: Path, sweep: str = "", name: str = "farrowmere.toml",
                   base: str = SCENARIO_TOML) -> Path:
    """Write the test scenario (plus a ``[sweep]`` section given as TOML text) and return its path."""
    path = directory / name
    path.write_text(base + ("\n" + sweep if sweep else ""), encoding="utf-8")
    return path


def metric_map(store_path: Path) -> dict[tuple[str, str, str, str], Any]:
    """All metric values of a store keyed by (point_id, kind, name, metric)."""
    with open_store(store_path) as store:
        return {(m["point_id"], m["kind"], m["name"], m["metric"]): m["value"] for m in store.metrics()}


def point_map(store_path: Path) -> dict[str, dict[str, Any]]:
    """All point rows of a store keyed by point_id."""
    with open_store(store_path) as store:
        return {p["point_id"]: p for p in store.points()}
