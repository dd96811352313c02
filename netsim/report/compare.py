"""Side-by-side comparison of candidate topologies serving the same demands.

Each candidate brings its network graph (edge attribute with link capacities) and its demand
rows (as built by :func:`netsim.report.capacity.demand_rows`, simulated numbers included).
Demands are matched by user pair, in either order. The bottleneck of a demand is the minimum
cut between its users over the links' repeaterless capacities (Pirandola, Commun. Phys. 2, 51,
2019), found with networkx's ``minimum_cut``.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import networkx as nx

from netsim.report.capacity import pair_key
from netsim.report.table import Column, Table

__all__ = ["CAPACITY_ATTRIBUTE", "Candidate", "bottleneck", "candidate_from_scenario", "comparison_figure", "comparison_tables",
           "run_candidates", "winner"]

#: Edge attribute holding a link's repeaterless capacity in ebit/s (parallel fibres summed).
CAPACITY_ATTRIBUTE = "bound_cut_bits_per_s"


@dataclass
class Candidate:
    """One topology: a name, its graph and its demand rows (keyed by user pair)."""

    name: str
    graph: nx.Graph
    demands: list[dict[str, Any]]
    min_fidelity: dict[frozenset[str], float] = field(default_factory=dict)
    #: Cost per useful pair per second (netsim.design.costs.demand_cost_rows): one row per
    #: demand and a last ``network`` row; empty when the scenario is not priced.
    costs: list[dict[str, Any]] = field(default_factory=list)

    def demand(self, key: frozenset[str]) -> dict[str, Any] | None:
        for row in self.demands:
            if pair_key(row["demand"]) == key:
                return row
        return None


def _capacity(graph: nx.Graph, attribute: str) -> str:
    """The capacity attribute to use: ``attribute`` if every edge has it, else each link's bound."""
    if all(attribute in d for _, _, d in graph.edges(data=True)):
        return attribute
    return "bound_bits_per_s"


def bottleneck(graph: nx.Graph, a: str, b: str,
               attribute: str = CAPACITY_ATTRIBUTE) -> tuple[float, list[tuple[str, str]]]:
    """Minimum cut between users ``a`` and ``b``: its capacity (ebit/s) and the links cut.

    References
    ----------
    S. Pirandola, "End-to-end capacities of a quantum communication network",
    Commun. Phys. 2, 51 (2019).
    """
    capacity = _capacity(graph, attribute)
    # integer nodes in sorted-name order: networkx's preflow-push keeps active nodes in sets, whose
    # order for site names would follow the interpreter's hash seed (the cut found, its float sum)
    names = sorted(graph, key=str)
    order = {n: k for k, n in enumerate(names)}
    flow = nx.DiGraph()
    flow.add_nodes_from(range(len(names)))
    for u, v, data in sorted(graph.edges(data=True), key=lambda e: (order[e[0]], order[e[1]])):
        c = float(data[capacity])
        flow.add_edge(order[u], order[v], capacity=c)
        flow.add_edge(order[v], order[u], capacity=c)
    value, (side, _side_b) = nx.minimum_cut(flow, order[a], order[b])
    side_a = {names[k] for k in side}
    cut = sorted(tuple(sorted((u, v))) for u, v in graph.edges() if (u in side_a) != (v in side_a))
    return float(value), cut  # type: ignore[misc]


def _useful(row: Mapping[str, Any]) -> float:
    """The useful-pair rate of a row (the delivered rate when the row predates useful pairs)."""
    value = row.get("useful_rate_per_s")
    return float(value if value is not None else row["rate_per_s"])


def _interval(row: Mapping[str, Any]) -> tuple[float, float]:
    ci = row.get("useful_rate_ci95") if row.get("useful_rate_per_s") is not None else row.get("rate_ci95")
    rate = _useful(row)
    if not ci or ci[0] is None or ci[1] is None:
        return (rate, rate)
    return (float(ci[0]), float(ci[1]))


def meets(row: Mapping[str, Any] | None, floor: float | None = None) -> bool | None:
    """Whether a simulated demand row meets its requirements: ``meets_fidelity`` (or the mean
    fidelity against ``floor``) and ``meets_rate`` where a rate is required; None when not simulated."""
    if row is None or row.get("rate_per_s") is None:
        return None
    fid_ok = row.get("meets_fidelity")
    if fid_ok is None and floor is not None and row.get("fidelity_mean") is not None:
        fid_ok = float(row["fidelity_mean"]) >= floor
    return fid_ok is not False and row.get("meets_rate") is not False


def _eligible(candidate: Candidate, key: frozenset[str]) -> dict[str, Any] | None:
    row = candidate.demand(key)
    if not meets(row, candidate.min_fidelity.get(key)):
        return None
    return row


def winner(candidates: Sequence[Candidate], key: frozenset[str]) -> str:
    """Who serves the demand best: highest useful-pair rate among the candidates meeting the
    demand's requirements (minimum fidelity, and minimum rate where one is set).

    Returns the candidate's name, ``"tie: A, B"`` when the leader's 95 % interval overlaps the
    runner-up's, or ``"none"`` when no candidate meets the requirements.
    """
    ranked = sorted(((row, c.name) for c in candidates if (row := _eligible(c, key))),
                    key=lambda item: _useful(item[0]), reverse=True)
    if not ranked:
        return "none"
    if len(ranked) > 1 and _interval(ranked[1][0])[1] >= _interval(ranked[0][0])[0]:
        return "tie: " + ", ".join(name for _, name in ranked[:2])
    return ranked[0][1]


def _all_keys(candidates: Sequence[Candidate]) -> list[frozenset[str]]:
    keys: list[frozenset[str]] = []
    for candidate in candidates:
        for row in candidate.demands:
            if pair_key(row["demand"]) not in keys:
                keys.append(pair_key(row["demand"]))
    return keys


def _label(key: frozenset[str], candidates: Sequence[Candidate]) -> str:
    for c in candidates:
        if (row := c.demand(key)) is not None:
            return str(row["demand"])
    return "-".join(sorted(key))


def _side_by_side(candidates: Sequence[Candidate], keys: list[frozenset[str]]) -> Table:
    columns = [Column("demand", "demand")]
    for i, c in enumerate(candidates):
        columns += [Column(f"r{i}", f"{c.name}: rate (pairs/s)", ci_key=f"r{i}_ci"),
                    Column(f"r{i}_ci", f"{c.name}: 95% CI", ci_key=f"r{i}_ci"),
                    Column(f"f{i}", f"{c.name}: fidelity", ci_key=f"f{i}_ci"),
                    Column(f"u{i}", f"{c.name}: useful rate (pairs/s)", ci_key=f"u{i}_ci"),
                    Column(f"m{i}", f"{c.name}: meets"),
                    Column(f"b{i}", f"{c.name}: min-cut bound (ebit/s)", 3)]
    columns.append(Column("winner", "best"))
    rows = []
    for key in keys:
        row: dict[str, Any] = {"demand": _label(key, candidates), "winner": winner(candidates, key)}
        for i, c in enumerate(candidates):
            d = c.demand(key) or {}
            row.update({f"r{i}": d.get("rate_per_s"), f"r{i}_ci": d.get("rate_ci95"),
                        f"f{i}": d.get("fidelity_mean"), f"f{i}_ci": d.get("fidelity_ci95"),
                        f"u{i}": d.get("useful_rate_per_s"), f"u{i}_ci": d.get("useful_rate_ci95"),
                        f"m{i}": meets(c.demand(key), c.min_fidelity.get(key)),
                        f"b{i}": d.get("bound_multipath_per_s")})
        rows.append(row)
    notes = [("best: highest useful-pair rate (pairs whose own fidelity reaches the demand's minimum) "
             "among candidates meeting the demand's requirements (minimum fidelity, and minimum rate "
             "where set); 'tie' when the 95% intervals of the two best overlap. meets: both "
             "requirements met."),
             "'-': the candidate has no such demand, or it was not simulated."]
    return Table("Candidates side by side, per demand", columns, [*rows], notes)


def _sum(rows: Sequence[Mapping[str, Any]], key: str) -> float | None:
    values = [float(r[key]) for r in rows if r.get(key) is not None]
    return math.fsum(values) if values else None


def _totals(candidates: Sequence[Candidate], keys: list[frozenset[str]]) -> Table:
    columns = [Column("candidate", "candidate"), Column("profile", "hardware profile"), Column("links", "links"),
               Column("fibre_km", "fibre (km)", 4), Column("rate_per_s", "total rate (pairs/s)", 4),
               Column("ebits_per_s", "total ebits/s (ebit/s)", 4),
               Column("bound", "sum of min-cut bounds (ebit/s)", 4),
               Column("wins", "demands won"), Column("served", "demands met"),
               Column("fidelity_margin", "min fidelity margin", 3),
               Column("rate_margin", "min useful/required rate", 3)]
    if any(c.costs for c in candidates):
        columns += [Column("cost", "cost"), Column("cost_per_useful", "cost per useful pair/s", 4)]
    rows = []
    for c in candidates:
        fibre = math.fsum(float(d.get("length_km", 0.0)) for _, _, d in c.graph.edges(data=True))
        rows.append({"candidate": c.name, "profile": _profiles(c.graph),
                     "links": c.graph.number_of_edges(), "fibre_km": fibre,
                     "rate_per_s": _sum(c.demands, "rate_per_s"),
                     "ebits_per_s": _sum(c.demands, "ebits_per_s"),
                     "bound": _sum(c.demands, "bound_multipath_per_s"),
                     "wins": sum(winner(candidates, k) == c.name for k in keys),
                     "served": sum(_eligible(c, k) is not None for k in keys),
                     **_margins(c, keys)})
        if c.costs:
            rows[-1].update(cost=c.costs[-1]["cost_share"], cost_per_useful=c.costs[-1]["cost_per_useful_pair_per_s"])
    return Table("Candidates: totals", columns, [*rows], _verdict_notes(rows, len(keys)))


def _margins(candidate: Candidate, keys: list[frozenset[str]]) -> dict[str, float | None]:
    """The smallest fidelity margin (mean - min) and useful rate / min rate over the demands."""
    fid, rate = [], []
    for key in keys:
        row = candidate.demand(key)
        if not row or row.get("rate_per_s") is None:
            continue
        floor = row.get("min_fidelity", candidate.min_fidelity.get(key))
        if floor is not None and row.get("fidelity_mean") is not None:
            fid.append(float(row["fidelity_mean"]) - float(floor))
        if row.get("min_rate_per_s") and row.get("useful_rate_per_s") is not None:
            rate.append(float(row["useful_rate_per_s"]) / float(row["min_rate_per_s"]))
    return {"fidelity_margin": min(fid) if fid else None, "rate_margin": min(rate) if rate else None}


def _verdict_notes(rows: list[dict[str, Any]], total: int) -> list[str]:
    """Which candidate meets more demands' requirements, and by how many."""
    if not rows or all(r["served"] == 0 for r in rows) and all(r["rate_per_s"] is None for r in rows):
        return ["Not simulated: no verdicts."]
    ranked = sorted(rows, key=lambda r: (r["served"], r["fidelity_margin"] if r["fidelity_margin"] is not None
                                         else -math.inf), reverse=True)
    best = ranked[0]
    text = f"{best['candidate']} meets the requirements of {best['served']} of {total} demands"
    if len(ranked) > 1:
        second = ranked[1]
        lead = best["served"] - second["served"]
        text += (f", {lead} more than {second['candidate']} ({second['served']})" if lead > 0 else
                 f", as many as {second['candidate']}; the smallest fidelity margin decides "
                 f"({_fmt(best['fidelity_margin'])} against {_fmt(second['fidelity_margin'])})")
    return [text + ". demands met: fidelity and rate requirements both met; margins: the smallest "
            "over the candidate's simulated demands (mean fidelity - min fidelity; useful rate / min rate)."]


def _fmt(value: float | None) -> str:
    return "-" if value is None else f"{value:+.3g}"


def _cost_per_demand(candidates: Sequence[Candidate], keys: list[frozenset[str]]) -> list[Table]:
    """Cost share and cost per useful pair per second of every demand, per priced candidate."""
    if not any(c.costs for c in candidates):
        return []
    columns = [Column("demand", "demand")] + [
        Column(f"{c.name}:cost_per_useful", f"{c.name}: cost per useful pair/s", 4) for c in candidates]
    rows: list[Mapping[str, Any]] = []
    for key in [*keys, None]:
        row: dict[str, Any] = {"demand": _label(key, candidates) if key else "network"}
        rows.append(row)
        for c in candidates:
            match = [r for r in c.costs if (pair_key(r["demand"]) == key if key else r["demand"] == "network")]
            row[f"{c.name}:cost_per_useful"] = match[0]["cost_per_useful_pair_per_s"] if match else None
    notes = ["Each candidate's [costs]: a site's or link's price is split equally among the demands routed "
             "over it, over the demand's useful rate (pairs reaching min_fidelity); '-': unpriced, or no "
             "useful pair."]
    return [Table("Candidates: cost per useful pair per second", columns, rows, notes)]


def _relays(graph: nx.Graph, a: str, b: str) -> nx.Graph:
    """The graph the demand may use: other end users never relay (as routing and the budget
    assume) when the nodes carry their ``site``; the whole graph otherwise."""
    if all("site" in data for _, data in graph.nodes(data=True)):
        from netsim.network.routing import relay_graph

        return relay_graph(graph, a, b)
    return graph


def _link_name(graph: nx.Graph, u: str, v: str) -> str:
    """The link's name as the scenario and the budget table write it (its ends in file order)."""
    link = graph.edges[u, v].get("link")
    return str(link.name) if link is not None else f"{u}-{v}"


def _bottlenecks(candidates: Sequence[Candidate], keys: list[frozenset[str]]) -> Table:
    columns = [Column("candidate", "candidate"), Column("demand", "demand"),
               Column("cut_bits_per_s", "min cut (ebit/s)", 4), Column("links", "bottleneck links")]
    rows: list[dict[str, Any]] = []
    for c in candidates:
        for key in keys:
            a, b = sorted(key)
            graph = _relays(c.graph, a, b) if a in c.graph and b in c.graph else None
            if graph is None or not nx.has_path(graph, a, b):
                rows.append({"candidate": c.name, "demand": _label(key, candidates)})
                continue
            value, cut = bottleneck(graph, a, b)
            rows.append({"candidate": c.name, "demand": _label(key, candidates),
                         "cut_bits_per_s": value, "links": "; ".join(_link_name(graph, u, v) for u, v in cut)})
    notes = ["Other end users never relay; parallel fibres add their capacities."]
    return Table("Bottleneck links (minimum cut of the links' bounds as heralded)", columns, [*rows], notes)


def _profiles(graph: nx.Graph) -> str:
    """The hardware profiles of a candidate's memory sites and links (``built-in`` for none)."""
    from netsim.scenario.profiles import profile_label

    sites = [d["site"] for _, d in graph.nodes(data=True) if "site" in d and d["site"].role != "switch"]
    links = [d["link"] for _, _, d in graph.edges(data=True) if "link" in d]
    return profile_label(*(s.profile for s in sites), *(link.profile for link in links))


def comparison_tables(candidates: Sequence[Candidate]) -> list[Table]:
    """Side-by-side per demand, totals, and bottleneck links of every candidate."""
    keys = _all_keys(candidates)
    return [_side_by_side(candidates, keys), _totals(candidates, keys), _bottlenecks(candidates, keys),
            *_cost_per_demand(candidates, keys)]


def candidate_from_scenario(scenario: Any, run: Mapping[str, Any] | None,
                            name: str | None = None) -> Candidate:
    """A candidate from a loaded scenario and its run result (``RunResult.to_dict()``)."""
    from netsim.network import build_graph
    from netsim.network.budget import budget
    from netsim.report.capacity import demand_rows

    from netsim.design.costs import demand_cost_rows

    plan = budget(scenario).demands
    rows = demand_rows(plan, (run or {}).get("demands"))
    floors = {pair_key((d.a, d.b)): float(d.min_fidelity) for d in scenario.demands}
    return Candidate(name or scenario.slug, build_graph(scenario), rows, floors,
                     demand_cost_rows(scenario, plan, rows))


def run_candidates(paths: Sequence[str], *, pairs: int | None = 200, time_s: float | None = None,
                   seed: int = 0, simulate: bool = True) -> list[Candidate]:
    """Load each scenario file and run the engine on it with the same stop rule and seed."""
    from netsim import engine
    from netsim.scenario import load

    candidates = []
    for path in paths:
        scenario = load(path)
        run = None
        if simulate:
            stop = {"time_s": time_s} if time_s is not None else {"pairs": pairs}
            run = engine.run(scenario, seed=seed, ensembles=False, **stop).to_dict()
        candidates.append(candidate_from_scenario(scenario, run))
    names = [c.name for c in candidates]
    for i, c in enumerate(candidates):
        if names.count(c.name) > 1:
            c.name = f"{c.name}#{i + 1}"
    return candidates


def comparison_figure(candidates: Sequence[Candidate]) -> Any:
    """Delivered rate per demand for each candidate (bars with 95 % error bars).

    Site names are abbreviated as on the network map (initials joined by a dash), with a key of
    the abbreviations under the figure so that it reads on its own.
    """
    from netsim.report.figures import grouped_bars
    from netsim.report.netmap import short_labels

    keys = _all_keys(candidates)
    sites = sorted({s for k in keys for s in k})
    short = short_labels(sites)
    labels = []
    for key in keys:
        text = _label(key, candidates)
        a, b = text.split("-", 1) if text.count("-") == 1 else sorted(key)
        labels.append(f"{short.get(a, a)}-{short.get(b, b)}")
    series = {}
    for c in candidates:
        rows = [c.demand(k) or {} for k in keys]
        values = [_number(r.get("rate_per_s")) for r in rows]
        cis = [r.get("rate_ci95") or [math.nan, math.nan] for r in rows]
        series[c.name] = (values, [_number(ci[0]) for ci in cis], [_number(ci[1]) for ci in cis])
    fig = grouped_bars(labels, series, xlabel="delivered rate (pairs/s)")
    legend = "; ".join(f"{abbrev}: {name}" for name, abbrev in short.items() if abbrev != name)
    if legend:
        fig.supxlabel("\n".join(textwrap.wrap(legend, 90)), fontsize=5)
    return fig


def _number(value: Any) -> float:
    return math.nan if value is None else float(value)
