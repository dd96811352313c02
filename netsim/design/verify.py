"""Simulate a designed network, judge every demand, and tighten the design where it misses.

The closed forms the design uses assume each demand alone with unlimited memory time; the
simulation adds contention for fibres and memory slots, memory decay and the network's routing
policy. A demand that misses its ``min_rate_per_s`` gets its target raised by the shortfall (times
a margin) and the program is solved again, which buys modes, slots or another route; one that
misses ``min_fidelity`` gets its fidelity floor raised likewise. After ``rounds`` attempts, or
when the raised targets make the program infeasible, the verdicts say so.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

from netsim.design.build import designed_scenario
from netsim.design.milp import Design, DesignOptions, design_network
from netsim.scenario.model import Scenario

__all__ = ["Checked", "TIGHTEN_MARGIN", "design_and_check", "verdicts"]

#: Targets are raised by the observed shortfall times this margin, so a re-solve clears it.
TIGHTEN_MARGIN = 1.15


@dataclass
class Checked:
    """The last design, its scenario, the simulated verdicts and what each round did."""

    design: Design
    scenario: Scenario | None
    verdicts: list[dict[str, Any]] = field(default_factory=list)
    sites: list[dict[str, Any]] = field(default_factory=list)
    history: list[str] = field(default_factory=list)

    @property
    def met(self) -> bool:
        return bool(self.verdicts) and all(v["verdict"] == "met" for v in self.verdicts)


def verdicts(designed: Scenario, design: Design, result: dict[str, Any]) -> list[dict[str, Any]]:
    """One row per demand: required and simulated rate and fidelity, route, ``met``/``missed``."""
    rows = []
    for demand, sim in zip(designed.demands, result["demands"]):
        planned = design.routes.get(demand.name, {})
        need_rate = demand.min_rate_per_s or 0.0
        rate, fidelity = sim["rate_per_s"] or 0.0, sim["fidelity_mean"] or 0.0
        reasons = []
        if rate < need_rate:
            reasons.append(f"rate {rate:.4g} < {need_rate:g} pairs/s")
        if fidelity < demand.min_fidelity:
            reasons.append(f"fidelity {fidelity:.4f} < {demand.min_fidelity:g}")
        route = sim.get("route") or []
        simulated_route = " > ".join(route) if isinstance(route, (list, tuple)) else str(route)
        planned_route = " > ".join(planned.get("route", []))
        rows.append({
            "demand": demand.name, "index": demand.index, "min_rate_per_s": demand.min_rate_per_s,
            "expected_rate_per_s": planned.get("expected_rate_per_s"), "rate_per_s": rate,
            "rate_ci95": sim.get("rate_ci95"), "min_fidelity": demand.min_fidelity,
            "expected_fidelity": planned.get("expected_fidelity"), "fidelity_mean": fidelity,
            "planned_route": planned_route, "simulated_route": simulated_route,
            "verdict": "met" if not reasons else "missed", "reason": "; ".join(reasons),
        })
    return rows


def _simulate(designed: Scenario, pairs: int, seed: int) -> dict[str, Any]:
    from netsim.engine import run

    return run(designed, pairs=pairs, seed=seed, ensembles=False).to_dict()


def design_and_check(scenario: Scenario, options: DesignOptions, *, pairs: int = 500, seed: int = 0,
                     rounds: int = 3, simulate: bool = True) -> Checked:
    """Design, simulate, and re-design up to ``rounds`` times while a demand misses."""
    design = design_network(scenario, options)
    if design.status == "infeasible" or not design.routes:
        return Checked(design, None, history=[f"design: {design.status}"])
    designed = designed_scenario(scenario, design)
    checked = Checked(design, designed, history=[f"round 1: cost {design.total_cost:.6g}"])
    if not simulate:
        return checked
    for round_no in range(1, rounds + 1):
        result = _simulate(designed, pairs, seed)
        checked.verdicts = verdicts(designed, design, result)
        checked.sites = result["sites"]
        missed = [v for v in checked.verdicts if v["verdict"] == "missed"]
        if not missed:
            checked.history.append(f"round {round_no}: every demand met in simulation")
            return checked
        checked.history.append(f"round {round_no}: missed in simulation: "
                               + "; ".join(f"{v['demand']} ({v['reason']})" for v in missed))
        if round_no == rounds:
            checked.history.append(f"stopped after {rounds} round(s); the misses above remain")
            return checked
        options = _tightened(options, missed)
        attempt = design_network(scenario, options)
        if attempt.status == "infeasible" or not attempt.routes:
            checked.history.append("cannot tighten: with the raised targets " + "; ".join(attempt.problems))
            return checked
        design, designed = attempt, designed_scenario(scenario, attempt)
        checked.design, checked.scenario = design, designed
        checked.history.append(f"round {round_no + 1}: raised targets, cost {design.total_cost:.6g}")
    return checked


def _tightened(options: DesignOptions, missed: list[dict[str, Any]]) -> DesignOptions:
    factors, floors = dict(options.rate_factor), dict(options.fidelity_floor)
    for v in missed:
        i = v["index"]
        need = v["min_rate_per_s"] or 0.0
        if need > 0 and v["rate_per_s"] < need:
            shortfall = need / max(v["rate_per_s"], need * 1e-3)
            factors[i] = factors.get(i, 1.0) * shortfall * TIGHTEN_MARGIN
        if v["fidelity_mean"] < v["min_fidelity"]:
            gap = v["min_fidelity"] - v["fidelity_mean"]
            floors[i] = min(1.0, max(floors.get(i, 0.0), v["min_fidelity"]) + gap * TIGHTEN_MARGIN)
    return replace(options, rate_factor=factors, fidelity_floor=floors)
