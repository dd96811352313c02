"""Sweep specifications: axes of values, grid or zip, repeats, seeds and point identities.

A sweep is given by the scenario's ``[sweep]`` table and/or ``--vary KEY=VALUES`` options (a
``--vary`` replaces a file axis with the same key). ``[sweep]`` keys::

    vary      table KEY -> VALUES (KEY is a key path, see netsim.sweep.keypath)
    combine   "grid" (every combination, default) or "zip" (i-th value of every axis together)
    repeats   independent repetitions of every combination (integer >= 1, default 1)
    seed      base seed (integer >= 0, default 0)
    pairs | time_s | precision   the engine's stop rule for every point (at most one)

VALUES is a list of numbers ``[10, 20, 40]``; a string ``"10,20,40"``, ``"lin:FROM:TO:N"`` (N evenly
spaced values, both ends included) or ``"log:FROM:TO:N"`` (N values evenly spaced in log, ends
included, FROM and TO > 0); or a table ``{from = 1, to = 100, points = 5, scale = "log"}``.

Identity and seed of a point
----------------------------
A point is the mapping key -> value plus its repeat index. Its identity is the SHA-256 of the
canonical JSON of both, so it does not depend on the point's position in the listing. Its seed is
drawn from ``numpy.random.SeedSequence(base_seed, spawn_key=<identity words>)``, so a result
does not depend on the order, the worker or the executor.
"""

from __future__ import annotations

import copy
import hashlib
import itertools
import json
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from netsim.errors import Problem, ScenarioError, format_value, shorten
from netsim.scenario.fields import is_finite_number
from netsim.sweep.keypath import KeyPath, assign, integer_keys, parse_key, resolve

__all__ = [
    "MAX_POINTS",
    "STOP_KEYS",
    "Axis",
    "Point",
    "SweepSpec",
    "build_spec",
    "expand",
    "parse_values",
    "point_data",
    "point_identity",
    "point_seed",
]

MAX_POINTS = 100_000
STOP_KEYS = ("pairs", "time_s", "precision")
_TABLE_KEYS = ("vary", "combine", "repeats", "seed") + STOP_KEYS
_VALUES_ALLOWED = ("a list of numbers, 'A,B,C', 'lin:FROM:TO:N', 'log:FROM:TO:N' or "
                   "{from, to, points, scale = 'linear'|'log'}")


@dataclass(frozen=True)
class Axis:
    """One varied key: its path and values; ``where`` is how the user wrote it (for messages)."""

    key: KeyPath
    values: tuple[float | int, ...]
    where: str


@dataclass(frozen=True)
class SweepSpec:
    """A validated sweep specification."""

    axes: tuple[Axis, ...]
    combine: str = "grid"
    repeats: int = 1
    seed: int = 0
    stop: Mapping[str, float | int] = field(default_factory=dict)

    def canonical(self) -> dict[str, Any]:
        """The JSON-ready content that defines the sweep's results."""
        return {"axes": [[str(a.key), list(a.values)] for a in self.axes], "combine": self.combine,
                "repeats": self.repeats, "seed": self.seed, "stop": dict(sorted(self.stop.items()))}

    @property
    def hash(self) -> str:
        """SHA-256 of the canonical JSON of :meth:`canonical`."""
        return hashlib.sha256(_canonical_json(self.canonical()).encode()).hexdigest()


@dataclass(frozen=True)
class Point:
    """One run of the sweep: parameters (key path -> value), repeat index, identity and seed."""

    point_id: str
    ordinal: int
    parameters: Mapping[str, float | int]
    repeat: int
    seed: int


class _Detail(ValueError):
    """A value problem whose message already says what is allowed."""


def _canonical_json(obj: Any) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


def _number(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError
    return value


def _tidy(x: float) -> float:
    return float(f"{x:.12g}")


def _range(start: float, stop: float, n: Any, scale: str) -> tuple[float, ...]:
    if isinstance(n, bool) or not isinstance(n, int) or n < 2 or n > MAX_POINTS:
        raise _Detail(f"points = {format_value(n)} is not allowed; expected an integer in [2, {MAX_POINTS}]")
    if scale == "log":
        if start <= 0 or stop <= 0:
            raise _Detail(f"from = {format_value(start)}, to = {format_value(stop)} is not allowed; "
                          "expected FROM > 0 and TO > 0 for a log range")
        return tuple(_tidy(v) for v in np.geomspace(start, stop, n))
    if scale != "linear":
        raise _Detail(f"scale = {format_value(scale)} is not allowed; expected 'linear' or 'log'")
    return tuple(_tidy(v) for v in np.linspace(start, stop, n))


def _values_from_text(text: str) -> tuple[float, ...]:
    match = re.fullmatch(r"\s*(lin|log):([^:]+):([^:]+):\s*(\d+)\s*", text)
    if match:
        scale = "log" if match[1] == "log" else "linear"
        return _range(_number(match[2]), _number(match[3]), int(match[4]), scale)
    return tuple(_number(part) for part in text.split(","))


def _values_from_table(table: Mapping[str, Any]) -> tuple[float, ...]:
    extra = sorted(set(table) - {"from", "to", "points", "scale"})
    if extra or not {"from", "to", "points"} <= set(table):
        raise ValueError
    ends = [table["from"], table["to"]]
    if not all(_is_finite(v) for v in ends):
        raise ValueError
    return _range(float(ends[0]), float(ends[1]), table["points"], table.get("scale", "linear"))


def _is_real(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _is_finite(v: Any) -> bool:
    """A finite number; an integer too large for a float is not (``math.isfinite`` would raise
    OverflowError on it, as it did for a 400-digit integer in a file's [sweep.vary] list)."""
    return _is_real(v) and is_finite_number(v)


def parse_values(raw: Any) -> tuple[float | int, ...]:
    """Turn a VALUES specification into a tuple of numbers; ``ValueError`` names what is allowed."""
    try:
        if isinstance(raw, str):
            values: tuple[float | int, ...] = _values_from_text(raw)
        elif isinstance(raw, Mapping):
            values = _values_from_table(raw)
        elif isinstance(raw, (list, tuple)) and all(_is_finite(v) for v in raw):
            values = tuple(raw)
        else:
            raise ValueError
    except _Detail:
        raise
    except (ValueError, TypeError):
        raise ValueError(f"{format_value(raw)} is not allowed; expected {_VALUES_ALLOWED}") from None
    if not values:
        raise ValueError(f"{format_value(raw)} is not allowed; expected at least one value")
    return values


def _make_axis(key_text: str, raw: Any, where: str) -> Axis:
    key = parse_key(key_text)
    values = parse_values(raw)
    if key.key in integer_keys(key.section):
        if any(float(v) != round(float(v)) for v in values):
            raise ValueError(f"{format_value(list(values))} is not allowed; {key.key} takes whole numbers")
        values = tuple(round(float(v)) for v in values)
    else:
        values = tuple(float(v) for v in values)
    if len(set(values)) != len(values):
        raise ValueError(f"{format_value(list(values))} is not allowed; expected distinct values")
    return Axis(key, values, where)


def _check_choice(problems: list[Problem], where: str, value: Any, ok: bool, allowed: str) -> None:
    if not ok:
        problems.append(Problem(where, f"{format_value(value)} is not allowed; expected {allowed}"))


def _table_axes(table: Mapping[str, Any], problems: list[Problem]) -> list[Axis]:
    vary = table.get("vary", {})
    if not isinstance(vary, Mapping):
        problems.append(Problem("sweep.vary", f"{format_value(vary)} is not allowed; expected a table of KEY = VALUES"))
        return []
    axes = []
    for key_text, raw in vary.items():
        where = (f'sweep.vary."{shorten(key_text)}"' if str(key_text).isprintable()
                 else f"sweep.vary.{format_value(key_text)}")
        try:
            axes.append(_make_axis(key_text, raw, where))
        except ValueError as exc:
            problems.append(Problem(where, str(exc)))
    return axes


def _split_vary(item: str) -> tuple[str, str, str]:
    """Split ``KEY=VALUES`` at the first ``=`` outside brackets (``sites[role=x].t2_s=...``)."""
    depth = 0
    for i, ch in enumerate(item):
        depth += (ch == "[") - (ch == "]")
        if ch == "=" and depth == 0:
            return item[:i], "=", item[i + 1:]
    return item, "", ""


def _cli_axes(vary: Sequence[str], problems: list[Problem]) -> list[Axis]:
    axes = []
    for item in vary:
        key_text, sep, raw = _split_vary(item)
        shown = key_text.strip()
        where = f"--vary {shorten(shown) if shown.isprintable() else format_value(shown)}"
        if not sep:
            problems.append(Problem("--vary", f"{format_value(item)} is not allowed; expected KEY=VALUES"))
            continue
        try:
            axes.append(_make_axis(key_text, raw, where))
        except ValueError as exc:
            problems.append(Problem(where, str(exc)))
    return axes


def _merge_axes(file_axes: list[Axis], cli_axes: list[Axis]) -> list[Axis]:
    merged = {str(a.key): a for a in file_axes}
    for axis in cli_axes:
        merged[str(axis.key)] = axis
    return list(merged.values())


def _scalar_options(table: Mapping[str, Any], overrides: Mapping[str, Any],
                    problems: list[Problem]) -> dict[str, Any]:
    opts = {k: table[k] for k in ("combine", "repeats", "seed") + STOP_KEYS if k in table}
    given_stop = {k: v for k, v in overrides.items() if k in STOP_KEYS and v is not None}
    if given_stop:
        opts = {k: v for k, v in opts.items() if k not in STOP_KEYS}
    opts.update({k: v for k, v in overrides.items() if v is not None})
    where = {k: (f"--{k.replace('_', '-')}" if overrides.get(k) is not None else f"sweep.{k}") for k in opts}
    _check_choice(problems, where.get("combine", ""), opts.get("combine"),
                  opts.get("combine", "grid") in ("grid", "zip"), "'grid' or 'zip'")
    for name, low in (("repeats", 1), ("seed", 0), ("pairs", 1)):
        value = opts.get(name, low)
        _check_choice(problems, where.get(name, ""), value, _is_int(value) and value >= low,
                      f"an integer >= {low}")
    checks = {"time_s": ("a number > 0 (s)", lambda v: v > 0),
              "precision": ("a number in (0, 1)", lambda v: 0 < v < 1)}
    for name, (allowed, test) in checks.items():
        value = opts.get(name, 0.5)
        _check_choice(problems, where.get(name, ""), value,
                      _is_finite(value) and test(value), allowed)
    stops = [k for k in STOP_KEYS if k in opts]
    if len(stops) > 1:
        problems.append(Problem("sweep", f"{', '.join(stops)} given together; expected at most one stop rule"))
    return {"where": where, **opts}


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def build_spec(table: Mapping[str, Any] | None, vary: Sequence[str] = (),
               **overrides: Any) -> SweepSpec:
    """Build a :class:`SweepSpec` from a ``[sweep]`` table and ``--vary`` items.

    ``overrides`` (``combine``, ``repeats``, ``seed``, ``pairs``, ``time_s``, ``precision``; None
    means "not given") replace the table's values; a stop rule given here replaces the table's.
    Raises :class:`ScenarioError` listing every problem, one line each.
    """
    problems: list[Problem] = []
    table = table if table is not None else {}
    if not isinstance(table, Mapping):
        raise ScenarioError([Problem("sweep", f"{format_value(table)} is not allowed; expected a table")])
    for key in table:
        if key not in _TABLE_KEYS:
            problems.append(Problem(f"sweep.{key}", f"unknown key; expected one of {', '.join(_TABLE_KEYS)}"))
    axes = _merge_axes(_table_axes(table, problems), _cli_axes(vary, problems))
    opts = _scalar_options(table, overrides, problems)
    if not axes and not problems:
        problems.append(Problem("sweep.vary", "no axes; expected at least one KEY = VALUES (or --vary)"))
    combine = opts.get("combine", "grid")
    if combine == "zip" and len({len(a.values) for a in axes}) > 1:
        sizes = ", ".join(f"{a.where} has {len(a.values)}" for a in axes)
        problems.append(Problem(opts["where"]["combine"], f"zipped axes need equal lengths; {sizes}"))
    if problems:
        raise ScenarioError(problems)
    stop = {k: opts[k] for k in STOP_KEYS if k in opts}
    return SweepSpec(tuple(axes), combine, opts.get("repeats", 1), opts.get("seed", 0), stop)


def point_identity(parameters: Mapping[str, float | int], repeat: int) -> str:
    """SHA-256 (hex) of the canonical JSON of a point's parameters and repeat index."""
    return hashlib.sha256(_canonical_json({"parameters": dict(parameters), "repeat": repeat}).encode()).hexdigest()


def point_seed(base_seed: int, point_id: str) -> int:
    """A 63-bit engine seed from the base seed and the point's identity (SeedSequence)."""
    words = [int(point_id[i:i + 8], 16) for i in range(0, 32, 8)]
    state = np.random.SeedSequence(base_seed, spawn_key=words).generate_state(1, np.uint64)
    return int(state[0] >> np.uint64(1))


def _combinations(spec: SweepSpec) -> list[tuple[float | int, ...]]:
    columns = [a.values for a in spec.axes]
    if spec.combine == "zip":
        return list(zip(*columns))
    return list(itertools.product(*columns))


def expand(spec: SweepSpec) -> list[Point]:
    """Every point of the sweep, in listing order (combinations, then repeats)."""
    combos = _combinations(spec)
    total = len(combos) * spec.repeats
    if total > MAX_POINTS:
        raise ScenarioError([Problem("sweep", f"{total} points is not allowed; expected at most {MAX_POINTS}")])
    points: list[Point] = []
    for combo in combos:
        params = {str(a.key): v for a, v in zip(spec.axes, combo)}
        for repeat in range(spec.repeats):
            pid = point_identity(params, repeat)
            points.append(Point(pid, len(points), params, repeat, point_seed(spec.seed, pid)))
    return points


def point_data(base: Mapping[str, Any], spec: SweepSpec, parameters: Mapping[str, Any]) -> dict[str, Any]:
    """A deep copy of the scenario data with the point's overrides applied (``[sweep]`` removed)."""
    data = copy.deepcopy(dict(base))
    data.pop("sweep", None)
    for axis in spec.axes:
        assign(data, axis.key, parameters[str(axis.key)])
    return data


def check_targets(base: Mapping[str, Any], spec: SweepSpec) -> None:
    """Check that every axis addresses entries of the scenario and no two axes overlap."""
    problems: list[Problem] = []
    seen: dict[tuple[Any, ...], str] = {}
    for axis in spec.axes:
        try:
            locations = resolve(dict(base), axis.key)
            assign(copy.deepcopy(dict(base)), axis.key, axis.values[0])
        except ValueError as exc:
            problems.append(Problem(axis.where, str(exc)))
            continue
        for loc in locations:
            target = (*loc, axis.key.key)
            if target in seen:
                problems.append(Problem(axis.where, f"sets the same scenario key as {seen[target]}"))
                break
            seen[target] = axis.where
    if problems:
        raise ScenarioError(problems)
