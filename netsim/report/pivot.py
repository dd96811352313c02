"""Pivot a metric over one or two swept parameters, from a list of flat records.

A record is one mapping per (sweep point, demand or link): the swept parameters under their
paths (``"links[*].attenuation_db_per_km"``), any labels (``"demand"``) and the metrics
(``"rate_per_s"``, ``"rate_ci95"``...). Records sharing the same parameter values (repeats with
independent seeds) are combined: their mean with a Student-t 95 % interval from the spread.
A single record keeps its own interval.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from netsim.errors import ParameterError
from netsim.report.table import Column, Table
from netsim.report.units import header, mean_ci95

__all__ = ["grid_key", "Cell", "aggregate", "grid", "pivot_table", "series", "short_name", "swept_parameters"]


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


def _one_parameter(cells: dict[tuple[Any, ...], Cell], metric: str, param: str) -> Table:
    ci = f"{metric}_ci95"
    columns = [Column(param, param), Column(metric, header(metric), ci_key=ci),
               Column(ci, "95% CI", ci_key=ci), Column("n", "records")]
    rows: list[Mapping[str, Any]] = [{param: k[0], metric: c.value, ci: c.interval, "n": c.n} for k, c in cells.items()]
    return Table(f"{header(metric)} against {param}", columns, rows)


def grid_key(metric: str, col_param: str, value: Any, interval: bool = False) -> str:
    """The row key (and DataFrame column) of a two-way pivot's cell: the metric, or its
    interval, at one value of the column parameter (key as written, value rounded):
    ``grid_key("rate_per_s", "sites[*].t2_s", 0.1)`` -> ``"rate_per_s at sites[*].t2_s=0.1"``."""
    text = f"{value:.4g}" if isinstance(value, float) else str(value)
    return f"{metric}{'_ci95' if interval else ''} at {col_param}={text}"


def _two_parameters(cells: dict[tuple[Any, ...], Cell], metric: str, rp: str, cp: str) -> Table:
    col_values = sorted({k[1] for k in cells}, key=lambda v: _sort_key((v,)))
    columns = [Column(rp, f"{rp} \\ {cp}")]
    for v in col_values:
        key, ci = grid_key(metric, cp, v), grid_key(metric, cp, v, interval=True)
        columns += [Column(key, f"{short_name(cp)}={v:g}" if isinstance(v, (int, float))
                           else f"{short_name(cp)}={v}", ci_key=ci),
                    Column(ci, "95% CI", ci_key=ci)]
    rows: dict[Any, dict[str, Any]] = {}
    for (r, c), cell in cells.items():
        row = rows.setdefault(r, {rp: r})
        row[grid_key(metric, cp, c)], row[grid_key(metric, cp, c, interval=True)] = cell.value, cell.interval
    return Table(f"{header(metric)} over {rp} and {cp}", columns, [*rows.values()])


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
    table = (_one_parameter(cells, metric, row_param) if col_param is None
             else _two_parameters(cells, metric, row_param, col_param))
    if title:
        table.title = title
    if any(c.n > 1 for c in cells.values()):
        table.notes.append("Points with several records: mean and Student-t 95% interval of the mean.")
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
