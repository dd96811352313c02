"""Simulate a designed network, judge every demand, and tighten the design where it misses.

The closed forms the design uses assume each demand alone with unlimited memory time; the
simulation adds contention for fibres and memory slots, memory decay and the network's routing
policy. Demands run greedily in the simulation (each takes what the slots and fibres give it,
not only its minimum), so a site whose slots hold one demand's reservation at a time serves the
demands through it in turn. A demand that misses its ``min_rate_per_s`` therefore first gets
more slots at the blocked sites on its route (enough for every demand through the site to hold
its reservation at once); where no site on its route is short of slots, its rate target is
raised by the shortfall (times a margin), which buys modes or another route. One that misses
``min_fidelity`` gets its fidelity floor raised likewise. The program is solved again each time. After ``rounds`` attempts, or
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
    interrupted: bool = False

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
        # min_rate_per_s asks for useful pairs (each reaching min_fidelity), as every verdict does
        useful = sim.get("useful_rate_per_s")
        useful = rate if useful is None else float(useful)
        reasons = []
        if useful < need_rate:
            reasons.append(f"useful rate {useful:.4g} < {need_rate:g} pairs/s")
        if fidelity < demand.min_fidelity:
            reasons.append(f"fidelity {fidelity:.4f} < {demand.min_fidelity:g}")
        route = sim.get("route") or []
        simulated_route = " > ".join(route) if isinstance(route, (list, tuple)) else str(route)
        planned_route = " > ".join(planned.get("route", []))
        rows.append({
            "demand": demand.name, "index": demand.index, "min_rate_per_s": demand.min_rate_per_s,
            # the estimate on the network as built (the run's budget columns), not the design
            # option's: a fibre shared with a demand that needs more modes is built with them
            "expected_rate_per_s": sim["expected_rate_per_s"], "rate_per_s": rate,
            "useful_rate_per_s": useful,
            "rate_ci95": sim.get("rate_ci95"), "min_fidelity": demand.min_fidelity,
            "expected_fidelity": sim["expected_fidelity"], "fidelity_mean": fidelity,
            "planned_route": planned_route, "simulated_route": simulated_route,
            "verdict": "met" if not reasons else "missed", "reason": "; ".join(reasons),
        })
    return rows


def _simulate(designed: Scenario, pairs: int, seed: int, max_link_pairs: float | None = None) -> dict[str, Any]:
    from netsim.engine import run
    from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS

    limit = DEFAULT_MAX_LINK_PAIRS if max_link_pairs is None else float(max_link_pairs)
    return run(designed, pairs=pairs, seed=seed, ensembles=False, max_link_pairs=limit).to_dict()


def design_and_check(scenario: Scenario, options: DesignOptions, *, pairs: int = 500, seed: int = 0,
                     rounds: int = 3, simulate: bool = True, max_link_pairs: float | None = None) -> Checked:
    """Design, simulate, and re-design up to ``rounds`` times while a demand misses.

    ``max_link_pairs``: the engine's limit on a simulation's expected link pairs (None: its
    default); a design whose check would take longer is refused in one line."""
    design = design_network(scenario, options)
    if design.status == "infeasible" or not design.routes:
        return Checked(design, None, history=[f"design: {design.status}"])
    designed = designed_scenario(scenario, design)
    checked = Checked(design, designed, history=[f"round 1: cost {design.total_cost:.6g}"])
    if not simulate:
        return checked
    for round_no in range(1, rounds + 1):
        try:
            result = _simulate(designed, pairs, seed, max_link_pairs)
        except KeyboardInterrupt:
            checked.interrupted = True
            checked.history.append(f"interrupted while simulating round {round_no}: the design of that round "
                                   "is written but not checked by simulation")
            return checked
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
        options = _tightened(options, missed, design, designed)
        blocked = {k: v for k, v in options.slot_floor.items() if v > design.memory_slots.get(k, 0)}
        if blocked:
            checked.history.append("more slots at blocked site(s): " + ", ".join(
                f"{k} {design.memory_slots.get(k, 0)} -> {v}" for k, v in blocked.items()))
        attempt = design_network(scenario, options)
        if attempt.status == "infeasible" or not attempt.routes:
            checked.history.append("cannot tighten: with the raised targets " + "; ".join(attempt.problems))
            return checked
        design, designed = attempt, designed_scenario(scenario, attempt)
        checked.design, checked.scenario = design, designed
        checked.history.append(f"round {round_no + 1}: raised targets, cost {design.total_cost:.6g}")
    return checked


def blocked_sites(design: Design, designed: Scenario, route: list[str]) -> dict[str, int]:
    """Sites of ``route`` whose slots cannot hold the reservations of every designed demand
    through them at once, with the slots that would."""
    per_end = (designed.protocol.purification_rounds if designed.protocol.purification != "none" else 0) + 1
    needs: dict[str, int] = {}
    for planned in design.routes.values():
        path = planned["route"]
        for s in path:
            needs[s] = needs.get(s, 0) + per_end * (1 if s in (path[0], path[-1]) else 2)
    return {s: needs[s] for s in route if s in design.memory_slots and design.memory_slots[s] < needs.get(s, 0)}


def _tightened(options: DesignOptions, missed: list[dict[str, Any]], design: Design,
               designed: Scenario) -> DesignOptions:
    factors, floors = dict(options.rate_factor), dict(options.fidelity_floor)
    slot_floor = dict(options.slot_floor)
    for v in missed:
        i = v["index"]
        need = v["min_rate_per_s"] or 0.0
        route = v["simulated_route"].split(" > ") if v["simulated_route"] else []
        blocked = blocked_sites(design, designed, route) if need > 0 and v["useful_rate_per_s"] < need else {}
        for site, slots in blocked.items():
            slot_floor[site] = max(slot_floor.get(site, 0), slots)
        if need > 0 and v["useful_rate_per_s"] < need and not blocked:
            shortfall = need / max(v["useful_rate_per_s"], need * 1e-3)
            factors[i] = factors.get(i, 1.0) * shortfall * TIGHTEN_MARGIN
        if v["fidelity_mean"] < v["min_fidelity"]:
            gap = v["min_fidelity"] - v["fidelity_mean"]
            floors[i] = min(1.0, max(floors.get(i, 0.0), v["min_fidelity"]) + gap * TIGHTEN_MARGIN)
    return replace(options, rate_factor=factors, fidelity_floor=floors, slot_floor=slot_floor)
