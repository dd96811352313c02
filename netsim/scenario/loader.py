"""Load and validate a scenario file into a :class:`~netsim.scenario.model.Scenario`.

Every problem of a file is collected and raised at once as one
:class:`~netsim.errors.ScenarioError`, one line per problem, ``key.path: message`` with
zero-based indices (``links[3].length_km``). The rules are listed in the README's scenario reference.
"""

from __future__ import annotations

import hashlib
import json
import numbers
import tomllib
from collections.abc import Mapping
from os import PathLike
from typing import Any

from netsim.errors import Problem, ScenarioError, format_value
from netsim.scenario.checks import check_table, join, unknown_key
from netsim.scenario.elements import parse_demands, parse_links, parse_sites
from netsim.scenario.encoding import parse_encoding
from netsim.scenario.limits import MAX_FILE_BYTES, depth_problem, scan_text
from netsim.scenario.fields import (
    COSTS_FIELDS,
    LINK_DEFAULTABLE,
    NETWORK_FIELDS,
    PROTOCOL_FIELDS,
    SITE_DEFAULTABLE,
)
from netsim.scenario.model import Costs, Protocol, Scenario

__all__ = ["TOP_LEVEL_KEYS", "content_hash", "load", "load_data", "read_toml"]

#: The tables a scenario file may hold. ``sweep`` and ``sensitivity`` are kept untouched for the
#: sweep layer (parameter sweeps; ranges of the sensitivity ranking), which checks them.
TOP_LEVEL_KEYS: tuple[str, ...] = (
    "network", "encoding", "protocol", "defaults", "sites", "links", "demands", "sweep", "costs",
    "sensitivity",
)


def load(path: str | PathLike[str]) -> Scenario:
    """Read, parse and validate the scenario file at ``path``.

    Raises
    ------
    ScenarioError
        If the file cannot be read, is too large or too deeply nested (see
        :mod:`netsim.scenario.limits`), is not valid TOML (the message gives the line and column),
        or breaks any rule of the scenario reference; every problem is listed.
    """
    return load_data(read_toml(path), source=str(path))


def read_toml(path: str | PathLike[str]) -> dict[str, Any]:
    """The parsed TOML file at ``path``, within the limits of :mod:`netsim.scenario.limits`
    (size, nesting, key parts, integer digits), which are checked before the parser runs.

    Raises
    ------
    ScenarioError
        One line per problem: unreadable, over a limit, not UTF-8 or not valid TOML.
    """
    source = str(path)
    try:
        with open(path, "rb") as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise ScenarioError([Problem("", f"cannot read the file: {exc.strerror or exc}")],
                            source=source) from None
    if len(raw) > MAX_FILE_BYTES:
        problem = Problem("", f"a file of more than {MAX_FILE_BYTES} bytes is not allowed; expected at most "
                              f"{MAX_FILE_BYTES // 2**20} MiB (a scenario of a thousand sites is under 1 MiB)")
        raise ScenarioError([problem], source=source)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        problem = Problem("", f"not UTF-8 text (byte {exc.start}); save the file as UTF-8")
        raise ScenarioError([problem], source=source) from None
    limits = scan_text(text)
    if limits:
        raise ScenarioError(limits, source=source)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError([_syntax_problem(exc, text)], source=source) from None


def _syntax_problem(exc: tomllib.TOMLDecodeError, text: str) -> Problem:
    """The TOML parser's message, with a line number also when the error is at the end."""
    message = str(exc)
    last_line = text.count("\n") + (0 if text.endswith("\n") else 1)
    message = message.replace("(at end of document)", f"(at end of document, line {last_line})")
    return Problem("", f"TOML syntax error: {message}")


def load_data(data: Mapping[str, Any], source: str | None = None) -> Scenario:
    """Validate an already parsed scenario mapping (e.g. a TOML file with sweep overrides).

    Parameters
    ----------
    data : Mapping
        The parsed file: tables are mappings, arrays are lists or tuples.
    source : str, optional
        Where the data came from, used as the prefix of error messages and for ``slug``.

    Returns
    -------
    Scenario
        With ``data`` a plain copy of ``data`` (defaults not applied) and ``content_hash`` the
        SHA-256 of its canonical JSON (see :func:`content_hash`).

    Raises
    ------
    ScenarioError
        Listing every problem found, one ``key.path: message`` line each.
    """
    if not isinstance(data, Mapping):
        problem = Problem("", f"{format_value(data)} is not allowed; expected a table of keys")
        raise ScenarioError([problem], source=source)
    too_deep = depth_problem(data)
    if too_deep is not None:  # before any recursive walk (_plain, the checks, content_hash)
        raise ScenarioError([too_deep], source=source)
    plain = _plain(data)
    problems: list[Problem] = []
    if not plain:
        problems.append(Problem("", "the file is empty; a scenario needs a [network] table with "
                                    "a name, [[sites]] and [[links]] (see the README's scenario reference)"))
        raise ScenarioError(problems, source=source)
    scenario = _build(plain, problems, source)
    if problems or scenario is None:
        raise ScenarioError(problems, source=source)
    return scenario


def _build(data: dict[str, Any], problems: list[Problem], source: str | None) -> Scenario | None:
    for key in data:
        if key not in TOP_LEVEL_KEYS:
            problems.append(unknown_key(join("", key), key, TOP_LEVEL_KEYS))
    network = _network(data.get("network"), problems)
    site_defaults, link_defaults = _defaults(data.get("defaults", {}), problems)
    sites, roles = parse_sites(data.get("sites"), site_defaults, problems)
    links, edges = parse_links(data.get("links"), link_defaults, roles, problems)
    demands = parse_demands(data.get("demands", []), roles, edges, problems)
    encoding = parse_encoding(data.get("encoding"), problems)
    protocol = _protocol(data.get("protocol", {}), problems)
    costs = Costs(**check_table(data["costs"], "costs", COSTS_FIELDS, problems)) if "costs" in data else None
    if problems or network is None or encoding is None or protocol is None:
        return None
    built_sites = tuple(s for s in sites if not s.candidate)
    names = {s.name for s in built_sites}
    built_links = tuple(k for k in links if not k.candidate and k.a in names and k.b in names)
    return Scenario(name=network["name"], purpose=network.get("purpose", ""), sites=built_sites,
                    links=built_links, demands=tuple(demands), encoding=encoding,
                    protocol=protocol, data=data, content_hash=content_hash(data), source=source,
                    costs=costs, candidate_sites=tuple(s for s in sites if s.candidate),
                    candidate_links=tuple(k for k in links if k not in built_links))


def _network(table: Any, problems: list[Problem]) -> dict[str, Any] | None:
    if table is None:
        problems.append(Problem("network", 'missing; required, a table with name = "..."'))
        return None
    values = check_table(table, "network", NETWORK_FIELDS, problems)
    if isinstance(table, Mapping) and "name" not in table:
        problems.append(Problem("network.name", f"missing; required, {NETWORK_FIELDS['name'].allowed()}"))
    return values if "name" in values else None


def _defaults(table: Any, problems: list[Problem]) -> tuple[dict[str, Any], dict[str, Any]]:
    if not isinstance(table, Mapping):
        problems.append(Problem("defaults", f"{format_value(table)} is not allowed; expected a "
                                            "table with [defaults.site] and/or [defaults.link]"))
        return {}, {}
    for key in table:
        if key not in ("site", "link"):
            problems.append(unknown_key(join("defaults", key), key, ("site", "link")))
    per_site = {k: "cannot have a default; set it in each [[sites]] table"
                for k in ("name", "role", "x_km", "y_km")}
    site = check_table(table.get("site", {}), "defaults.site", SITE_DEFAULTABLE, problems,
                       forbidden=per_site)
    link = check_table(table.get("link", {}), "defaults.link", LINK_DEFAULTABLE, problems,
                       forbidden={"ends": "cannot have a default; set it in each [[links]] table"})
    return site, link


def _protocol(table: Any, problems: list[Problem]) -> Protocol | None:
    count = len(problems)
    values = check_table(table, "protocol", PROTOCOL_FIELDS, problems)
    scheme = values.get("purification", "none")
    rounds = values.get("purification_rounds")
    if scheme == "none" and rounds:
        problems.append(Problem("protocol.purification_rounds", f"{rounds} is not allowed without "
                                "a purification protocol; expected 0, or set protocol.purification "
                                "to 'bbpssw' or 'dejmps'"))
    elif scheme != "none" and rounds is None:
        values["purification_rounds"] = 1
    elif scheme != "none" and rounds == 0:
        problems.append(Problem("protocol.purification_rounds", f"0 is not allowed with "
                                f"purification = {scheme!r}; expected an integer >= 1"))
    return Protocol(**values) if len(problems) == count else None


def content_hash(data: Mapping[str, Any]) -> str:
    """SHA-256 (hex) of the canonical JSON of ``data``: sorted keys, no spaces, UTF-8."""
    text = json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _plain(value: Any) -> Any:
    """A deep copy made of dict, list, str, int, float and bool (numpy scalars converted)."""
    if isinstance(value, Mapping):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (bool, str)) or value is None:
        return value
    if isinstance(value, numbers.Integral):
        return int(value)
    if isinstance(value, numbers.Real):
        return float(value)
    return value
