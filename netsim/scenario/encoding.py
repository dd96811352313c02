"""The ``[encoding]`` table: the ensemble {p_i, rho_i} used for direct qubit transmission.

``states`` is ``"binary"`` ({|0>, |1>}), ``"bb84"`` ({|0>, |1>, |+>, |->}, the default) or a list
of Bloch vectors ``[x, y, z]`` of length at most 1 (rho = (I + x X + y Y + z Z)/2).
``probabilities`` (optional, uniform by default) has one entry per state, each in [0, 1], summing
to 1 within 1e-9 (they are then normalised exactly).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from netsim.errors import Problem, format_value
from netsim.scenario.checks import join, unknown_key
from netsim.scenario.fields import is_finite_number
from netsim.scenario.model import Encoding

__all__ = ["ENCODING_KEYS", "NAMED_ENSEMBLES", "parse_encoding"]

Vector = tuple[float, float, float]

#: Named ensembles: Bloch vectors of |0>, |1> (binary) and |0>, |1>, |+>, |-> (bb84).
NAMED_ENSEMBLES: dict[str, tuple[Vector, ...]] = {
    "binary": ((0.0, 0.0, 1.0), (0.0, 0.0, -1.0)),
    "bb84": ((0.0, 0.0, 1.0), (0.0, 0.0, -1.0), (1.0, 0.0, 0.0), (-1.0, 0.0, 0.0)),
}
ENCODING_KEYS: tuple[str, ...] = ("states", "probabilities")
_SUM_TOLERANCE = 1e-9
_LENGTH_TOLERANCE = 1e-12


def parse_encoding(table: Any, problems: list[Problem]) -> Encoding | None:
    """Check the ``[encoding]`` table (None when absent means bb84) and build the Encoding."""
    if table is None:
        table = {}
    if not isinstance(table, Mapping):
        problems.append(Problem("encoding", f"{format_value(table)} is not allowed; expected a table"))
        return None
    for key in table:
        if key not in ENCODING_KEYS:
            problems.append(unknown_key(join("encoding", key), key, ENCODING_KEYS))
    named = _states(table.get("states", "bb84"), problems)
    if named is None:
        return None
    name, vectors = named
    probs = _probabilities(table.get("probabilities"), len(vectors), problems)
    if probs is None:
        return None
    return Encoding(name=name, probabilities=probs, bloch_vectors=vectors)


def _states(value: Any, problems: list[Problem]) -> tuple[str, tuple[Vector, ...]] | None:
    if isinstance(value, str):
        if value in NAMED_ENSEMBLES:
            return value, NAMED_ENSEMBLES[value]
        problems.append(Problem("encoding.states", f"{format_value(value)} is not allowed; expected "
                                "'binary', 'bb84' or a list of Bloch vectors [x, y, z]"))
        return None
    if not isinstance(value, (list, tuple)) or not value:
        problems.append(Problem("encoding.states", f"{format_value(value)} is not allowed; expected "
                                "'binary', 'bb84' or a non-empty list of Bloch vectors [x, y, z]"))
        return None
    vectors = [_vector(v, f"encoding.states[{i}]", problems) for i, v in enumerate(value)]
    if any(v is None for v in vectors):
        return None
    return "custom", tuple(v for v in vectors if v is not None)


def _vector(value: Any, path: str, problems: list[Problem]) -> Vector | None:
    ok = (isinstance(value, (list, tuple)) and len(value) == 3
          and all(is_finite_number(c) for c in value))
    if not ok:
        problems.append(Problem(path, f"{format_value(value)} is not allowed; expected a Bloch "
                                      "vector of three finite numbers [x, y, z]"))
        return None
    x, y, z = (float(c) for c in value)
    length = math.sqrt(x * x + y * y + z * z)
    if length > 1.0 + _LENGTH_TOLERANCE:
        problems.append(Problem(path, f"{format_value(list(value))} has length {length:.6g}, which "
                                      "is not allowed; expected a Bloch vector of length <= 1"))
        return None
    return (x, y, z)


def _probabilities(value: Any, count: int, problems: list[Problem]) -> tuple[float, ...] | None:
    if value is None:
        return tuple(1.0 / count for _ in range(count))
    path = "encoding.probabilities"
    ok = (isinstance(value, (list, tuple)) and len(value) == count
          and all(is_finite_number(p) and 0.0 <= p <= 1.0 for p in value))
    if not ok:
        problems.append(Problem(path, f"{format_value(value)} is not allowed; expected {count} "
                                      "numbers in [0, 1], one per state, summing to 1"))
        return None
    total = math.fsum(float(p) for p in value)
    if abs(total - 1.0) > _SUM_TOLERANCE:
        problems.append(Problem(path, f"{format_value(value)} sums to {total:.12g}, which is not "
                                      "allowed; expected probabilities summing to 1"))
        return None
    return tuple(float(p) / total for p in value)
