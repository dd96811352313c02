"""Assemble a report from :class:`~netsim.report.sources.ReportData`: tables, figures, files.

:func:`report_tables` gives the named tables (``links``, ``demands`` and, for a sweep store,
``pivot-<metric>-<demand>...``); :func:`report_figures` the named figures; :func:`write_report`
writes both under an output directory and returns the paths.
"""

from __future__ import annotations

import difflib
import itertools
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from matplotlib.figure import Figure

from netsim.report.capacity import demand_rows, demand_table, link_rows, link_table
from netsim.report.pivot import pivot_table
from netsim.report.sources import ReportData, demand_names
from netsim.report.table import Table, render
from netsim.report.units import header

__all__ = ["DEFAULT_METRICS", "file_stem", "fixed_label", "metric_kind", "ordered_parameters", "parameter_groups",
           "report_figures", "report_tables", "rounded", "write_report"]

#: Metrics pivoted for a sweep store by default, with the key of their 95 % interval.
DEFAULT_METRICS: dict[str, str | None] = {"rate_per_s": "rate_ci95", "fidelity_mean": "fidelity_ci95",
                                          "useful_rate_per_s": "useful_rate_ci95"}
_MAX_GROUPS = 12
_SUFFIX = {"table": ".txt", "csv": ".csv", "md": ".md", "tex": ".tex", "json": ".json"}


def value_order(value: Any) -> tuple[int, float, str]:
    """Numbers in numeric order before anything else in text order."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return (0, float(value), "")
    return (1, 0.0, str(value))


def file_stem(text: str) -> str:
    """A safe file name from a table or figure name."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-").lower()
    return re.sub(r"-+\.", ".", stem) or "table"


def _simulated_time(data: ReportData) -> float | None:
    times = [float(d["simulated_time_s"]) for d in data.run_demands if d.get("simulated_time_s")]
    run_time = data.run.get("simulated_time_s") if data.run else None
    return float(run_time) if run_time else (max(times) if times else None)


def metric_kind(records: Sequence[Mapping[str, Any]], metric: str) -> str:
    """The kind of entity (``demand``, ``link``, ``site``, ``run``) whose records carry
    ``metric`` (demands first); a one-line error naming the stored metrics otherwise."""
    from netsim.errors import ParameterError

    for kind in ("demand", "link", "site", "run"):
        if any(r.get("kind") == kind and metric in r for r in records):
            return kind
    stored = _metric_names(records)
    close = sorted((n for n in stored if metric.lower() in n), key=lambda n: (not n.startswith(metric), n))
    close = close or difflib.get_close_matches(metric, stored, n=3)
    hint = f"; did you mean {', '.join(repr(n) for n in close[:4])}?" if close else ""
    raise ParameterError("--metric", metric, f"a stored demand, link or site metric{hint} (stored: "
                         + ", ".join(stored) + ")")


def _metric_names(records: Sequence[Mapping[str, Any]]) -> list[str]:
    """Stored metric names, without the swept parameters and the interval bounds."""
    skip = ("point_id", "repeat", "kind", "name")
    names = {k for r in records for k in r
             if k not in skip and "[" not in k and "." not in k and not re.search(r"_ci95(_low|_high)?$", k)}
    return sorted(names)


def _sweep_tables(data: ReportData, metrics: Mapping[str, str | None],
                  params: Sequence[str]) -> dict[str, Table]:
    tables: dict[str, Table] = {}
    rows_p, cols_p, rest = params[0], (params[1] if len(params) > 1 else None), list(params[2:])
    note = _profile_note(data)
    for metric, ci in metrics.items():
        kind = metric_kind(data.records, metric)
        records = [r for r in data.records if r.get("kind") == kind and metric in r]
        for name in demand_names(records, kind):
            mine = [r for r in records if r.get("name") == name]
            for fixed in _groups(mine, rest)[:_MAX_GROUPS]:
                chosen = [r for r in mine if all(r.get(k) == v for k, v in fixed.items())]
                where = fixed_label(fixed)
                title = f"{header(metric)}, {kind} {name}{where}".replace(f"{kind} , ", "")
                key = file_stem(f"pivot-{metric}-{name}{where}")
                tables[key] = pivot_table(chosen, metric, rows_p, cols_p, ci_key=ci, title=title)
                if note:
                    tables[key].notes.append(note)
    return tables


def _profile_note(data: ReportData) -> str:
    """Which hardware profiles a sweep's figures rest on (the base scenario's), for its tables."""
    from netsim.scenario.profiles import profile_label

    scenario = data.scenario
    if scenario is None:
        return ""
    label = profile_label(*(s.profile for s in scenario.sites if s.role != "switch"),
                          *(link.profile for link in scenario.links))
    return f"Hardware profile: {label} (the base scenario's; swept keys replace its values where they apply)."


def ordered_parameters(data: ReportData, params: Sequence[str] | None) -> list[str]:
    """The swept parameters with ``params`` first (rows, columns) and the others after them
    (held at each of their values in turn), so that no two swept values are ever averaged."""
    from netsim.errors import ParameterError

    chosen = list(params or [])
    for p in chosen:
        if p not in data.parameters:
            raise ParameterError("--param", p, "a swept parameter: " + ", ".join(data.parameters))
    return chosen + [p for p in data.parameters if p not in chosen]


def rounded(value: Any) -> str:
    """A swept value as people write it: numbers to four significant figures (``0.2100000003``
    -> ``0.21``), anything else as is."""
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


def fixed_label(fixed: Mapping[str, Any]) -> str:
    """``, KEY=VALUE`` for each parameter held fixed: the key as written, the value rounded."""
    return "".join(f", {k}={rounded(v)}" for k, v in fixed.items())


def parameter_groups(records: Sequence[Mapping[str, Any]], keys: Sequence[str]) -> list[dict[str, Any]]:
    """Every combination of the values of ``keys`` found in ``records`` (each value in order)."""
    return _groups(records, keys)


def _groups(records: Sequence[Mapping[str, Any]], keys: Sequence[str]) -> list[dict[str, Any]]:
    values = [sorted({repr(r.get(k)): r.get(k) for r in records}.values(), key=value_order) for k in keys]
    return [dict(zip(keys, combo)) for combo in itertools.product(*values)]


def report_tables(data: ReportData, *, metrics: Mapping[str, str | None] | None = None,
                  params: Sequence[str] | None = None) -> dict[str, Table]:
    """The report's tables by file stem.

    Parameters
    ----------
    data : ReportData
    metrics : mapping, optional
        Sweep metrics to pivot (metric key -> interval key); :data:`DEFAULT_METRICS` if omitted.
    params : sequence of str, optional
        Swept parameters to pivot over (rows, then columns, then one table per value of the
        rest); all swept parameters in sweep order if omitted.
    """
    tables: dict[str, Table] = {}
    if data.kind == "store":
        chosen = ordered_parameters(data, params)
        if chosen:
            stored = {k for r in data.records for k in r}
            defaults = {m: ci for m, ci in DEFAULT_METRICS.items() if m in stored}  # older stores lack some
            tables.update(_sweep_tables(data, metrics or defaults, chosen))
        if not data.links:
            return tables
    links = link_rows(data.links, data.run_links, _simulated_time(data))
    demands = demand_rows(data.demands, data.run_demands)
    tables.update(links=link_table(links, data.title), demands=demand_table(demands, data.title))
    tables.update(_cost_tables(data, demands))
    if data.kind == "run" and data.scenario is None:
        tables["links"].notes.append("The run's scenario file was not found, so the analytic "
                                     "columns are empty: pass --scenario FILE.")
    return tables


def _cost_tables(data: ReportData, demands: list[dict[str, Any]]) -> dict[str, Table]:
    """The network's price per element and per useful pair per second, when it is priced."""
    from netsim.design.costs import cost_table, demand_cost_rows, demand_cost_table, network_cost

    if data.scenario is None or not network_cost(data.scenario):
        return {}
    currency = data.scenario.costs.currency if data.scenario.costs else "units"
    per_demand = demand_cost_rows(data.scenario, data.demands, demands)
    return {"costs": cost_table(f"Cost: {data.title}", network_cost(data.scenario), currency),
            "demand_costs": demand_cost_table(f"Cost per useful pair per second: {data.title}", per_demand,
                                              currency)}


def report_figures(data: ReportData, tables: Mapping[str, Table] | None = None,
                   params: Sequence[str] | None = None) -> dict[str, Figure]:
    """The report's figures by file stem (see :mod:`netsim.report.plots` for each)."""
    from netsim.report import plots

    figures: dict[str, Figure] = {}
    if data.kind == "store":
        figures.update(plots.sweep_figures(data, ordered_parameters(data, params)))
    tables = tables or report_tables(data, params=params)
    if "links" in tables:
        figures.update(plots.network_figures(data, tables["links"].rows))
    return figures


def write_report(data: ReportData, out_dir: str | Path, fmt: str = "md", *,
                 figures: bool = True, metrics: Mapping[str, str | None] | None = None,
                 params: Sequence[str] | None = None, write: bool = True,
                 drawn: dict[str, Figure] | None = None) -> tuple[dict[str, Table], list[Path]]:
    """Write every table (one file each, in ``fmt``) and figure (PNG and PDF) to ``out_dir``
    (``write=False``: only build the tables). The figures are also put into ``drawn`` (by
    stem) when it is given, for a caller that uses them again."""
    out = Path(out_dir)
    tables = report_tables(data, metrics=metrics, params=params)  # bad options fail before any file
    written: list[Path] = []
    if not write:
        return tables, written
    out.mkdir(parents=True, exist_ok=True)
    for stem, table in tables.items():
        path = out / (stem + _SUFFIX[fmt] if fmt in _SUFFIX else stem)
        path.write_text(render(table, fmt), encoding="utf-8")
        written.append(path)
    if figures:
        from netsim.report.figures import save_figure

        for stem, fig in report_figures(data, tables, params).items():
            written += save_figure(fig, out / stem)
            if drawn is not None:
                drawn[stem] = fig
    return tables, written

