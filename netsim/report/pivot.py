"""Pivot a metric over one or two swept parameters, from a list of flat records.

A record is one mapping per (sweep point, demand or link): the swept parameters under their
paths (``"links[*].attenuation_db_per_km"``), any labels (``"demand"``) and the metrics
(``"rate_per_s"``, ``"rate_ci95"``...). Records sharing the same parameter values (repeats with
independent seeds) are combined: with each record's own 95 % interval, the inverse-variance
weighted mean and its interval, widened by the Particle Data Group scale factor when the
repeats scatter more than their intervals allow (:func:`netsim.report.units.combine_ci95`);
without intervals, the mean with a Student-t 95 % interval from the spread. A single record
keeps its own interval.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from netsim.errors import ParameterError
from netsim.report.table import Column, Table
from netsim.report.units import combine_ci95, header, mean_ci95

__all__ = ["REQUIREMENTS", "Cell", "Extras", "aggregate", "extras", "grid", "grid_key", "pivot_table", "series",
           "short_name", "swept_parameters"]


@dataclass(frozen=True)
class Cell:
    """A metric at one parameter point: value, 95 % interval and the number of records."""

    value: float
    low: float
    high: float
    n: int

    @property
    def interval(self) -> list[float] | None:
        if math.isnan(self.low) or math.isnan(self.high):
            return None
        return [self.low, self.high]


def _number(value: Any) -> float:
    return math.nan if value is None else float(value)


def _combine(group: list[Mapping[str, Any]], metric: str, ci_key: str | None) -> Cell:
    values = [_number(r.get(metric)) for r in group]
    if len(group) == 1:
        ci = group[0].get(ci_key) if ci_key else None
        low, high = (float(ci[0]), float(ci[1])) if ci else (math.nan, math.nan)
        return Cell(values[0], low, high, 1)
    if ci_key:
        mean, low, high = combine_ci95(values, [r.get(ci_key) for r in group])
    else:
        mean, low, high = mean_ci95(values)
    return Cell(mean, low, high, len(group))


def _check_keys(records: Sequence[Mapping[str, Any]], keys: Iterable[str]) -> None:
    available = sorted(set().union(*(r.keys() for r in records))) if records else []
    for key in keys:
        if not any(key in r for r in records):
            raise ParameterError("metric/parameter", key, "one of " + ", ".join(available))


def aggregate(records: Sequence[Mapping[str, Any]], metric: str, params: Sequence[str],
              ci_key: str | None = None) -> dict[tuple[Any, ...], Cell]:
    """Group ``records`` by the values of ``params`` and combine ``metric`` in each group.

    Returns
    -------
    dict
        Parameter-value tuple -> :class:`Cell`, in sorted order of the parameter values.
    """
    _check_keys(records, [metric, *params])
    groups: dict[tuple[Any, ...], list[Mapping[str, Any]]] = {}
    for record in records:
        groups.setdefault(tuple(record.get(p) for p in params), []).append(record)
    return {key: _combine(groups[key], metric, ci_key) for key in sorted(groups, key=_sort_key)}


def _sort_key(key: tuple[Any, ...]) -> tuple[Any, ...]:
    return tuple((0, v, "") if isinstance(v, (int, float)) else (1, 0, str(v)) for v in key)


def swept_parameters(records: Sequence[Mapping[str, Any]], candidates: Iterable[str]) -> list[str]:
    """The keys among ``candidates`` that take more than one value in ``records``."""
    return [k for k in candidates if len({repr(r.get(k)) for r in records}) > 1]


def short_name(path: str) -> str:
    """The last key of a parameter path: ``"sites[role=repeater].t2_s"`` -> ``"t2_s"``."""
    return path.rsplit(".", 1)[-1]


#: The requirement a metric is judged against: metric -> the record key holding the minimum.
REQUIREMENTS: dict[str, str] = {"fidelity_mean": "min_fidelity", "useful_rate_per_s": "min_rate_per_s"}


@dataclass(frozen=True)
class Extras:
    """Per parameter point: whether the metric meets its requirement (None: no requirement)
    and the route when it differs from the base scenario's (None: same, or not recorded)."""

    meets: bool | None
    changed_route: str | None


def extras(records: Sequence[Mapping[str, Any]], metric: str, params: Sequence[str],
           cells: Mapping[tuple[Any, ...], Cell]) -> dict[tuple[Any, ...], Extras]:
    """The verdict and the route change of every cell (see :class:`Extras`)."""
    groups: dict[tuple[Any, ...], list[Mapping[str, Any]]] = {}
    for record in records:
        groups.setdefault(tuple(record.get(p) for p in params), []).append(record)
    out = {}
    for key, cell in cells.items():
        group = groups.get(key, [])
        floor = next((r[REQUIREMENTS[metric]] for r in group if metric in REQUIREMENTS
                      and r.get(REQUIREMENTS[metric]) is not None), None)
        meets = None if floor is None or math.isnan(cell.value) else bool(cell.value >= float(floor))
        changed = next((str(r.get("route")) for r in group if r.get("route_changed")), None)
        out[key] = Extras(meets, changed)
    return out


def _one_parameter(cells: dict[tuple[Any, ...], Cell], metric: str, param: str,
                   more: Mapping[tuple[Any, ...], Extras]) -> Table:
    ci = f"{metric}_ci95"
    columns = [Column(param, param), Column(metric, header(metric), ci_key=ci),
               Column(ci, "95% CI", ci_key=ci), Column("n", "records")]
    if any(e.meets is not None for e in more.values()):
        columns.append(Column("meets", f"meets {REQUIREMENTS[metric].replace('_per_s', '').replace('_', ' ')}"))
    if any(e.changed_route for e in more.values()):
        columns.append(Column("route", "route (if not the base scenario's)"))
    rows: list[Mapping[str, Any]] = [{param: k[0], metric: c.value, ci: c.interval, "n": c.n,
                                      "meets": more[k].meets, "route": more[k].changed_route}
                                     for k, c in cells.items()]
    return Table(f"{header(metric)} against {param}", columns, rows)


def grid_key(metric: str, col_param: str, value: Any, interval: bool = False) -> str:
    """The row key (and DataFrame column) of a two-way pivot's cell: the metric, or its
    interval, at one value of the column parameter (key as written, value rounded):
    ``grid_key("rate_per_s", "sites[*].t2_s", 0.1)`` -> ``"rate_per_s at sites[*].t2_s=0.1"``."""
    text = f"{value:.4g}" if isinstance(value, float) else str(value)
    return f"{metric}{'_ci95' if interval else ''} at {col_param}={text}"


def _two_parameters(cells: dict[tuple[Any, ...], Cell], metric: str, rp: str, cp: str,
                    more: Mapping[tuple[Any, ...], Extras]) -> Table:
    col_values = sorted({k[1] for k in cells}, key=lambda v: _sort_key((v,)))
    judged = any(e.meets is not None for e in more.values())
    columns = [Column(rp, f"{rp} \\ {cp}")]
    for v in col_values:
        key, ci = grid_key(metric, cp, v), grid_key(metric, cp, v, interval=True)
        columns += [Column(key, f"{short_name(cp)}={v:g}" if isinstance(v, (int, float))
                           else f"{short_name(cp)}={v}", ci_key=ci),
                    Column(ci, "95% CI", ci_key=ci)]
        if judged:
            columns.append(Column(f"{key} meets", "meets"))
    rows: dict[Any, dict[str, Any]] = {}
    for (r, c), cell in cells.items():
        row = rows.setdefault(r, {rp: r})
        key = grid_key(metric, cp, c)
        row[key], row[grid_key(metric, cp, c, interval=True)] = cell.value, cell.interval
        row[f"{key} meets"] = more[(r, c)].meets
    return Table(f"{header(metric)} over {rp} and {cp}", columns, [*rows.values()])


def _route_notes(more: Mapping[tuple[Any, ...], Extras], params: Sequence[str]) -> list[str]:
    changed = [(k, e.changed_route) for k, e in more.items() if e.changed_route]
    if not changed:
        return []
    where = "; ".join(", ".join(f"{short_name(p)}={v}" for p, v in zip(params, k)) + f": {route}"
                      for k, route in changed)
    return [f"Route differs from the base scenario's at {len(changed)} point(s), so those figures are "
            f"of another path: {where}."]


def pivot_table(records: Sequence[Mapping[str, Any]], metric: str, row_param: str,
                col_param: str | None = None, ci_key: str | None = None,
                title: str | None = None) -> Table:
    """A table of ``metric`` against one swept parameter, or a grid over two.

    Parameters
    ----------
    records : sequence of mapping
        Flat records (see the module docstring); filter them (one demand) beforehand.
    metric : str
        The metric key, e.g. ``"rate_per_s"``.
    row_param, col_param : str
        Swept parameter paths; ``col_param`` makes a two-way grid.
    ci_key : str, optional
        The key of the metric's own 95 % interval in a record, used when a point has one record.
    title : str, optional
        Replaces the generated title.
    """
    params = [row_param] if col_param is None else [row_param, col_param]
    cells = aggregate(records, metric, params, ci_key)
    more = extras(records, metric, params, cells)
    table = (_one_parameter(cells, metric, row_param, more) if col_param is None
             else _two_parameters(cells, metric, row_param, col_param, more))
    if title:
        table.title = title
    table.notes.extend(_route_notes(more, params))
    if any(e.meets is not None for e in more.values()):
        table.notes.append(f"meets: the value at the point reaches the demand's {REQUIREMENTS[metric]}.")
    if any(c.n > 1 for c in cells.values()):
        table.notes.append("Points with several records (repeats): inverse-variance weighted mean of the "
                           "repeats' own estimates, 95% interval from their intervals, widened by the "
                           "Particle Data Group scale factor when they scatter more than those allow "
                           "(Student-t on the spread where a record has no interval).")
    return table


def series(records: Sequence[Mapping[str, Any]], metric: str, param: str,
           ci_key: str | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Arrays ``(x, y, low, high)`` of ``metric`` against ``param`` for a band plot."""
    cells = aggregate(records, metric, [param], ci_key)
    x = np.array([float(k[0]) for k in cells])
    cols = np.array([[c.value, c.low, c.high] for c in cells.values()], dtype=float).reshape(-1, 3)
    return x, cols[:, 0], cols[:, 1], cols[:, 2]


def grid(records: Sequence[Mapping[str, Any]], metric: str, x_param: str,
         y_param: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Arrays ``(x, y, z)`` with ``z[i, j]`` the metric at ``y[i]``, ``x[j]`` (NaN if missing)."""
    cells = aggregate(records, metric, [x_param, y_param])
    x = np.array(sorted({float(k[0]) for k in cells}))
    y = np.array(sorted({float(k[1]) for k in cells}))
    z = np.full((y.size, x.size), np.nan)
    for (xv, yv), cell in cells.items():
        z[np.searchsorted(y, float(yv)), np.searchsorted(x, float(xv))] = cell.value
    return x, y, z
