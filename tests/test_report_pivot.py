"""Pivot tables of a metric over one or two swept parameters."""

from __future__ import annotations

import csv
import io
import math

import numpy as np
import pytest

from netsim.errors import ParameterError
from netsim.report.pivot import aggregate, grid, grid_key, pivot_table, series, swept_parameters
from netsim.report.table import render

ALPHA = "links[*].attenuation_db_per_km"
T2 = "sites[*].t2_s"


def _records() -> list[dict]:
    records = []
    for alpha in (0.2, 0.25, 0.3):
        for t2 in (0.1, 1.0):
            rate = 1000.0 * 10 ** (-alpha * 20 / 10) * t2
            records.append({ALPHA: alpha, T2: t2, "demand": "Aldmoor-Cindervale",
                            "rate_per_s": rate, "rate_ci95": [0.9 * rate, 1.1 * rate]})
    return records


def test_one_parameter_table_holds_the_records_numbers() -> None:
    records = [r for r in _records() if r[T2] == 1.0]
    table = pivot_table(records, "rate_per_s", ALPHA, ci_key="rate_ci95")
    assert [row[ALPHA] for row in table.rows] == [0.2, 0.25, 0.3]
    assert [row["rate_per_s"] for row in table.rows] == [r["rate_per_s"] for r in records]
    assert [row["rate_per_s_ci95"] for row in table.rows] == [r["rate_ci95"] for r in records]
    assert table.columns[1].header == "delivered rate (pairs/s)"


def test_two_parameter_grid_places_every_value() -> None:
    table = pivot_table(_records(), "rate_per_s", ALPHA, T2, ci_key="rate_ci95")
    assert len(table.rows) == 3 and len(table.columns) == 1 + 2 * 2
    by_key = {(r[ALPHA], r[T2]): r["rate_per_s"] for r in _records()}
    for row in table.rows:
        assert row[grid_key("rate_per_s", T2, 0.1)] == by_key[(row[ALPHA], 0.1)]
        assert row[grid_key("rate_per_s", T2, 1.0)] == by_key[(row[ALPHA], 1.0)]
    parsed = list(csv.reader(io.StringIO(render(table, "csv"))))
    assert float(parsed[1][1]) == by_key[(0.2, 0.1)]


def test_repeats_are_combined_with_a_student_t_interval() -> None:
    # Mean 2 of {1, 2, 3}; half-width t_{0.975,2} * s / sqrt(3) with t = 4.303 (t table, memory).
    records = [{ALPHA: 0.2, "rate_per_s": v} for v in (1.0, 2.0, 3.0)]
    cell = aggregate(records, "rate_per_s", [ALPHA])[(0.2,)]
    assert cell.n == 3 and cell.value == 2.0
    assert cell.high - cell.value == pytest.approx(4.303 * 1.0 / math.sqrt(3), rel=1e-3)
    assert pivot_table(records, "rate_per_s", ALPHA).notes


def test_series_and_grid_arrays() -> None:
    x, y, low, high = series([r for r in _records() if r[T2] == 0.1], "rate_per_s", ALPHA,
                             ci_key="rate_ci95")
    assert np.allclose(x, [0.2, 0.25, 0.3]) and np.all(low < y) and np.all(y < high)
    _gx, _gy, z = grid(_records(), "rate_per_s", ALPHA, T2)
    assert z.shape == (2, 3) and z[1, 0] == pytest.approx(1000 * 10 ** (-0.4))


def test_swept_parameters_found() -> None:
    assert swept_parameters(_records(), [ALPHA, T2, "demand"]) == [ALPHA, T2]


def test_unknown_metric_names_what_exists() -> None:
    with pytest.raises(ParameterError, match=r"metric/parameter = 'rate' is not allowed; expected one of"):
        pivot_table(_records(), "rate", ALPHA)
