"""The proposal tables: per-link capacity and per-demand delivery, from budget and run rows.

Inputs are plain row dicts: the budget's ``links``/``demands`` rows (analytic numbers and
bounds) and, when the engine ran, the run result's per-link and per-demand records (simulated
numbers with their 95 % intervals). Rows are matched by link name (``a-b``) and by user pair
(either order). Nothing is computed here beyond ratios, interval statistics and joins.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from netsim.report.table import Column, Table
from netsim.report.units import binomial_ci95, poisson_rate_ci95

__all__ = [
    "DEMAND_COLUMNS",
    "LINK_COLUMNS",
    "demand_rows",
    "demand_table",
    "link_rows",
    "link_table",
    "pair_key",
    "pick",
]

LINK_COLUMNS = (
    Column("link", "link"),
    Column("profile", "hardware profile"),
    Column("length_km", "length (km)", 3),
    Column("loss_db", "loss budget (dB)", 3),
    Column("transmissivity", "transmissivity", 3),
    Column("scheme", "scheme"),
    Column("attempt_rate_per_s", "attempt rate (1/s)", 3),
    Column("modes", "modes"),
    Column("success_probability", "success prob. per mode", 3),
    Column("rate_analytic_per_s", "pair rate, analytic (pairs/s)", 4),
    Column("rate_sim_per_s", "pair rate, simulated (pairs/s)", ci_key="rate_sim_ci95"),
    Column("rate_sim_ci95", "simulated 95% CI (pairs/s)", ci_key="rate_sim_ci95"),
    Column("fidelity", "link fidelity", 4),
    Column("eof", "EoF (ebit/pair)", 3),
    Column("plob_bits_per_use", "repeaterless bound (ebit/use)", 3),
    Column("plob_bits_per_s", "repeaterless bound (ebit/s)", 3),
    Column("bound_bits_per_s", "link bound as heralded (ebit/s)", 3),
    Column("holevo_bits", "Holevo information (bit/qubit)", 3),
    Column("holevo_capacity_bits", "Holevo capacity (bit/use)", 3),
    Column("key_rate_per_s", "key rate (bit/s)", 3),
)

DEMAND_COLUMNS = (
    Column("demand", "demand"),
    Column("route", "route"),
    Column("profile", "hardware profile"),
    Column("hops", "hops"),
    Column("rate_per_s", "delivered rate (pairs/s)", ci_key="rate_ci95"),
    Column("rate_ci95", "rate 95% CI (pairs/s)", ci_key="rate_ci95"),
    Column("fidelity_mean", "fidelity", ci_key="fidelity_ci95"),
    Column("fidelity_ci95", "fidelity 95% CI", ci_key="fidelity_ci95"),
    Column("min_fidelity", "min fidelity"),
    Column("meets_fidelity", "meets fidelity"),
    Column("useful_rate_per_s", "useful rate (pairs/s)", ci_key="useful_rate_ci95"),
    Column("useful_rate_ci95", "useful rate 95% CI (pairs/s)", ci_key="useful_rate_ci95"),
    Column("useful_fraction", "useful share", 3),
    Column("min_rate_per_s", "min rate (pairs/s)"),
    Column("meets_rate", "meets rate"),
    Column("eof_mean", "EoF (ebit/pair)", 3),
    Column("ebits_per_s", "ebits/s (ebit/s)", 3),
    Column("key_rate_per_s", "key rate (bit/s)", 3),
    Column("expected_rate_per_s", "expected rate, analytic (pairs/s)", 3),
    Column("expected_fidelity", "expected fidelity, analytic", 3),
    Column("bound_single_path_per_s", "single-path bound (ebit/s)", 3),
    Column("bound_multipath_per_s", "multipath bound (ebit/s)", 3),
    Column("rate_to_bound", "delivered rate / single-path bound", 3),
)

#: Alternative spellings of the same quantity in the rows of the lower layers; first one found.
_ALIASES: dict[str, tuple[str, ...]] = {
    "link": ("link", "name"),
    "success_probability": ("success_probability",),
    "rate_analytic_per_s": ("rate_analytic_per_s", "rate_per_s", "pair_rate_per_s",
                            "elementary_rate_per_s"),
    "fidelity": ("fidelity", "link_fidelity"),
    "eof": ("eof", "entanglement_of_formation", "eof_ebits"),
    "holevo_bits": ("holevo_bits", "holevo_bits_per_qubit", "holevo_information_bits",
                    "chi_bits"),
    "holevo_capacity_bits": ("holevo_capacity_bits", "holevo_capacity_bits_per_use"),
    "key_rate_per_s": ("key_rate_per_s", "secret_key_rate_per_s", "key_rate_analytic_per_s"),
    "demand": ("demand", "name"),
    "bound_single_path_per_s": ("bound_single_path_per_s", "single_path_bound_bits_per_s",
                                "widest_path_bits_per_s", "single_path_bits_per_s"),
    "bound_multipath_per_s": ("bound_multipath_per_s", "multipath_bound_bits_per_s",
                              "min_cut_bits_per_s", "multipath_bits_per_s"),
}


def pick(row: Mapping[str, Any] | None, key: str) -> Any:
    """The value of ``key`` in ``row`` under its first known spelling, or ``None``."""
    if not row:
        return None
    for name in _ALIASES.get(key, (key,)):
        if name in row and row[name] is not None:
            return row[name]
    return None


def pair_key(name_or_pair: Any) -> frozenset[str]:
    """An order-free key for a user pair or link: ``"A-B"``, ``["A", "B"]`` or ``("A", "B")``."""
    if isinstance(name_or_pair, str):
        return frozenset(name_or_pair.split("-", 1))
    return frozenset(str(n) for n in name_or_pair)


def _row_pair(row: Mapping[str, Any], name_key: str) -> frozenset[str]:
    for key in ("users", "ends"):
        if key in row:
            return pair_key(row[key])
    if "a" in row and "b" in row:
        return pair_key((row["a"], row["b"]))
    return pair_key(str(pick(row, name_key)))


class _Index:
    """Rows looked up by exact name first, then by their (unordered) pair of end names."""

    def __init__(self, rows: Iterable[Mapping[str, Any]] | None, name_key: str) -> None:
        self.name_key = name_key
        self.rows = list(rows or ())
        self.by_name = {str(pick(r, name_key)): r for r in self.rows if pick(r, name_key) is not None}
        self.by_pair = {_row_pair(r, name_key): r for r in self.rows}

    def get(self, row: Mapping[str, Any]) -> Mapping[str, Any] | None:
        name = pick(row, self.name_key)
        if name is not None and str(name) in self.by_name:
            return self.by_name[str(name)]
        return self.by_pair.get(_row_pair(row, self.name_key))


def _simulated_link_rate(run_link: Mapping[str, Any] | None, budget: Mapping[str, Any],
                         time_s: float | None) -> tuple[float | None, list[float] | None]:
    """Simulated elementary-pair rate while attempting, with its 95 % interval.

    In order of preference: the engine's own ``rate_per_s``; the observed success fraction per
    attempt round over the link's attempt period (Clopper-Pearson interval), which estimates
    the same quantity as the analytic round-success / period; successes over simulated time.
    """
    if not run_link:
        return None, None
    if run_link.get("rate_per_s") is not None:
        return float(run_link["rate_per_s"]), run_link.get("rate_ci95")
    attempts, period = run_link.get("attempts"), budget.get("attempt_period_s")
    if attempts and period and run_link.get("successes") is not None:
        k, n = int(run_link["successes"]), int(attempts)
        low, high = binomial_ci95(k, n)
        return k / n / float(period), [low / float(period), high / float(period)]
    successes, time_s = run_link.get("successes"), run_link.get("simulated_time_s", time_s)
    if successes is None or not time_s:
        return None, None
    return float(successes) / float(time_s), list(poisson_rate_ci95(int(successes), float(time_s)))


def link_rows(budget_links: Sequence[Mapping[str, Any]], run_links: Sequence[Mapping[str, Any]] | None = None,
              simulated_time_s: float | None = None) -> list[dict[str, Any]]:
    """One row per budget link with the simulated rate beside the analytic one (if run)."""
    simulated = _Index(run_links, "link")
    rows = []
    for budget in budget_links:
        row = {c.key: pick(budget, c.key) for c in LINK_COLUMNS}
        period = budget.get("attempt_period_s")
        row["attempt_rate_per_s"] = 1.0 / float(period) if period else row["attempt_rate_per_s"]
        row["rate_sim_per_s"], row["rate_sim_ci95"] = _simulated_link_rate(
            simulated.get(budget), budget, simulated_time_s)
        if row["link"] is None:
            row["link"] = "-".join(sorted(_row_pair(budget, "link")))
        rows.append(row)
    return rows


def _route_text(route: Any) -> str | None:
    if route is None:
        return None
    return route if isinstance(route, str) else " > ".join(str(s) for s in route)


def _hops(budget: Mapping[str, Any], run: Mapping[str, Any]) -> Any:
    hops = pick(run, "hops") if run else None
    hops = hops if hops is not None else pick(budget, "hops")
    if isinstance(hops, (list, tuple)):
        return len(hops)
    return hops


def _ratio(value: Any, bound: Any) -> float | None:
    if value is None or bound is None or not math.isfinite(float(bound)) or float(bound) <= 0:
        return None
    return float(value) / float(bound)


def _demand_row(budget: Mapping[str, Any], run: Mapping[str, Any]) -> dict[str, Any]:
    row: dict[str, Any] = {c.key: pick(run, c.key) for c in DEMAND_COLUMNS}
    for key in ("demand", "profile", "bound_single_path_per_s", "bound_multipath_per_s",
                "expected_rate_per_s", "expected_fidelity"):
        row[key] = pick(budget, key) if pick(budget, key) is not None else row[key]
    for key in ("min_fidelity", "min_rate_per_s"):
        row[key] = pick(budget, key) if pick(budget, key) is not None else row[key]
    if not run:  # not simulated: the verdicts of the closed-form estimate (noted under the table)
        row["meets_fidelity"], row["meets_rate"] = budget.get("meets_fidelity"), budget.get("meets_rate")
    row["route"] = _route_text(pick(run, "route") or pick(budget, "route"))  # switches shown
    row["hops"] = _hops(budget, run)
    row["rate_to_bound"] = _ratio(row["rate_per_s"], row["bound_single_path_per_s"])
    return row


def demand_rows(budget_demands: Sequence[Mapping[str, Any]],
                run_demands: Sequence[Mapping[str, Any]] | None = None) -> list[dict[str, Any]]:
    """One row per budget demand, joined with the run's record of the same user pair."""
    simulated = _Index(run_demands, "demand")
    rows = [_demand_row(b, simulated.get(b) or {}) for b in budget_demands]
    for row, budget in zip(rows, budget_demands):
        if row["demand"] is None:
            row["demand"] = "-".join(sorted(_row_pair(budget, "demand")))
    return rows


def link_table(rows: list[dict[str, Any]], scenario_name: str) -> Table:
    """The per-link capacity table (columns :data:`LINK_COLUMNS`)."""
    notes = [("Repeaterless bound -log2(1 - eta) per channel use (Pirandola et al., Nat. Commun. 8, "
             "15043, 2017); per second at the link's mode rate.")]
    if any(r.get("rate_sim_per_s") is not None for r in rows):
        notes.append("Simulated pair rate: heralded successes per attempt round over the attempt "
                     "period (exact Clopper-Pearson 95% interval), comparable with the analytic rate.")
        if any(r.get("rate_sim_per_s") is None for r in rows):
            notes.append("'-' in the simulated columns: no demand's route uses the link.")
    return Table(f"Link capacity: {scenario_name}", LINK_COLUMNS, [*rows], notes)


def demand_table(rows: list[dict[str, Any]], scenario_name: str) -> Table:
    """The per-demand table (columns :data:`DEMAND_COLUMNS`)."""
    notes = [("Bounds after Pirandola, Commun. Phys. 2, 51 (2019): single path = widest path, "
             "multipath = minimum cut of link capacities."),
             ("Delivered rate / single-path bound compares pairs/s with ebit/s; above 1 for "
             "pairs too noisy to count as ebits, or on long links heralded at a midpoint "
             "station, which the whole-fibre bound treats as one channel.")]
    notes.append("Useful pairs: those whose own fidelity reaches the demand's min fidelity; meets "
                 "fidelity: mean fidelity >= min fidelity; meets rate: useful rate >= min rate ('-': "
                 "no rate requirement).")
    if rows and all(r.get("rate_per_s") is None for r in rows):
        notes.append("Not simulated, so the delivered columns are empty ('-') and the verdicts are "
                     "those of the closed-form estimate (memory decay included): report the scenario "
                     "with --simulate, or a run.json from netsim run, to fill them.")
    return Table(f"Demands: {scenario_name}", DEMAND_COLUMNS, [*rows], notes)
