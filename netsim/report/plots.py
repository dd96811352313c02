"""The figures of a report, from its data: network map, per-scheme rate curves, sweep plots.

Analytic per-scheme curves come from the hardware layer's published link formulas
(``netsim.hardware.link_physics``) at a range of lengths; nothing is simulated here.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from netsim.report.build import file_stem, fixed_label, parameter_groups
from netsim.report.figures import heatmap, metric_vs_parameter, rate_vs_distance
from netsim.report.netmap import MapLink, MapSite, network_map
from netsim.report.pivot import REQUIREMENTS, grid, series
from netsim.report.sources import ReportData, demand_names
from netsim.report.units import header, param_label, param_value_label

__all__ = ["SCHEME_LENGTHS_KM", "map_links", "network_figures", "requirement_lines", "scheme_curves", "sweep_figures"]

SCHEME_LENGTHS_KM = np.linspace(1.0, 120.0, 60)


def _utilisation(data: ReportData) -> dict[str, float]:
    """Simulated utilisation by link name (``a-b`` as the engine writes it)."""
    out = {}
    for row in data.run_links:
        value, name = row.get("utilisation"), row.get("link", row.get("name"))
        if value is not None and name is not None:
            out[str(name)] = float(value)
    return out


def map_links(data: ReportData, link_rows: Sequence[Mapping[str, Any]]) -> list[MapLink]:
    """Links for the map: capacity = repeaterless bound (ebit/s), width = simulated utilisation."""
    use = _utilisation(data)
    links = []
    for row, link in zip(link_rows, data.scenario.links):
        capacity = row.get("plob_bits_per_s")
        used = use.get(link.name, use.get(f"{link.b}-{link.a}"))
        links.append(MapLink(link.a, link.b, math.nan if capacity is None else float(capacity), used))
    return links


def _template(scenario: Any) -> tuple[Any, Any, Any] | None:
    """The first link whose two ends hold memories, with its sites (for per-scheme curves)."""
    for link in scenario.links:
        a, b = scenario.site(link.a), scenario.site(link.b)
        if a.role != "switch" and b.role != "switch":
            return link, a, b
    return None


def scheme_curves(scenario: Any, lengths_km: ArrayLike = SCHEME_LENGTHS_KM
                  ) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Success probability per mode and attempt of each heralding scheme against length.

    Uses the scenario's first memory-to-memory link (fibre, detectors, sources) and varies only
    ``length_km`` and ``scheme``. Returns ``(rates by scheme, repeaterless bound -log2(1 - eta))``.
    """
    from netsim.hardware import link_physics
    from netsim.network import plob_bits_per_use
    from netsim.scenario.model import SCHEMES

    found = _template(scenario)
    if found is None:
        return {}, np.array([])
    link, a, b = found
    lengths = np.asarray(lengths_km, dtype=float)
    rates = {s: np.empty(lengths.size) for s in SCHEMES}
    bound = np.empty(lengths.size)
    for i, length in enumerate(lengths):
        for scheme in SCHEMES:
            physics = link_physics(dataclasses.replace(link, length_km=float(length), scheme=scheme), a, b)
            rates[scheme][i] = physics.success_probability
        bound[i] = plob_bits_per_use(physics.transmissivity)
    return rates, bound


def network_figures(data: ReportData, link_rows: Sequence[Mapping[str, Any]]) -> dict[str, Figure]:
    """The map of the network and the per-scheme rate curves (needs the scenario)."""
    if data.scenario is None:
        return {}
    scenario = data.scenario
    sites = [MapSite(s.name, s.role, s.x_km, s.y_km) for s in scenario.sites]
    figures = {"network-map": network_map(sites, map_links(data, link_rows))}
    rates, bound = scheme_curves(scenario)
    if rates:
        figures["rate-vs-distance"] = rate_vs_distance(
            SCHEME_LENGTHS_KM, rates, bound, ylabel="heralded pairs per attempt and mode")
    return figures


def requirement_lines(records: Sequence[Mapping[str, Any]], metric: str) -> dict[str, float]:
    """Label -> value of the requirement ``metric`` is judged against, one per distinct value
    in ``records`` (e.g. ``{"min fidelity 0.7": 0.7}``); empty when none is set."""
    key = REQUIREMENTS.get(metric)
    values = sorted({float(r[key]) for r in records if key and r.get(key) is not None})
    return {f"{key.replace('_per_s', '').replace('_', ' ')} {v:g}" + (" pairs/s" if key.endswith("per_s") else ""): v
            for v in values} if key else {}


def _changed_points(records: Sequence[Mapping[str, Any]], metric: str, param: str) -> tuple[list[float], list[float]]:
    """x and y of the points whose route differs from the base scenario's (mean over repeats)."""
    xs = sorted({float(r[param]) for r in records if r.get("route_changed") and r.get(metric) is not None})
    ys = [float(np.mean([float(r[metric]) for r in records if r.get(param) is not None
                         and float(r[param]) == x and r.get(metric) is not None])) for x in xs]
    return xs, ys


def _demand_figures(records: list[dict[str, Any]], name: str, metric: str, ci: str | None,
                    params: Sequence[str]) -> dict[str, Figure]:
    """Heatmap over the first two parameters and lines against the first, one per second value;
    one pair of figures per combination of the values of the further parameters, named in the
    title and the file name (key as written, value rounded). Requirement lines on the line plots,
    the passing cells marked on the heatmap, points whose route differs from the base ringed."""
    figures: dict[str, Figure] = {}
    for fixed in parameter_groups(records, params[2:]):
        chosen = [r for r in records if all(r.get(k) == v for k, v in fixed.items())]
        if not chosen:
            continue
        where = fixed_label(fixed)
        x, y, z = grid(chosen, metric, params[0], params[1])
        stem = file_stem(f"{metric}-{name}{where}")
        curves = {param_value_label(params[1], v): series(
            [r for r in chosen if r.get(params[1]) == v], metric, params[0], ci_key=ci) for v in y}
        marked = {param_value_label(params[1], v): _changed_points(
            [r for r in chosen if r.get(params[1]) == v], metric, params[0]) for v in y}
        title = f"demand {name}{where}"
        held = f"; held at {where[2:]}" if where else ""
        lines = requirement_lines(chosen, metric)
        passing = None
        if len(lines) == 1:
            passing = np.where(np.isfinite(z), z >= next(iter(lines.values())), False)
        changed = np.zeros(z.shape, dtype=bool)
        for r in chosen:
            if r.get("route_changed"):
                changed[np.searchsorted(y, float(r[params[1]])), np.searchsorted(x, float(r[params[0]]))] = True
        heat = heatmap(x, y, z, xlabel=param_label(params[0]), ylabel=param_label(params[1]),
                       zlabel=header(metric), title=title, passing=passing,
                       passing_label=f"meets {next(iter(lines), '')}",
                       marked=changed if changed.any() else None)
        heat.set_label(f"{header(metric)} of demand {name} over {params[0]} and {params[1]}{held} "
                       "(mean over repeats at each sweep point).")
        line_fig = metric_vs_parameter(curves, xlabel=param_label(params[0]), ylabel=header(metric),
                                       title=title, logy=metric.endswith("per_s"), requirements=lines,
                                       marked={k: v for k, v in marked.items() if v[0]})
        line_fig.set_label(f"{header(metric)} of demand {name} against {params[0]}, one line per value of "
                           f"{params[1]}{held}; shaded: 95 % intervals.")
        figures[f"heatmap-{stem}"] = heat
        figures[f"lines-{stem}"] = line_fig
    return figures


def sweep_figures(data: ReportData, params: Sequence[str],
                  metrics: Mapping[str, str | None] | None = None) -> dict[str, Figure]:
    """Each metric against the first swept parameter with 95 % bands (one line per demand);
    with two or more parameters, per demand a heatmap over the first two and lines against the
    first, for every combination of the values of the further parameters."""
    metrics = metrics or {"rate_per_s": "rate_ci95", "fidelity_mean": "fidelity_ci95",
                          "useful_rate_per_s": "useful_rate_ci95"}
    demands = [r for r in data.records if r.get("kind") == "demand"]
    if not params or not demands:
        return {}
    figures: dict[str, Figure] = {}
    for metric, ci in metrics.items():
        curves, marked = {}, {}
        for name in demand_names(demands):
            mine = [r for r in demands if r.get("name") == name and r.get(metric) is not None]
            if mine and len(params) == 1:
                curves[name] = series(mine, metric, params[0], ci_key=ci)
                points = _changed_points(mine, metric, params[0])
                if points[0]:
                    marked[name] = points
            elif mine:
                figures.update(_demand_figures(mine, name, metric, ci, params))
        if curves:
            fig = metric_vs_parameter(
                curves, xlabel=param_label(params[0]), ylabel=header(metric),
                logy=metric.endswith("per_s"),
                requirements=requirement_lines([r for r in demands if r.get(metric) is not None], metric),
                marked=marked)
            fig.set_label(f"{header(metric)} against {params[0]}, one line per demand; shaded: 95 % intervals.")
            figures[file_stem(f"{metric}-vs-{params[0]}")] = fig
    return figures
