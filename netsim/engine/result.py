"""What a run returns: per-demand figures with intervals, per-link and per-site statistics.

Definitions (all per demand):

- ``rate_per_s`` = delivered pairs / simulated time; ``rate_ci95`` from the spread of the
  inter-delivery times (normal interval on their mean, inverted).
- ``fidelity_mean`` to Phi+ with ``fidelity_ci95``; ``eof_mean`` (Wootters, per pair) with
  ``eof_ci95``; ``eof_of_mean_state`` (of the average delivered state).
- ``ebits_per_s`` = rate x ``eof_mean`` (entanglement of formation delivered per second);
  ``coherent_information_mean`` (hashing lower bound on distillable entanglement per pair) and
  ``distillable_ebits_per_s`` = rate x coherent information of the average state. One-way
  hashing may run from either user: each figure is the larger of S(B) - S(AB) (messages from A
  to B) and S(A) - S(AB) (from B to A), the direction chosen once for the whole stream.
- ``key_fraction`` of the average state (entanglement-based BB84: errors are estimated over the
  whole stream) and ``key_rate_per_s`` = rate x key fraction.
- The analytic figures of :func:`netsim.network.budget` sit beside them (``expected_*``,
  ``*_bound_bits_per_s``).
- Requirements: a pair is *useful* when its own delivered fidelity reaches the demand's
  ``min_fidelity``. ``useful_pairs``, ``useful_fraction`` (useful / delivered),
  ``useful_rate_per_s`` with ``useful_rate_ci95`` (from the times between useful deliveries;
  [0, 3/t] when none was useful); ``meets_fidelity`` (mean fidelity >= ``min_fidelity``) and
  ``meets_rate`` (useful rate >= ``min_rate_per_s``), None where no requirement is set.
- ``route``: the demand's route as site names, passive switches included.

Per link: attempt rounds, successes (heralded pairs), ``utilisation`` = time spent in attempt
rounds / simulated time, summed over the demands routed over the link (each demand has its own
memory slots and modes, so it can exceed 1). Per site: ``memory_occupancy`` = qubit-seconds
stored / (simulated time x memory slots); ``slots_peak`` and ``slots_p99`` the most and the 99th
percentile (over time) of slots reserved for demands' cycles, ``waited_share`` the share of
reservation requests not granted at once, ``slot_loads`` what each request met (slots in use +
queued + its own need; {load: count}).

Every demand, link and site row has a ``profile`` field: the hardware profiles its figures rest
on (the route's sites and links for a demand; the link and its two end sites for a link), with
``built-in`` for a site or link that names none (:func:`netsim.scenario.profiles.profile_label`).
"""

from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from netsim.table import Column, Table

__all__ = ["DEMAND_COLUMNS", "LINK_COLUMNS", "SITE_COLUMNS", "RunResult"]

DEMAND_COLUMNS: tuple[Column, ...] = (
    Column("demand", "demand"), Column("profile", "profile"), Column("engine", "engine"), Column("delivered_pairs", "pairs"),
    Column("simulated_time_s", "sim. time (s)"), Column("rate_per_s", "rate (pairs/s)", ci_key="rate_ci95"),
    Column("rate_ci95", "rate 95% CI (pairs/s)", ci_key="rate_ci95"), Column("expected_rate_per_s", "expected rate (pairs/s)"),
    Column("useful_rate_per_s", "useful rate (pairs/s)", ci_key="useful_rate_ci95"),
    Column("useful_rate_ci95", "useful rate 95% CI (pairs/s)", ci_key="useful_rate_ci95"),
    Column("useful_fraction", "useful share", 3), Column("min_rate_per_s", "min rate (pairs/s)"),
    Column("meets_rate", "meets rate"),
    Column("fidelity_mean", "fidelity", ci_key="fidelity_ci95"),
    Column("fidelity_ci95", "fidelity 95% CI", ci_key="fidelity_ci95"),
    Column("min_fidelity", "min fidelity"), Column("meets_fidelity", "meets fidelity"),
    Column("eof_mean", "EoF (ebit/pair)"), Column("ebits_per_s", "EoF rate (ebit/s)"),
    Column("key_rate_per_s", "key rate (bit/s)"), Column("route_bound_bits_per_s", "route bound (ebit/s)"),
    Column("ensemble_chi_bits_per_qubit", "Holevo information, simulated (bit/qubit)"),
)
LINK_COLUMNS: tuple[Column, ...] = (
    Column("link", "link"), Column("profile", "profile"), Column("attempts", "attempt rounds"), Column("successes", "pairs heralded"),
    Column("utilisation", "utilisation"), Column("discarded", "cut-off discards"),
)
SITE_COLUMNS: tuple[Column, ...] = (
    Column("site", "site"), Column("profile", "profile"), Column("memory_slots", "slots"),
    Column("memory_occupancy", "occupancy"),
    Column("slots_peak", "peak slots reserved"), Column("slots_p99", "99th pct slots reserved"),
    Column("waited_share", "requests that waited"), Column("swap_failures", "failed swaps"),
)


def _clean(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and callable(value.item):
        return _clean(value.item())
    return value


@dataclass
class RunResult:
    """The outcome of :func:`netsim.engine.run`.

    Attributes
    ----------
    scenario : str
        Scenario name; ``slug`` names the default output directory.
    seed : int
    stop : dict
        The stop rule used (``pairs``, ``time_s`` or ``precision``).
    demands, links, sites : list of dict
        Rows as described in the module docstring.
    interrupted : bool
        True when Ctrl-C stopped the run; the rows hold what was delivered until then.
    """

    scenario: str
    slug: str
    seed: int
    stop: dict[str, Any]
    demands: list[dict[str, Any]]
    links: list[dict[str, Any]]
    sites: list[dict[str, Any]]
    interrupted: bool = False
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (NaN and infinities become ``None``)."""
        return _clean({"scenario": self.scenario, "seed": self.seed, "stop": self.stop,
                       "interrupted": self.interrupted, "demands": self.demands,
                       "links": self.links, "sites": self.sites, "notes": self.notes})

    def demand(self, name: str) -> dict[str, Any]:
        """The row of the demand called ``name`` (``"A-B"``)."""
        for row in self.demands:
            if row["demand"] == name:
                return row
        raise KeyError(name)

    def tables(self) -> list[Table]:
        """Per-demand, per-link and per-site tables (units in the headers)."""
        flag = " (interrupted: partial results)" if self.interrupted else ""
        return [Table(f"{self.scenario}: demands{flag}", DEMAND_COLUMNS, list(self.demands), list(self.notes)),
                Table(f"{self.scenario}: links", LINK_COLUMNS, list(self.links)),
                Table(f"{self.scenario}: sites", SITE_COLUMNS, list(self.sites))]

    def write(self, directory: str | Path) -> list[Path]:
        """Write ``run.json`` (everything) and ``run.csv`` (one row per demand) to ``directory``."""
        out = Path(directory)
        out.mkdir(parents=True, exist_ok=True)
        data = self.to_dict()
        json_path, csv_path = out / "run.json", out / "run.csv"
        json_path.write_text(json.dumps(data, indent=2) + "\n", encoding="utf-8")
        keys: list[str] = []
        for row in data["demands"]:
            keys += [k for k in row if k not in keys and not isinstance(row[k], dict)]
        with csv_path.open("w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh, lineterminator="\n")
            writer.writerow(keys)
            for row in data["demands"]:
                writer.writerow([_csv_cell(row.get(k)) for k in keys])
        return [json_path, csv_path]


def _csv_cell(value: Any) -> Any:
    if value is None:
        return ""
    if isinstance(value, list):
        return json.dumps(value)
    return value
