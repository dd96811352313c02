"""What runs inside a worker: one point, timed, with its error or its flattened metrics.

A *point function* takes the point's scenario data and returns a JSON-ready result mapping::

    fn(data: dict, *, source: str | None, seed: int, stop: Mapping[str, float | int]) -> Mapping

The default, :func:`engine_point`, loads the data (``netsim.scenario.load_data``) and calls
``netsim.engine.run(scenario, seed=seed, **stop).to_dict()``. Any module-level callable (or
instance of a module-level class) with that signature can be injected, so process pools and
Dask can pickle it. :func:`execute` wraps it: it never raises for an error of the point; the
error text becomes a failed :class:`~netsim.sweep.store.PointRecord`.
"""

from __future__ import annotations

import ctypes
import math
import threading
import time
import traceback
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any, Self

from netsim.sweep.store import PointRecord

__all__ = [
    "PointFunction",
    "PointTask",
    "PointTimeout",
    "engine_point",
    "execute",
    "flatten_result",
    "utc_now",
]

PointFunction = Callable[..., Mapping[str, Any]]

#: Result keys holding per-entity metrics -> the ``kind`` stored for their rows.
_KINDS = {"demands": "demand", "links": "link", "sites": "site"}
#: Keys that may hold an entity's name in a result row (the first string found is used).
_NAME_KEYS = ("name", "demand", "link", "site")
#: Top-level result keys not stored as metrics (the seed is a column of the points table).
_SKIPPED = ("seed",)


class PointTimeout(Exception):
    """Raised inside a point that ran longer than ``--point-timeout-s``."""


@dataclass(frozen=True)
class PointTask:
    """Everything a worker needs to run one point (small and picklable)."""

    point_id: str
    ordinal: int
    seed: int
    data: dict[str, Any]
    source: str | None = None
    stop: Mapping[str, float | int] = field(default_factory=dict)
    timeout_s: float | None = None


def utc_now() -> str:
    """The current UTC time as ISO 8601 with milliseconds and a ``Z``."""
    return datetime.now(UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def engine_point(data: dict[str, Any], *, source: str | None, seed: int,
                 stop: Mapping[str, float | int], max_link_pairs: float | None = None) -> Mapping[str, Any]:
    """The default point function: load the data and run the engine with the point's seed
    (``max_link_pairs``: the engine's limit on expected link pairs, None for its default;
    bind it with ``functools.partial``, which pickles)."""
    from netsim import engine
    from netsim.scenario import load_data

    scenario = load_data(data, source)
    pairs = stop.get("pairs")
    time_s, precision = stop.get("time_s"), stop.get("precision")
    from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS

    limit = DEFAULT_MAX_LINK_PAIRS if max_link_pairs is None else float(max_link_pairs)
    result = engine.run(scenario, pairs=None if pairs is None else int(pairs),
                        time_s=None if time_s is None else float(time_s),
                        precision=None if precision is None else float(precision), seed=seed,
                        max_link_pairs=limit)
    return result.to_dict()


def _as_value(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None if value is None else float(value)
    number = float(value)
    return number if math.isfinite(number) else None


def _flatten(prefix: str, value: Any, out: list[tuple[str, float | None]]) -> None:
    if isinstance(value, Mapping):
        for key, sub in value.items():
            _flatten(f"{prefix}.{key}" if prefix else str(key), sub, out)
    elif isinstance(value, (list, tuple)) and all(_is_scalar(v) for v in value):
        names = ("low", "high") if len(value) == 2 and prefix.endswith("ci95") else None
        for i, sub in enumerate(value):
            out.append((f"{prefix}_{names[i]}" if names else f"{prefix}[{i}]", _as_value(sub)))
    elif _is_scalar(value):
        out.append((prefix, _as_value(value)))


def _is_scalar(value: Any) -> bool:
    if value is None or isinstance(value, bool):
        return True
    try:
        float(value)
    except (TypeError, ValueError):
        return False
    return not isinstance(value, str)


def _entities(value: Any) -> list[tuple[str, Any]]:
    if isinstance(value, Mapping):
        return [(str(k), v) for k, v in value.items()]
    if isinstance(value, (list, tuple)):
        return [(_entity_name(v, i), v) for i, v in enumerate(value)]
    return []


def _entity_name(entity: Any, index: int) -> str:
    if isinstance(entity, Mapping):
        for key in _NAME_KEYS:
            if isinstance(entity.get(key), str):
                return str(entity[key])
    return str(index)


def flatten_result(result: Mapping[str, Any]) -> list[tuple[str, str, str, float | None]]:
    """Metric rows ``(kind, name, metric, value)`` from a run result mapping.

    ``demands``/``links``/``sites`` (a list of mappings named by their ``name``, ``demand``,
    ``link`` or ``site`` string, or a mapping by name) give rows of kind ``demand``/``link``/``site``; other numeric top-level entries give kind ``run``
    with name ``""``. A demand's ``route`` (site names) gives one row of kind ``route``: name =
    the demand, metric = the site names joined by ``" > "``, value = its hops. Nested mappings become dotted metric names; a ``..._ci95`` pair becomes
    ``..._ci95_low`` and ``..._ci95_high``; other number lists get ``[i]``. Strings are skipped;
    None, NaN and infinities are stored as NULL; booleans as 0/1.
    """
    rows: list[tuple[str, str, str, float | None]] = []
    for key, value in result.items():
        if key in _SKIPPED:
            continue
        if key in _KINDS:
            for name, entity in _entities(value):
                flat: list[tuple[str, float | None]] = []
                _flatten("", entity, flat)
                rows.extend((_KINDS[key], name, m, v) for m, v in flat)
                route = entity.get("route") if key == "demands" and isinstance(entity, Mapping) else None
                if isinstance(route, (list, tuple)) and route and all(isinstance(s, str) for s in route):
                    hops = entity.get("hops")
                    rows.append(("route", name, " > ".join(route), float(hops) if isinstance(hops, int) else None))
        else:
            flat = []
            _flatten(str(key), value, flat)
            rows.extend(("run", "", m, v) for m, v in flat)
    return _unique(rows)


def _unique(rows: list[tuple[str, str, str, float | None]]) -> list[tuple[str, str, str, float | None]]:
    seen: dict[tuple[str, str, str], float | None] = {}
    for kind, name, metric, value in rows:
        seen.setdefault((kind, name, metric), value)
    return [(*k, v) for k, v in seen.items()]


class _Deadline:
    """Raise :class:`PointTimeout` in the calling thread once ``seconds`` have passed."""

    def __init__(self, seconds: float | None) -> None:
        self._thread_id = threading.get_ident()
        self._lock = threading.Lock()
        self._active = True
        self._timer = threading.Timer(seconds, self._fire) if seconds else None

    def __enter__(self) -> Self:
        if self._timer is not None:
            self._timer.daemon = True
            self._timer.start()
        return self

    def _fire(self) -> None:
        with self._lock:
            if self._active:
                ctypes.pythonapi.PyThreadState_SetAsyncExc(
                    ctypes.c_ulong(self._thread_id), ctypes.py_object(PointTimeout))

    def __exit__(self, *exc: object) -> None:
        with self._lock:
            self._active = False
        if self._timer is not None:
            self._timer.cancel()


def _error_text(exc: BaseException, timeout_s: float | None) -> str:
    if isinstance(exc, PointTimeout):
        return f"PointTimeout: the point ran longer than --point-timeout-s {timeout_s:g}"
    last = traceback.extract_tb(exc.__traceback__)[-1:] if exc.__traceback__ else []
    where = f" (at {last[0].filename.rsplit('/', 1)[-1]}:{last[0].lineno})" if last else ""
    return f"{type(exc).__name__}: {exc}{where}"


def execute(function: PointFunction, task: PointTask) -> PointRecord:
    """Run one point; return a ``done`` record with metrics or a ``failed`` one with the error."""
    started, clock = utc_now(), time.perf_counter()
    try:
        with _Deadline(task.timeout_s):
            result = function(task.data, source=task.source, seed=task.seed, stop=task.stop)
        metrics = flatten_result(result)
    except (Exception, PointTimeout) as exc:  # noqa: BLE001 -- a failing point is recorded, not raised
        return PointRecord(task.point_id, "failed", started, utc_now(),
                           time.perf_counter() - clock, _error_text(exc, task.timeout_s))
    return PointRecord(task.point_id, "done", started, utc_now(), time.perf_counter() - clock,
                       None, tuple(metrics))
