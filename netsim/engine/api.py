"""Public entry points: :func:`run` on a scenario and :func:`simulate` on built chains.

Demands that share no memory site are independent: each runs alone, with the vectorised engine
when nothing in it needs the event engine (sure swaps, no purification; a cut-off is fine), else
with the simpy engine; each demand row's ``engine`` says which ran. Demands that share a site run together in one simpy run and contend for slots.
Randomness: ``numpy.random.SeedSequence(seed).spawn`` gives each demand its own stream (by its
position in the scenario, or in the list given to :func:`simulate`), so the same seed gives the
same numbers and no two demands share a stream.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from netsim import qinfo
from netsim.engine.chain import Chain, HopSpec
from netsim.engine.des import DesOptions, path_need, simulate_des
from netsim.engine.ensemble import send_ensemble
from netsim.engine.metrics import Z95, ChainRun, StopRule
from netsim.engine.result import RunResult
from netsim.engine.vector import simulate_chain_vector, vector_applicable
from netsim.engine.workload import GUARD_FACTOR, check_run_work, expected_work, run_work_warnings
from netsim.errors import ParameterError
from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS
from netsim.scenario.model import DEFAULT_DEMAND_PAIRS, Scenario
from netsim.scenario.profiles import profile_label

__all__ = ["Component", "chains_from_scenario", "check_memory", "check_run", "demand_row", "run", "simulate", "stop_rule", "verdicts", "work_warnings"]


def stop_rule(pairs: int | None = None, time_s: float | None = None, precision: float | None = None) -> StopRule | None:
    """Check the stop arguments (at most one) and build the rule; None when none is given."""
    given = [(k, v) for k, v in (("--pairs", pairs), ("--time-s", time_s), ("--precision", precision)) if v is not None]
    if len(given) > 1:
        raise ParameterError(given[1][0], given[1][1], f"only one stop rule; {given[0][0]} is already given")
    if pairs is not None and (isinstance(pairs, bool) or not isinstance(pairs, (int, np.integer)) or pairs < 1):
        raise ParameterError("--pairs", pairs, "an integer >= 1")
    if time_s is not None and not (isinstance(time_s, (int, float)) and math.isfinite(time_s) and time_s > 0):
        raise ParameterError("--time-s", time_s, "a finite time > 0 in seconds")
    if precision is not None and not (isinstance(precision, (int, float)) and 0 < precision < 1):
        raise ParameterError("--precision", precision, "a relative half-width in (0, 1), e.g. 0.05")
    if pairs is not None:
        return StopRule(pairs=int(pairs))
    if time_s is not None:
        return StopRule(time_s=float(time_s))
    return StopRule(precision=float(precision)) if precision is not None else None


def chains_from_scenario(scenario: Scenario, graph: Any = None) -> list[Chain]:
    """Route every demand (``protocol.routing``) and build its chain of heralded hops (on
    ``graph``, :func:`netsim.network.build_graph` of ``scenario``, built when not given)."""
    from netsim.errors import ScenarioError
    from netsim.network import build_graph, find_route, route_hops
    from netsim.network.workload import cutoff_problems

    graph = build_graph(scenario) if graph is None else graph
    chains = []
    for d in scenario.demands:
        route = find_route(graph, d.a, d.b, scenario.protocol.routing)
        hops = route_hops(graph, route)
        sites = tuple(graph.nodes[h.a]["site"] for h in hops) + (graph.nodes[hops[-1].b]["site"],)
        problems = cutoff_problems(scenario, f"demands[{d.index}] ({d.name})", hops, sites)
        if problems:  # the cut-off discards every pair: the run would never end
            raise ScenarioError(problems, scenario.source)
        specs = tuple(HopSpec(f"{h.a}-{h.b}", h.physics, tuple(link.name for link in h.links)) for h in hops)
        chains.append(Chain(d.name, sites, specs, index=d.index, pairs=d.pairs, duration_s=d.duration_s,
                            min_fidelity=d.min_fidelity, route=tuple(route)))
    return chains


@dataclass
class Component:
    """Demands that share memory sites (run together)."""

    chains: list[Chain]


def _components(chains: list[Chain], per_end: int = 1) -> list[list[int]]:
    """Group demands that contend: they share a site whose slots (or optical interfaces) cannot
    hold all their reservations at once, a site with attempt dephasing (one demand's attempts
    dephase another's stored qubits), or a fibre link (which carries one attempt sequence at a
    time). Demands on sites with room for everyone and on separate fibres run independently.
    Returns groups of positions in ``chains``, each in increasing order."""
    needs = [path_need(c, per_end) for c in chains]
    capacity = {s.name: s.memory_slots for c in chains for s in c.sites}
    parent = list(range(len(chains)))

    def root(k: int) -> int:
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k

    users: dict[str, list[int]] = {}
    for k, need in enumerate(needs):
        for site in need:
            users.setdefault(site, []).append(k)
    for site, ks in users.items():
        if sum(needs[k][site] for k in ks) > capacity[site]:
            for k in ks[1:]:
                parent[root(k)] = root(ks[0])
    # a site's optical interfaces (communication_qubits) are shared like its slots: demands whose
    # hops there outnumber them take turns, so they run together
    sites = {s.name: s for c in chains for s in c.sites}
    for site, ks in users.items():
        count = sites[site].communication_qubits
        if count and len(ks) > 1:
            ends = 0
            for k in ks:
                names = chains[k].site_names
                ends += sum(1 for i in range(chains[k].n_hops) if site in names[i:i + 2])
            if ends > count:
                for k in ks[1:]:
                    parent[root(k)] = root(ks[0])
        # one demand's attempts dephase another's qubits stored at a site with attempt_dephasing
        if sites[site].attempt_dephasing > 0:
            for k in ks[1:]:
                parent[root(k)] = root(ks[0])
    on_fibre: dict[str, int] = {}
    for k, c in enumerate(chains):
        for name in dict.fromkeys(name for hop in c.hops for name in hop.links):
            if name in on_fibre:
                parent[root(k)] = root(on_fibre[name])
            else:
                on_fibre[name] = k
    groups: dict[int, list[int]] = {}
    for k in range(len(chains)):
        groups.setdefault(root(k), []).append(k)
    return list(groups.values())


def _rule_for(chain: Chain, rule: StopRule | None) -> StopRule:
    if rule is not None:
        return rule
    if chain.duration_s is not None:
        return StopRule(time_s=float(chain.duration_s))
    return StopRule(pairs=int(chain.pairs or DEFAULT_DEMAND_PAIRS))


def simulate(chains: list[Chain], *, rule: StopRule | None = None, seed: int = 0,
             options: DesOptions | None = None) -> list[ChainRun]:
    """Run built chains (the lower-level entry point tests and benchmarks drive).

    ``rule`` None: each chain's own ``pairs`` / ``duration_s``. Returns one :class:`ChainRun`
    per chain, in the order given. Chain ``k`` of the list draws from the ``k``-th child stream
    of ``SeedSequence(seed)``: chains are independent of one another (also two equal chains, or
    one chain object given twice), and the same seed gives the same numbers.
    """
    options = options or DesOptions()
    streams = np.random.SeedSequence(seed).spawn(len(chains))
    runs: list[ChainRun | None] = [None] * len(chains)
    rounds = options.purification_rounds if options.purification != "none" else 0
    interrupted = False
    for group in _components(chains, rounds + 1):
        if interrupted:  # Ctrl-C: keep what we have, run no more
            for k in group:
                runs[k] = _interrupted(chains[k])
            continue
        members = [chains[k] for k in group]
        rngs = [np.random.default_rng(streams[k]) for k in group]
        rules = [_rule_for(c, rule) for c in members]
        if len(group) == 1 and vector_applicable(members[0], options.cutoff_s, rounds) and _slots_ok(members[0]):
            group_runs = [simulate_chain_vector(members[0], rules[0], rngs[0], options.cutoff_s)]
        else:
            group_runs, _ = simulate_des(members, rules, rngs, options)
        for k, r in zip(group, group_runs):
            runs[k] = r
        interrupted = any(r.interrupted for r in group_runs)
    return [r for r in runs if r is not None]


def _interrupted(chain: Chain) -> ChainRun:
    run = ChainRun.zeros(chain.n_hops, engine="none")
    run.interrupted = True
    return run


def _slots_ok(chain: Chain) -> bool:
    """A lone chain fits the vectorised engine only if its path reservation fits the slots."""
    need = path_need(chain, 1)
    return all(s.memory_slots >= need[s.name] for s in chain.sites)


def _rate(run: ChainRun) -> tuple[float, list[float]]:
    n, t = run.metrics.n, run.simulated_time_s
    if n == 0 or t <= 0:
        return 0.0, [0.0, math.nan]
    rate = n / t
    rel = run.rate_relative_halfwidth()
    if not math.isfinite(rel):
        return rate, [math.nan, math.nan]
    return rate, [rate / (1.0 + rel), rate / (1.0 - rel) if rel < 1 else math.inf]


def demand_row(chain: Chain, run: ChainRun) -> dict[str, Any]:
    """The per-demand figures of one chain's run (keys listed in :mod:`netsim.engine.result`).

    The key fraction is that of the averaged state: the QBERs are linear in the state, so error
    rates estimated over the whole stream are the averaged state's, and by the concavity of h this
    is never more than the mean of per-pair fractions (which would need pairs sorted by storage
    time). ``ebits_per_s`` uses the mean per-pair EoF (at least the EoF of the averaged state, E_F
    being convex); ``distillable_ebits_per_s`` uses the averaged state (hashing on the stream).
    """
    m = run.metrics
    rate, rate_ci = _rate(run)
    fid, fid_ci = m.mean_ci(m.sum_fidelity, m.sum_fidelity_sq)
    eof, eof_ci = m.mean_ci(m.sum_eof, m.sum_eof_sq)
    mean_state = m.mean_state()
    ok = m.n > 0
    eof_mean_state = float(qinfo.entanglement_of_formation(mean_state)) if ok else math.nan
    coh_mean_state = float(qinfo.coherent_information(mean_state)) if ok else math.nan
    key = float(qinfo.key_fraction(mean_state)) if ok else math.nan
    useful, useful_ci = m.useful_rate(run.simulated_time_s)
    return {
        "demand": chain.name, "route": list(chain.route or chain.site_names), "hops": chain.n_hops,
        "engine": run.engine, "delivered_pairs": m.n, "simulated_time_s": run.simulated_time_s,
        "rate_per_s": rate, "rate_ci95": rate_ci,
        "useful_pairs": m.n_useful, "useful_fraction": m.n_useful / m.n if ok else math.nan,
        "useful_rate_per_s": useful, "useful_rate_ci95": useful_ci,
        "fidelity_mean": fid, "fidelity_ci95": fid_ci, "eof_mean": eof, "eof_ci95": eof_ci,
        "eof_of_mean_state": eof_mean_state, "ebits_per_s": rate * eof if ok else 0.0,
        # one direction for the whole stream, whichever end serves it better
        "coherent_information_mean": max(m.sum_coherent, m.sum_coherent_a) / m.n if ok else math.nan,
        "distillable_ebits_per_s": rate * coh_mean_state if ok else 0.0,
        "key_fraction": key, "key_rate_per_s": rate * key if ok else 0.0,
        "first_delivery_s": m.first_delivery_s,
        "interrupted": run.interrupted,
    }


def verdicts(row: dict[str, Any], min_fidelity: float | None, min_rate_per_s: float | None) -> dict[str, Any]:
    """The requirement columns of a simulated demand row.

    ``meets_fidelity``: the mean delivered fidelity reaches ``min_fidelity``; ``meets_rate``: the
    useful-pair rate (pairs whose own fidelity reaches ``min_fidelity``) reaches
    ``min_rate_per_s``. Each is None where no requirement is set or nothing was delivered to judge.
    Judged on the point estimates; the 95 % intervals beside them say how sure the verdict is.
    """
    fid = row.get("fidelity_mean")
    has_fid = min_fidelity is not None and fid is not None and math.isfinite(fid)
    useful = row.get("useful_rate_per_s")
    return {
        "min_fidelity": min_fidelity, "min_rate_per_s": min_rate_per_s,
        "meets_fidelity": bool(fid >= min_fidelity) if has_fid else None,  # type: ignore[operator]
        "meets_rate": (bool(useful >= min_rate_per_s) if min_rate_per_s is not None and useful is not None
                       else None),
    }


def _link_rows(chains: list[Chain], runs: list[ChainRun], horizon_s: float) -> list[dict[str, Any]]:
    rows: dict[str, dict[str, Any]] = {}
    for c, r in zip(chains, runs):
        for i, hop in enumerate(c.hops):
            for name in hop.links or (hop.name,):
                row = rows.setdefault(name, {"link": name, "attempts": 0, "successes": 0, "busy_s": 0.0,
                                             "discarded": 0, "hops": []})
                row["attempts"] += int(r.hop_attempts[i])
                row["successes"] += int(r.hop_successes[i])
                row["discarded"] += int(r.hop_discards[i])
                row["busy_s"] += float(r.hop_busy_s[i]) / max(r.simulated_time_s, 1e-300) * horizon_s
                row["hops"].append(f"{c.name}:{hop.name}")
    for row in rows.values():
        row["utilisation"] = row.pop("busy_s") / horizon_s if horizon_s > 0 else math.nan
    return list(rows.values())


def _site_rows(chains: list[Chain], runs: list[ChainRun]) -> list[dict[str, Any]]:
    rows: dict[str, dict[str, Any]] = {}
    for c, r in zip(chains, runs):
        for j, site in enumerate(c.sites):
            row = rows.setdefault(site.name, {"site": site.name, "memory_slots": site.memory_slots,
                                              "occupancy_sum": 0.0, "swap_failures": 0})
            if r.simulated_time_s > 0:
                row["occupancy_sum"] += float(r.site_qubit_s[j]) / r.simulated_time_s
            row["swap_failures"] += int(r.swap_failures[j])
    for row in rows.values():
        row["memory_occupancy"] = row.pop("occupancy_sum") / max(row["memory_slots"], 1)
    _slot_figures(rows, chains, runs)
    return list(rows.values())


def _slot_figures(rows: dict[str, dict[str, Any]], chains: list[Chain], runs: list[ChainRun]) -> None:
    """Reserved slots per site: ``slots_peak``, ``slots_p99`` (99th percentile over time),
    ``slot_requests``, ``waited_share`` (requests not granted at once) and ``slot_loads``
    ({slots in use + queued + own need at a request: count}, keys as text).

    Demands that run in separate groups (their sites have room for all of them) add up: their
    peaks and percentiles are summed (an upper bound) and each group's loads are shifted by the
    other groups' peaks. A chain alone on the vectorised engine holds its slots throughout.
    """
    groups: dict[str, dict[int, dict[str, Any]]] = {}
    for c, r in zip(chains, runs):
        need = path_need(c, 1)
        for site in c.sites:
            if r.slot_stats is not None and site.name in r.slot_stats:
                groups.setdefault(site.name, {})[id(r.slot_stats)] = r.slot_stats[site.name]
            else:
                k = need[site.name]
                groups.setdefault(site.name, {})[id(r)] = {"peak": k, "p99": k, "requests": 0, "waited": 0,
                                                           "loads": {}}
    for name, found in groups.items():
        parts = list(found.values())
        peak = sum(p["peak"] for p in parts)
        loads: dict[str, int] = {}
        for p in parts:
            for load, count in p["loads"].items():
                key = str(load + peak - p["peak"])
                loads[key] = loads.get(key, 0) + count
        requests, waited = sum(p["requests"] for p in parts), sum(p["waited"] for p in parts)
        rows[name].update(slots_peak=peak, slots_p99=sum(p["p99"] for p in parts), slot_requests=requests,
                          waited_share=waited / requests if requests else 0.0, slot_loads=loads)


def work_warnings(scenario: Scenario) -> list[str]:
    """``netsim check`` warnings for runs beyond reason with the scenario's own stop rules
    (:func:`netsim.engine.workload.run_work_warnings`)."""
    proto = scenario.protocol
    rounds = int(proto.purification_rounds) if proto.purification != "none" else 0
    chains = chains_from_scenario(scenario)
    return run_work_warnings(scenario, expected_work(chains, _components(chains, rounds + 1), None,
                                                     proto.cutoff_s, rounds))


def check_run(scenario: Scenario, *, pairs: int | None = None, time_s: float | None = None,
              precision: float | None = None, max_link_pairs: float = DEFAULT_MAX_LINK_PAIRS) -> None:
    """What :func:`run` refuses before it starts, without running: too few memory slots
    (ParameterError), a cut-off that discards every pair, or more expected link pairs than
    ``max_link_pairs`` (ScenarioError, one line). Sweeps check every point with it at plan time."""
    rule = stop_rule(pairs, time_s, precision)
    proto = scenario.protocol
    rounds = int(proto.purification_rounds) if proto.purification != "none" else 0
    chains = chains_from_scenario(scenario)
    _check_slots(scenario, chains, rounds)
    check_run_work(scenario, expected_work(chains, _components(chains, rounds + 1), rule, proto.cutoff_s, rounds),
                   max_link_pairs)


def check_memory(scenario: Scenario) -> None:
    """Raise the ParameterError :func:`run` would raise when a site on a demand's route has too
    few memory slots (so ``netsim check`` reports it before a run)."""
    proto = scenario.protocol
    rounds = int(proto.purification_rounds) if proto.purification != "none" else 0
    _check_slots(scenario, chains_from_scenario(scenario), rounds)


def _check_slots(scenario: Scenario, chains: list[Chain], rounds: int) -> None:
    index = {s.name: k for k, s in enumerate(scenario.sites)}
    for c in chains:
        need = path_need(c, rounds + 1)
        for s in c.sites:
            if s.memory_slots < need[s.name]:
                raise ParameterError(f"sites[{index[s.name]}].memory_slots", s.memory_slots,
                                     f"an integer >= {need[s.name]} for demand {c.name} on this route "
                                     f"({rounds + 1} per hop end)")


def _analytic(scenario: Scenario, graph: Any = None, chains: list[Chain] | None = None) -> list[dict[str, Any]]:
    """The budget's figures beside each simulated demand (its demand rows only, on ``graph``,
    along the routes of ``chains`` when given: one per demand, as simulated)."""
    from netsim.network.budget import demand_rows

    keep = ("expected_rate_per_s", "expected_fidelity", "expected_eof_ebits", "route_bound_bits_per_s",
            "single_path_bits_per_s", "multipath_bits_per_s")
    routes = None if chains is None else [c.route for c in chains]
    return [{k: row.get(k) for k in keep} for row in demand_rows(scenario, graph, routes=routes)[0]]


def run(scenario: Scenario, *, pairs: int | None = None, time_s: float | None = None,
        precision: float | None = None, seed: int = 0, ensembles: bool = True,
        max_link_pairs: float = DEFAULT_MAX_LINK_PAIRS, progress: Callable[[int], None] | None = None) -> RunResult:
    """Simulate every demand of ``scenario`` and return the figures with their intervals.

    Parameters
    ----------
    scenario : Scenario
    pairs, time_s, precision : optional, at most one
        Stop after ``pairs`` delivered pairs per demand, after ``time_s`` simulated seconds, or
        once every demand's rate has a relative 95 % half-width <= ``precision``. None of them:
        each demand's own ``pairs`` or ``duration_s`` from the scenario.
    seed : int
        Same seed, same numbers.
    ensembles : bool
        Also send the scenario's encoding ensemble along each route (Holevo figures).
    max_link_pairs : float
        Refuse (:class:`~netsim.errors.ScenarioError`, one line) a run expected to herald more
        link pairs than this; the event engine stops at 4 times it (:mod:`netsim.engine.workload`).
    progress : callable, optional
        Called with the number of link pairs heralded since its last call (every 4096).
    """
    rule = stop_rule(pairs, time_s, precision)
    if isinstance(max_link_pairs, bool) or not isinstance(max_link_pairs, (int, float)) or not max_link_pairs >= 1:
        raise ParameterError("--max-link-pairs", max_link_pairs, "a number of link pairs >= 1")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ParameterError("seed", seed, "an integer >= 0")
    proto = scenario.protocol
    rounds = int(proto.purification_rounds) if proto.purification != "none" else 0
    from netsim.network import build_graph

    graph = build_graph(scenario)
    chains = chains_from_scenario(scenario, graph)
    _check_slots(scenario, chains, rounds)
    works = expected_work(chains, _components(chains, rounds + 1), rule, proto.cutoff_s, rounds)
    check_run_work(scenario, works, max_link_pairs)
    # the refusal reads the least work; contending demands may take up to the serial figure
    serial = max([w.link_pairs_serial for w in works], default=0.0)
    options = DesOptions(cutoff_s=proto.cutoff_s, purification=proto.purification,
                         purification_rounds=rounds, scheduling=proto.scheduling, swap_policy=proto.swap_policy,
                         max_link_pairs=GUARD_FACTOR * max(float(max_link_pairs), serial), progress=progress)
    runs = simulate(chains, rule=rule, seed=seed, options=options)
    rows = [demand_row(c, r) for c, r in zip(chains, runs)]
    for row, extra, demand in zip(rows, _analytic(scenario, graph, chains), scenario.demands):
        row.update(extra)
        row.update(verdicts(row, demand.min_fidelity, demand.min_rate_per_s))
    if ensembles:
        streams = np.random.SeedSequence([seed, 1]).spawn(len(chains))
        for row, c, ss in zip(rows, chains, streams):
            ens = send_ensemble(c, scenario.encoding, seed=np.random.default_rng(ss))
            row.update({f"ensemble_{k}": v for k, v in ens.to_dict().items()})
    horizon = max((r.simulated_time_s for r in runs), default=0.0)
    stop = {"pairs": rule.pairs, "time_s": rule.time_s, "precision": rule.precision} if rule else {"per_demand": True}
    notes = [f"95% intervals: normal approximation (z = {Z95:.3f}); rate interval from inter-delivery times.",
             "Coherent info: one-way hashing from whichever user serves it better, the larger of "
             "S(B) - S(AB) and S(A) - S(AB)."]
    link_rows, site_rows = _link_rows(chains, runs, horizon), _site_rows(chains, runs)
    _add_profiles(scenario, chains, rows, link_rows, site_rows)
    return RunResult(scenario.name, scenario.slug, int(seed), stop, rows, link_rows,
                     site_rows, interrupted=any(r.interrupted for r in runs), notes=notes)


def _add_profiles(scenario: Scenario, chains: list[Chain], demands: list[dict[str, Any]],
                  links: list[dict[str, Any]], sites: list[dict[str, Any]]) -> None:
    """A ``profile`` field in every row: the hardware profiles its figures rest on."""
    by_link = {link.name: link for link in scenario.links}
    by_site = {site.name: site for site in scenario.sites}
    for row in links:
        link = by_link.get(row["link"])
        ends = [by_site[n] for n in ((link.a, link.b) if link else ()) if by_site[n].role != "switch"]
        row["profile"] = profile_label(link.profile if link else None, *(s.profile for s in ends))
    for row in sites:
        row["profile"] = profile_label(by_site[row["site"]].profile)
    for row, chain in zip(demands, chains):
        hop_links = [by_link[n] for hop in chain.hops for n in hop.links if n in by_link]
        row["profile"] = profile_label(*(s.profile for s in chain.sites), *(link.profile for link in hop_links))
