"""Files a design writes: design.json, design.toml, the cost table, the verdicts and the map."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from netsim.design.build import designed_cost_rows, designed_data
from netsim.design.costs import cost_table
from netsim.design.milp import full_network
from netsim.design.tomlout import dumps
from netsim.design.verify import Checked
from netsim.report.table import Column, Table, render
from netsim.scenario.model import Scenario

__all__ = ["MEMORY_COLUMNS", "VERDICT_COLUMNS", "memory_rows", "memory_table", "slots_for_wait", "verdict_table",
           "write_design"]

MEMORY_COLUMNS = (
    Column("site", "site"), Column("memory_slots", "slots"), Column("slots_peak", "peak reserved"),
    Column("slots_p99", "99th pct reserved"), Column("memory_occupancy", "qubit occupancy"),
    Column("waited_share", "requests that waited"), Column("slots_for_target", "slots for waiting <= target"),
)


def slots_for_wait(loads: dict[str, int], target: float, fallback: int) -> int:
    """Least slots C with the share of requests that met a load above C at most ``target``
    (``loads``: {slots in use + queued + own need at a request: count}); ``fallback`` when no
    request was recorded (a lone chain holds its slots throughout)."""
    counts = sorted((int(k), n) for k, n in loads.items())
    total = sum(n for _, n in counts)
    if total == 0:
        return fallback
    above = total
    for load, n in counts:
        above -= n
        if above / total <= target:
            return load
    return counts[-1][0]


def memory_rows(sites: list[dict[str, Any]], target: float) -> list[dict[str, Any]]:
    """Memory sizing per site from a simulation's site rows."""
    rows = []
    for s in sites:
        if "slots_peak" not in s:
            continue
        rows.append({"site": s["site"], "memory_slots": s["memory_slots"], "slots_peak": s["slots_peak"],
                     "slots_p99": s["slots_p99"], "memory_occupancy": s.get("memory_occupancy"),
                     "waited_share": s["waited_share"],
                     "slots_for_target": slots_for_wait(s.get("slot_loads") or {}, target, s["slots_peak"])})
    return rows


def memory_table(rows: list[dict[str, Any]], target: float) -> Table:
    notes = [f"From the last simulation. Reserved: slots held for demands' cycles (a demand reserves one "
             "slot per hop end on its whole route before each cycle); qubit occupancy: qubit-seconds "
             "stored over time x slots. Slots for waiting <= target: the least number of slots with at "
             f"most {target:g} of the reservation requests meeting more slots in use, queued or asked for "
             "than that (an estimate from the loads requests met; a re-run checks it)."]
    return Table("memory sizing", MEMORY_COLUMNS, list(rows), notes)

VERDICT_COLUMNS = (
    Column("demand", "demand"), Column("min_rate_per_s", "min rate (pairs/s)"),
    Column("expected_rate_per_s", "design rate, estimate (pairs/s)"),
    Column("rate_per_s", "simulated rate (pairs/s)", ci_key="rate_ci95"),
    Column("rate_ci95", "rate 95% CI", ci_key="rate_ci95"),
    Column("useful_rate_per_s", "simulated useful rate (pairs/s)"), Column("min_fidelity", "min fidelity"),
    Column("expected_fidelity", "design fidelity"), Column("fidelity_mean", "simulated fidelity"),
    Column("verdict", "verdict"), Column("reason", "why"),
)


def verdict_table(checked: Checked) -> Table:
    notes = ["Design figures: the planning estimate of each demand alone on the network as built (its "
             "links' modes and its sites' memories; memory decay and the cut-off included; hops taking "
             "turns at a shared optical interface are not). Simulated: every "
             "demand together (contention for fibres, memory slots and interfaces, memory decay)."]
    for v in checked.verdicts:
        if v["simulated_route"] and v["planned_route"] and v["simulated_route"] != v["planned_route"]:
            notes.append(f"{v['demand']}: the routing policy chose {v['simulated_route']} in the designed "
                         f"network, not the designed route {v['planned_route']}")
    notes += checked.history
    return Table("design verdicts", VERDICT_COLUMNS, list(checked.verdicts), notes)


def _json_safe(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    return value


def write_design(scenario: Scenario, checked: Checked, out: Path, wait_target: float = 0.05) -> list[Path]:
    """Write every output into ``out``; return the paths written."""
    out.mkdir(parents=True, exist_ok=True)
    design = checked.design
    written = []
    record = {**design.to_dict(), "scenario": scenario.name,
              "currency": (scenario.costs.currency if scenario.costs else "units"),
              "verdicts": checked.verdicts, "history": checked.history, "wait_target": wait_target,
              "memory": memory_rows(checked.sites, wait_target)}
    path = out / "design.json"
    path.write_text(json.dumps(_json_safe(record), indent=2) + "\n", encoding="utf-8")
    written.append(path)
    if design.routes:
        path = out / "design.toml"
        header = (f"{scenario.name}: designed network ({design.status}, total cost "
                  f"{design.total_cost:.6g} {record['currency']}).\nWritten by netsim design; "
                  "candidates chosen are ordinary sites and links here, rejected ones are left out.")
        path.write_text(dumps(designed_data(scenario, design), header), encoding="utf-8")
        written.append(path)
        table = cost_table(f"{scenario.name}: designed network cost", designed_cost_rows(scenario, design),
                           record["currency"])
        for fmt, name in (("md", "costs.md"), ("csv", "costs.csv")):
            (out / name).write_text(render(table, fmt), encoding="utf-8")
            written.append(out / name)
        written.append(_map(scenario, checked, out / "map.png"))
    if checked.verdicts:
        path = out / "verdicts.md"
        path.write_text(render(verdict_table(checked), "md"), encoding="utf-8")
        written.append(path)
        path = out / "memory.md"
        path.write_text(render(memory_table(record["memory"], wait_target), "md"), encoding="utf-8")
        written.append(path)
    return written


def _map(scenario: Scenario, checked: Checked, path: Path) -> Path:
    """Existing elements in black, chosen candidates in blue, rejected ones dashed grey."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    from netsim.report.netmap import MapLink, MapSite, positions

    design = checked.design
    full = full_network(scenario)
    sites = [MapSite(s.name, s.role, s.x_km, s.y_km) for s in full.sites]
    pos, to_scale = positions(sites, [MapLink(k.a, k.b, 1.0) for k in full.links])
    chosen_l, rejected_l = set(design.chosen_links), set(design.rejected_links)
    chosen_s, rejected_s = set(design.chosen_sites), set(design.rejected_sites)
    fig = Figure(figsize=(6.5, 5.5))
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for k in full.links:
        (xa, ya), (xb, yb) = pos[k.a], pos[k.b]
        if k.name in rejected_l:
            ax.plot([xa, xb], [ya, yb], ls="--", color="0.7", lw=0.9, zorder=1)
        elif k.name in chosen_l:
            ax.plot([xa, xb], [ya, yb], color="tab:blue", lw=2.2, zorder=2)
        else:
            ax.plot([xa, xb], [ya, yb], color="black", lw=1.6, zorder=2)
    markers = {"user": "o", "repeater": "s", "switch": "^"}
    for s in full.sites:
        x, y = pos[s.name]
        if s.name in rejected_s:
            ax.plot(x, y, markers[s.role], mfc="white", mec="0.6", ms=8, zorder=3)
            ax.annotate(s.name, (x, y), xytext=(4, 4), textcoords="offset points", fontsize=7, color="0.5")
        else:
            colour = "tab:blue" if s.name in chosen_s else "black"
            ax.plot(x, y, markers[s.role], color=colour, ms=8, zorder=3)
            slots = design.memory_slots.get(s.name)
            label = s.name if slots is None else f"{s.name} ({slots})"
            ax.annotate(label, (x, y), xytext=(4, 4), textcoords="offset points", fontsize=7)
    handles = [Line2D([], [], color="black", lw=1.6, label="existing link"),
               Line2D([], [], color="tab:blue", lw=2.2, label="chosen candidate link"),
               Line2D([], [], color="0.7", ls="--", label="rejected candidate link"),
               Line2D([], [], marker="s", color="tab:blue", ls="", label="chosen candidate site"),
               Line2D([], [], marker="s", mfc="white", mec="0.6", ls="", label="rejected candidate site")]
    ax.legend(handles=handles, fontsize=7, loc="best")
    ax.set_aspect("equal", adjustable="datalim")
    if to_scale:
        ax.set_xlabel("x (km)")
        ax.set_ylabel("y (km)")
    else:
        ax.set_xticks([])
        ax.set_yticks([])
        ax.set_xlabel("layout, not to scale")
    ax.set_title(f"{scenario.name}: design ({design.status}); (n) = memory slots", fontsize=9)
    fig.savefig(path, dpi=150, bbox_inches="tight")
    return path
