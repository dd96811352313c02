"""Write a parsed scenario mapping back as TOML (the subset scenario files use).

Tables become ``[name]`` sections, lists of tables ``[[name]]``; strings are written as TOML
basic strings, numbers with ``repr`` (shortest round-trip form), booleans as ``true``/``false``.
``tomllib.loads(dumps(data)) == data`` for every mapping of these types.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any

__all__ = ["dumps"]


def _key(key: str) -> str:
    bare = key != "" and all(ch.isalnum() and ch.isascii() or ch in "_-" for ch in key)
    return key if bare else json.dumps(key, ensure_ascii=False)


def _value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{_key(k)} = {_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")


def _is_table_list(value: Any) -> bool:
    return isinstance(value, (list, tuple)) and bool(value) and all(isinstance(v, Mapping) for v in value)


def _section(path: str, table: Mapping[str, Any], out: list[str], header: str) -> None:
    scalars = [(k, v) for k, v in table.items() if not isinstance(v, Mapping) and not _is_table_list(v)]
    if header:
        out.append(header)
    out.extend(f"{_key(k)} = {_value(v)}" for k, v in scalars)
    if header or scalars:
        out.append("")
    for k, v in table.items():
        sub = f"{path}.{_key(k)}" if path else _key(k)
        if isinstance(v, Mapping):
            _section(sub, v, out, f"[{sub}]")
        elif _is_table_list(v):
            for item in v:
                _section(sub, item, out, f"[[{sub}]]")


def dumps(data: Mapping[str, Any], header: str = "") -> str:
    """``data`` as TOML text, after an optional comment ``header`` (each line prefixed ``# ``)."""
    out = [f"# {line}".rstrip() for line in header.splitlines()]
    if out:
        out.append("")
    _section("", data, out, "")
    return "\n".join(out).rstrip() + "\n"
