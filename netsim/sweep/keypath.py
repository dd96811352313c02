"""Key paths: how a sweep names the numeric scenario keys it varies.

Grammar (zero-based indices, as in scenario error messages)::

    path      := section "." key
    section   := "sites" selector | "links" selector | "demands" selector
               | "defaults.site" | "defaults.link" | "protocol"
    selector  := "[*]"              every entry
               | "[" INT "]"        one entry, zero-based
               | "[" NAME "=" TEXT "]"   every entry whose key NAME equals TEXT

Examples: ``links[*].length_km``, ``links[2].modes``, ``sites[role=repeater].t2_s``,
``sites[name=Quarry Hill].t1_s``, ``links[name=Ashford-Brindle].extra_loss_db`` (a link's or a
demand's ``name`` is its two ends joined by ``-``), ``defaults.link.attenuation_db_per_km``,
``protocol.cutoff_s``. The final key must be a numeric key of that section
(:func:`numeric_keys`). A selector that matches no entry is an error.
"""

from __future__ import annotations

import re
import typing
from dataclasses import dataclass, fields
from typing import Any

from netsim.errors import format_value
from netsim.scenario.model import Demand, Link, Protocol, Site

__all__ = ["KeyPath", "assign", "integer_keys", "numeric_keys", "parse_key", "resolve"]

#: Sections a sweep may address -> the model class describing their keys.
_SECTIONS: dict[str, type] = {
    "sites": Site, "links": Link, "demands": Demand,
    "defaults.site": Site, "defaults.link": Link, "protocol": Protocol,
}
_LISTS = ("sites", "links", "demands")
_PAIR_KEYS = {"links": "ends", "demands": "users"}
_PATTERN = re.compile(
    r"^\s*(?P<section>sites|links|demands|defaults\.site|defaults\.link|protocol)"
    r"(?:\[(?P<selector>[^\]]*)\])?\.(?P<key>[A-Za-z_][A-Za-z0-9_]*)\s*$"
)
_SYNTAX = ("sites|links|demands followed by [*], [INDEX] or [KEY=VALUE], or defaults.site, "
           "defaults.link or protocol; then .KEY (e.g. links[*].length_km)")


@dataclass(frozen=True)
class KeyPath:
    """A parsed key path. ``selector`` is ``None`` for tables, else ``"*"``, an int or (k, v)."""

    section: str
    selector: None | str | int | tuple[str, str]
    key: str

    def __str__(self) -> str:
        if self.selector is None:
            return f"{self.section}.{self.key}"
        sel = self.selector
        text = f"{sel[0]}={sel[1]}" if isinstance(sel, tuple) else str(sel)
        return f"{self.section}[{text}].{self.key}"


def _numeric(cls: type, integer_only: bool) -> tuple[str, ...]:
    hints = typing.get_type_hints(cls)
    names = []
    for f in fields(cls):
        args = set(typing.get_args(hints[f.name])) or {hints[f.name]}
        if f.name == "index" or str in args:
            continue
        if int in args or (float in args and not integer_only):
            names.append(f.name)
    return tuple(names)


def numeric_keys(section: str) -> tuple[str, ...]:
    """The numeric keys of a section (``"sites"``, ``"defaults.link"``, ...)."""
    return _numeric(_SECTIONS[section], integer_only=False)


def integer_keys(section: str) -> tuple[str, ...]:
    """The keys of a section that take whole numbers only."""
    return _numeric(_SECTIONS[section], integer_only=True)


def parse_key(text: str) -> KeyPath:
    """Parse a key path; raise ``ValueError`` with what is allowed when it is malformed."""
    match = _PATTERN.match(text)
    if match is None:
        raise ValueError(f"{format_value(text.strip())} is not a sweep key; expected {_SYNTAX}")
    section, raw, key = match["section"], match["selector"], match["key"]
    if (raw is None) != (section not in _LISTS):
        need = "needs a selector [*], [INDEX] or [KEY=VALUE]" if raw is None else "takes no selector"
        raise ValueError(f"{section} {need}")
    if key not in numeric_keys(section):
        allowed = ", ".join(numeric_keys(section))
        raise ValueError(f"{format_value(key)} is not a numeric key of {section}; expected one of {allowed}")
    return KeyPath(section, _parse_selector(text, raw), key)


def _parse_selector(text: str, raw: str | None) -> None | str | int | tuple[str, str]:
    if raw is None:
        return None
    raw = raw.strip()
    if raw == "*":
        return "*"
    if re.fullmatch(r"\d+", raw):
        return int(raw)
    name, sep, value = raw.partition("=")
    if sep and re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", name.strip()) and value.strip():
        return (name.strip(), value.strip())
    raise ValueError(f"selector [{raw}] is not allowed; expected [*], [INDEX] or [KEY=VALUE]")


def _matches(entry: Any, section: str, selector: tuple[str, str]) -> bool:
    if not isinstance(entry, dict):
        return False
    name, wanted = selector
    value = entry.get(_PAIR_KEYS.get(section, name) if name == "name" else name)
    if isinstance(value, list):
        value = "-".join(str(v) for v in value)
    return value is not None and str(value) == wanted


def resolve(data: dict[str, Any], path: KeyPath) -> list[tuple[Any, ...]]:
    """Concrete locations ``(section, index)`` or ``(section,)`` the path addresses in ``data``.

    Raises ``ValueError`` when a list selector matches nothing or the section is not a list.
    """
    if path.selector is None:
        return [(path.section,)]
    entries = data.get(path.section)
    if not isinstance(entries, list) or not entries:
        raise ValueError(f"the scenario has no [[{path.section}]] entries")
    sel = path.selector
    if sel == "*":
        found = list(range(len(entries)))
    elif isinstance(sel, int):
        found = [sel] if sel < len(entries) else []
    elif isinstance(sel, tuple):
        found = [i for i, e in enumerate(entries) if _matches(e, path.section, sel)]
    else:
        found = []
    if not found:
        raise ValueError(f"selector matches no entry of {path.section} "
                         f"(it has {len(entries)}, indices 0 to {len(entries) - 1})")
    return [(path.section, i) for i in found]


def assign(data: dict[str, Any], path: KeyPath, value: Any) -> None:
    """Set ``value`` at every location of ``path`` in ``data`` (in place; creates tables)."""
    for location in resolve(data, path):
        if len(location) == 2:
            table = data[location[0]][location[1]]
        else:
            table = data
            for part in path.section.split("."):
                table = table.setdefault(part, {})
                if not isinstance(table, dict):
                    raise ValueError(f"{part} in the scenario is not a table")  # noqa: TRY004
        table[path.key] = value
