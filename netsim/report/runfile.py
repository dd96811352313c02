"""Reading a run result (``run.json``) as strictly as a scenario is read.

``netsim run`` writes ``run.json``: a JSON object with ``demands`` (and ``links``, ``sites``,
``scenario``, ``seed``, ``stop``, ``interrupted``, ``notes``), each entity a list of objects (a
mapping keyed by name is read too). :func:`read_run_file` checks every key the report reads (its
type, its range, whether it is required) and refuses the first problem in one line naming the key
path as in the file (``demands[0].rate_per_s``), the value and what is allowed. Keys the report
does not read pass unchecked, so a run file with extra columns stays readable.

Also refused: a file larger than :data:`MAX_RUN_FILE_BYTES`, text that is not UTF-8, JSON that
is truncated, nested beyond :data:`MAX_DEPTH` or not an object, and NaN or infinities anywhere
(``netsim run`` writes ``null`` for an undefined figure).
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from netsim.errors import ParameterError

__all__ = ["MAX_DEPTH", "MAX_RUN_FILE_BYTES", "check_run", "read_run_file"]

#: The largest run file read (a run of thousands of demands is a few megabytes).
MAX_RUN_FILE_BYTES = 64 * 1024 * 1024
#: The deepest nesting of arrays and objects read (a run file nests four levels).
MAX_DEPTH = 32

Check = tuple[Callable[[Any], bool], str]


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _nullable(check: Check) -> Check:
    test, text = check
    return (lambda v: v is None or test(v)), f"{text}, or null"


NONNEG: Check = _nullable((lambda v: _is_number(v) and v >= 0, "a finite number >= 0"))
POSITIVE: Check = _nullable((lambda v: _is_number(v) and v > 0, "a finite number > 0"))
UNIT: Check = _nullable((lambda v: _is_number(v) and 0 <= v <= 1, "a number in [0, 1]"))
COUNT: Check = _nullable((lambda v: _is_int(v) and v >= 0, "an integer >= 0"))
TEXT: Check = _nullable((lambda v: isinstance(v, str), "a string"))
FLAG: Check = _nullable((lambda v: isinstance(v, bool), "true or false"))
NUMBER: Check = _nullable((_is_number, "a finite number"))
INTERVAL: Check = _nullable((lambda v: isinstance(v, list) and len(v) == 2
                             and all(x is None or _is_number(x) for x in v),
                             "a list of two numbers (low, high)"))
ROUTE: Check = _nullable((lambda v: isinstance(v, str) or (isinstance(v, list) and all(isinstance(s, str) for s in v)),
                          "a list of site names or one string"))
PAIR: Check = _nullable((lambda v: isinstance(v, str) or (isinstance(v, list) and len(v) == 2
                                                          and all(isinstance(s, str) for s in v)),
                         "a list of two site names or one string"))
HOPS: Check = _nullable((lambda v: (_is_int(v) and v >= 0) or isinstance(v, list), "an integer >= 0 or a list"))

#: Keys of a demand row the report reads (with their other spellings).
DEMAND_KEYS: dict[str, Check] = {
    "demand": TEXT, "name": TEXT, "users": PAIR, "ends": PAIR, "a": TEXT, "b": TEXT,
    "route": ROUTE, "profile": TEXT, "hops": HOPS, "delivered_pairs": COUNT, "simulated_time_s": NONNEG,
    "rate_per_s": NONNEG, "rate_ci95": INTERVAL, "fidelity_mean": UNIT, "fidelity_ci95": INTERVAL,
    "min_fidelity": UNIT, "meets_fidelity": FLAG, "useful_rate_per_s": NONNEG, "useful_rate_ci95": INTERVAL,
    "useful_fraction": UNIT, "min_rate_per_s": NONNEG, "meets_rate": FLAG, "eof_mean": UNIT, "eof_ci95": INTERVAL,
    "ebits_per_s": NONNEG, "key_rate_per_s": NONNEG, "secret_key_rate_per_s": NONNEG,
    "key_rate_analytic_per_s": NONNEG, "expected_rate_per_s": NONNEG, "expected_fidelity": UNIT,
    "bound_single_path_per_s": NONNEG, "single_path_bound_bits_per_s": NONNEG, "widest_path_bits_per_s": NONNEG,
    "single_path_bits_per_s": NONNEG, "bound_multipath_per_s": NONNEG, "multipath_bound_bits_per_s": NONNEG,
    "min_cut_bits_per_s": NONNEG, "multipath_bits_per_s": NONNEG,
    # passed through to the tables and JSON as written
    "engine": TEXT, "useful_pairs": COUNT, "eof_of_mean_state": UNIT, "interrupted": FLAG,
    "ensemble_chi_bits_per_qubit": NONNEG, "ensemble_realisations": COUNT,
}

#: Keys of a link row the report reads (the run's own figures, and the budget columns it stands
#: in for when the scenario file is not found).
LINK_KEYS: dict[str, Check] = {
    "link": TEXT, "name": TEXT, "users": PAIR, "ends": PAIR, "a": TEXT, "b": TEXT, "profile": TEXT,
    "length_km": NONNEG, "loss_db": NUMBER, "transmissivity": UNIT, "scheme": TEXT, "attempt_rate_per_s": NONNEG,
    "attempt_period_s": POSITIVE, "modes": COUNT, "success_probability": UNIT, "rate_analytic_per_s": NONNEG,
    "rate_per_s": NONNEG, "rate_ci95": INTERVAL, "pair_rate_per_s": NONNEG, "elementary_rate_per_s": NONNEG,
    "fidelity": UNIT, "link_fidelity": UNIT, "eof": UNIT, "entanglement_of_formation": UNIT, "eof_ebits": UNIT,
    "plob_bits_per_use": NONNEG, "plob_bits_per_s": NONNEG, "bound_bits_per_s": NONNEG, "holevo_bits": NONNEG,
    "holevo_bits_per_qubit": NONNEG, "holevo_information_bits": NONNEG, "chi_bits": NONNEG,
    "holevo_capacity_bits": NONNEG, "holevo_capacity_bits_per_use": NONNEG, "key_rate_per_s": NONNEG,
    "secret_key_rate_per_s": NONNEG, "key_rate_analytic_per_s": NONNEG, "attempts": COUNT, "successes": COUNT,
    "simulated_time_s": NONNEG, "utilisation": NONNEG,
}

#: Keys of a site row (the report reads none beyond the name; their shape is still checked).
SITE_KEYS: dict[str, Check] = {"site": TEXT, "name": TEXT, "profile": TEXT}

STOP_KEYS: dict[str, Check] = {
    "pairs": _nullable((lambda v: _is_int(v) and v >= 1, "an integer >= 1")), "time_s": POSITIVE,
    "precision": _nullable((lambda v: _is_number(v) and 0 < v < 1, "a number in (0, 1)")),
}

TOP_KEYS: dict[str, Check] = {
    # netsim run always writes these two: absent in older files, never null
    "seed": (lambda v: _is_int(v) and v >= 0, "an integer >= 0"),
    "interrupted": (lambda v: isinstance(v, bool), "true or false"), "simulated_time_s": NONNEG,
    "notes": _nullable((lambda v: isinstance(v, list) and all(isinstance(s, str) for s in v), "a list of strings")),
}

_ENTITIES = {"demands": (DEMAND_KEYS, ("demand", "name", "users", "ends", "a")),
             "links": (LINK_KEYS, ("link", "name", "users", "ends", "a")),
             "sites": (SITE_KEYS, ("site", "name"))}


class _Refusal:
    """Builds the one-line error for ``source``."""

    def __init__(self, source: str) -> None:
        self.source = source

    def __call__(self, path: str, value: Any, allowed: str) -> ParameterError:
        return ParameterError(f"{self.source}: {path}" if path else self.source, value, allowed)


#: Keys a row may carry beyond those listed (newer columns, figures the report passes through):
#: their shape follows from the unit in their name.
_SUFFIX_CHECKS: tuple[tuple[str, Check], ...] = (
    ("_ci95", INTERVAL), ("_per_s", NUMBER), ("_bits", NUMBER), ("_ebits", NUMBER), ("_s", NUMBER),
    ("_km", NUMBER), ("_db", NUMBER), ("_fraction", NUMBER), ("_mean", NUMBER), ("_probability", NUMBER),
)


def _check_keys(row: Mapping[str, Any], where: str, keys: Mapping[str, Check], refuse: _Refusal) -> None:
    for key, (test, allowed) in keys.items():
        if key in row and not test(row[key]):
            raise refuse(f"{where}.{key}", row[key], allowed)
    for key, value in row.items():
        if key in keys or not isinstance(key, str):
            continue
        for suffix, (test, allowed) in _SUFFIX_CHECKS:
            if key.endswith(suffix):
                if not test(value):
                    raise refuse(f"{where}.{key}", value, allowed)
                break


def _check_entities(run: Mapping[str, Any], name: str, refuse: _Refusal) -> None:
    keys, identity = _ENTITIES[name]
    value = run.get(name)
    if value is None:
        if name == "demands":
            raise refuse("demands", "(missing)" if name not in run else None,
                         "a list of demand rows, as `netsim run` writes (required)")
        if name in run:  # netsim writes a list, empty or not: a null is damage
            raise refuse(name, None, f"a list of {name[:-1]} rows (JSON objects)")
        return
    if name == "demands" and isinstance(value, (list, Mapping)) and not value:
        raise refuse("demands", value, "at least one demand row (every run has a demand)")
    if isinstance(value, Mapping):
        rows = [(f"{name}.{k}", row) for k, row in value.items()]
    elif isinstance(value, list):
        rows = [(f"{name}[{i}]", row) for i, row in enumerate(value)]
    else:
        raise refuse(name, value, f"a list of {name[:-1]} rows (JSON objects)")
    for where, row in rows:
        if not isinstance(row, Mapping):
            raise refuse(where, row, f"a {name[:-1]} row (a JSON object)")
        if isinstance(value, list) and not any(row.get(k) is not None for k in identity):
            raise refuse(f"{where}.{identity[0]}", "(missing)", f"the {name[:-1]}'s name (required)")
        _check_keys(row, where, keys, refuse)
    if name == "links":
        for where, row in rows:
            attempts, successes = row.get("attempts"), row.get("successes")
            if attempts is not None and successes is not None and successes > attempts:
                raise refuse(f"{where}.successes", successes, f"at most the link's attempts ({attempts})")


def check_run(run: Any, source: str = "run result") -> dict[str, Any]:
    """``run`` if it has the shape of a run result; else a one-line :class:`ParameterError`
    naming ``source``, the key path, the value and what is allowed."""
    refuse = _Refusal(source)
    if not isinstance(run, dict):
        raise refuse("", f"(a JSON {type(run).__name__})" if not isinstance(run, (str, int, float))
                     else run, "a run result written by `netsim run` (a JSON object with 'demands')")
    _check_finite(run, "", refuse)
    for key, (test, allowed) in TOP_KEYS.items():
        if key in run and not test(run[key]):
            raise refuse(key, run[key], allowed)
    scenario = run.get("scenario")
    if scenario is not None and not isinstance(scenario, str):
        if not isinstance(scenario, Mapping):
            raise refuse("scenario", scenario, "the scenario's name (a string) or an object with 'name'")
        if not (scenario.get("name") is None or isinstance(scenario.get("name"), str)):
            raise refuse("scenario.name", scenario.get("name"), "a string, or null")
    stop = run.get("stop")
    if "stop" in run:  # netsim run always writes its stop rule as an object
        if not isinstance(stop, Mapping):
            raise refuse("stop", stop, "an object with pairs, time_s or precision")
        for key, (test, allowed) in STOP_KEYS.items():
            if key in stop and not test(stop[key]):
                raise refuse(f"stop.{key}", stop[key], allowed)
    for name in _ENTITIES:
        _check_entities(run, name, refuse)
    return run


def _check_finite(value: Any, where: str, refuse: _Refusal) -> None:
    """NaN and infinities anywhere are refused (``netsim run`` writes null for them)."""
    stack = [(value, where)]
    while stack:
        item, path = stack.pop()
        if isinstance(item, float) and not math.isfinite(item):
            raise refuse(path or "(top)", item, "a finite number or null (JSON has no NaN or Infinity)")
        if isinstance(item, dict):
            stack.extend((v, f"{path}.{k}" if path else str(k)) for k, v in item.items())
        elif isinstance(item, list):
            stack.extend((v, f"{path}[{i}]") for i, v in enumerate(item))


def _depth_within(text: str, limit: int) -> bool:
    """Whether brackets outside strings nest at most ``limit`` deep (checked before parsing, so
    a deeply nested file never reaches the recursive parser)."""
    depth, in_string, escaped = 0, False, False
    for ch in text:
        if in_string:
            if escaped:
                escaped = False
            elif ch == "\\":
                escaped = True
            elif ch == '"':
                in_string = False
        elif ch == '"':
            in_string = True
        elif ch in "[{":
            depth += 1
            if depth > limit:
                return False
        elif ch in "]}":
            depth -= 1
    return True


def read_run_file(path: str | Path) -> dict[str, Any]:
    """The run result in ``path``, checked by :func:`check_run`; one-line errors otherwise."""
    path = Path(path)
    source = str(path)
    allowed = "a run result written by `netsim run` (a JSON object with 'demands')"
    try:
        size = path.stat().st_size
        if size > MAX_RUN_FILE_BYTES:
            raise ParameterError("SOURCE", source, f"a run result of at most {MAX_RUN_FILE_BYTES // 2**20} MiB "
                                                   f"(this file holds {size / 2**20:.0f} MiB)")
        raw = path.read_bytes()
    except OSError as exc:
        raise ParameterError("SOURCE", source, f"a readable file ({exc.strerror or exc})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ParameterError("SOURCE", source, f"{allowed} in UTF-8 (byte {exc.start} is not UTF-8)") from None
    if not _depth_within(text, MAX_DEPTH):
        raise ParameterError("SOURCE", source, f"{allowed}, nested at most {MAX_DEPTH} levels deep")
    try:
        value = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ParameterError("SOURCE", source, f"{allowed} (JSON syntax error at line {exc.lineno}, "
                                               f"column {exc.colno}: {exc.msg})") from None
    except (RecursionError, ValueError) as exc:  # a number of more digits than Python converts
        raise ParameterError("SOURCE", source, f"{allowed} ({str(exc).splitlines()[0][:80]})") from None
    return check_run(value, source)
