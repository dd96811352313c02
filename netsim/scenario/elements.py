"""Checks of the ``[[sites]]``, ``[[links]]`` and ``[[demands]]`` tables and their references.

Decisions documented in scenarios/REFERENCE.md:

- Site names are unique (compared exactly); ``x_km`` and ``y_km`` come together or not at all.
- ``memory_slots`` must be >= 1 at a user or repeater site; 0 is allowed only at a switch.
- T2 <= 2 T1 is checked after ``[defaults.site]`` and profiles are applied.
- A value comes from the table itself, else its own ``profile``, else ``[defaults.*]``, else the
  profile named there, else the built-in default (:mod:`netsim.scenario.profiles`).
- At most one link joins a pair of sites (the network graph is simple); parallel fibres are
  modelled with ``modes``. Self-loops are rejected.
- A demand joins two different ``user`` sites that a path of links connects whose inner sites
  are repeaters or switches (end users do not relay). A demand gives
  ``pairs`` or ``duration_s`` (not both); with neither it asks for DEFAULT_DEMAND_PAIRS pairs.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from netsim.errors import Problem, format_value
from netsim.scenario.checks import check_table, name_pair, suggest, table_list
from netsim.scenario.fields import DEMAND_FIELDS, LINK_FIELDS, SITE_FIELDS, Spec
from netsim.scenario.model import DEFAULT_DEMAND_PAIRS, Demand, Link, Site
from netsim.scenario.profiles import link_values, site_values

__all__ = ["parse_demands", "parse_links", "parse_sites"]


def _missing(path: str, key: str, spec: Spec) -> Problem:
    return Problem(f"{path}.{key}", f"missing; required, {spec.allowed()}")


def _origin(key: str, own: Mapping[str, Any], profile: Mapping[str, Any] | None = None) -> str:
    if key in own:
        return ""
    if profile and key in profile:
        return f" (from profile {own.get('profile')!r})"
    return " (from defaults)"


def parse_sites(value: Any, defaults: Mapping[str, Any],
                problems: list[Problem]) -> tuple[list[Site], dict[str, str] | None]:
    """Check every site; return the valid sites and the role of every validly named site.

    The roles are None when there is no usable array of sites: links and demands then skip
    their site-name checks rather than repeat one problem many times.
    """
    if value is None:
        problems.append(Problem("sites", "missing; required, at least two [[sites]] tables"))
        return [], None
    if not isinstance(value, (list, tuple)):
        table_list(value, "sites", problems)
        return [], None
    sites: list[Site] = []
    roles: dict[str, str] = {}
    first_index: dict[str, int] = {}
    _default_coherence(defaults, problems)
    base = {**site_values(defaults.get("profile")), **defaults}
    tables = table_list(value, "sites", problems)
    for i, table in tables:
        count = len(problems)
        own = check_table(table, f"sites[{i}]", SITE_FIELDS, problems)
        _register(i, table, own, first_index, roles, problems)
        from_profile = site_values(own.get("profile"))
        merged = {**base, **from_profile, **own}
        _site_rules(f"sites[{i}]", own, from_profile, merged, {k for k in table if k not in own}, problems)
        if len(problems) == count:
            sites.append(Site(**merged))
    if len(tables) < 2 and len(value) == len(tables):
        problems.append(Problem("sites", f"{len(tables)} site(s) is not allowed; expected at "
                                         "least two [[sites]] tables"))
    return sites, roles


def _register(i: int, table: Mapping[str, Any], own: Mapping[str, Any], first_index: dict[str, int],
              roles: dict[str, str], problems: list[Problem]) -> None:
    """Report a missing name or role or a duplicate name; record the role of a new name."""
    for key in ("name", "role"):
        if key not in table:
            problems.append(_missing(f"sites[{i}]", key, SITE_FIELDS[key]))
    name = own.get("name")
    if name is not None and name in first_index:
        problems.append(Problem(f"sites[{i}].name", f"{format_value(name)} is not allowed; it is already the "
                                f"name of sites[{first_index[name]}]; site names must be unique"))
    elif name is not None:
        first_index[name] = i
        roles[name] = own.get("role", "")  # "": the role is missing or invalid (reported)


def _site_rules(path: str, own: Mapping[str, Any], from_profile: Mapping[str, Any], merged: Mapping[str, Any],
                invalid: set[Any], problems: list[Problem]) -> None:
    if ("x_km" in own) != ("y_km" in own):
        have, lack = ("x_km", "y_km") if "x_km" in own else ("y_km", "x_km")
        problems.append(Problem(f"{path}.{lack}", f"missing; required when {have} is given "
                                                  "(give both map coordinates or neither)"))
    slots = merged.get("memory_slots")
    role = own.get("role")
    if slots == 0 and role in ("user", "repeater"):
        problems.append(Problem(f"{path}.memory_slots", f"0{_origin('memory_slots', own, from_profile)} is not "
                                f"allowed at a {role} site; expected an integer >= 1 (0 only at a "
                                "switch)"))
    if own.get("candidate") and role == "user":
        problems.append(Problem(f"{path}.candidate", "true is not allowed at a user site; expected "
                                "false (demands name their users; only repeaters and switches "
                                "may be candidates)"))
    t1, t2 = merged.get("t1_s", Site.t1_s), merged.get("t2_s", Site.t2_s)
    own_times = {"t1_s", "t2_s"} & (set(own) | set(from_profile))
    if own_times and not invalid & {"t1_s", "t2_s"} and t2 > 2.0 * t1:
        problems.append(Problem(f"{path}.t2_s", f"{format_value(t2)}{_origin('t2_s', own, from_profile)} is "
                                f"not allowed; expected t2_s <= 2 * t1_s = {2.0 * t1:g} s "
                                f"(T2 <= 2 T1; t1_s = {t1:g}{_origin('t1_s', own, from_profile)})"))


def _default_coherence(defaults: Mapping[str, Any], problems: list[Problem]) -> None:
    """T2 <= 2 T1 for the defaults alone (with the profile they name), reported once at
    [defaults.site] (sites that set neither time themselves inherit the problem and are not
    reported again)."""
    from_profile = site_values(defaults.get("profile"))
    base = {**from_profile, **defaults}
    t1, t2 = base.get("t1_s", Site.t1_s), base.get("t2_s", Site.t2_s)
    if t2 > 2.0 * t1:
        key = "t2_s" if "t2_s" in defaults else "t1_s"
        built_in = {k: "" if k in defaults else f" (from profile {format_value(defaults['profile'])})" if k in from_profile
                    else " (built-in default)" for k in ("t1_s", "t2_s")}
        problems.append(Problem(f"defaults.site.{key}", f"t2_s = {t2:g}{built_in['t2_s']} and "
                                f"t1_s = {t1:g}{built_in['t1_s']} are not allowed together; "
                                "expected t2_s <= 2 * t1_s (T2 <= 2 T1)"))


def parse_links(value: Any, defaults: Mapping[str, Any], roles: Mapping[str, str] | None,
                problems: list[Problem]) -> tuple[list[Link], list[tuple[str, str]]]:
    """Check every link; return the valid links and the ends of every link whose ends are valid
    (the latter to judge connectivity without follow-on errors)."""
    if value is None:
        problems.append(Problem("links", "missing; required, at least one [[links]] table"))
        return [], []
    links: list[Link] = []
    edges: list[tuple[str, str]] = []
    pairs: dict[frozenset[str], int] = {}
    tables = table_list(value, "links", problems)
    base = {**link_values(defaults.get("profile")), **defaults}
    for i, table in tables:
        path = f"links[{i}]"
        count = len(problems)
        own = check_table(table, path, LINK_FIELDS, problems, extra=("ends",))
        ends = _ends(table, f"{path}.ends", roles, problems)
        merged = {**base, **link_values(own.get("profile")), **own}
        if "length_km" not in merged and "length_km" not in table:
            problems.append(_missing(path, "length_km", LINK_FIELDS["length_km"]))
        if ends is not None:
            edges.append(ends)
            _pair_rules(f"{path}.ends", ends, pairs, i, problems)
        if len(problems) == count and ends is not None:
            links.append(Link(index=i, a=ends[0], b=ends[1], **merged))
    if isinstance(value, (list, tuple)) and not value:
        problems.append(Problem("links", "0 links is not allowed; expected at least one [[links]] table"))
    return links, edges


def _ends(table: Mapping[str, Any], path: str, roles: Mapping[str, str] | None,
          problems: list[Problem]) -> tuple[str, str] | None:
    if "ends" not in table:
        problems.append(Problem(path, 'missing; required, two site names, e.g. ["Site A", "Site B"]'))
        return None
    pair = name_pair(table["ends"], path, problems)
    if pair is None or roles is None:
        return pair
    known = True
    for j, name in enumerate(pair):
        if name not in roles:
            known = False
            problems.append(Problem(f"{path}[{j}]", f"{format_value(name)} is not allowed; it is not the name "
                                    f"of a site{suggest(name, roles)}"))
    return pair if known else None


def _pair_rules(path: str, ends: tuple[str, str], pairs: dict[frozenset[str], int], index: int,
                problems: list[Problem]) -> None:
    a, b = ends
    key = frozenset(ends)
    if a == b:
        problems.append(Problem(path, f"[{format_value(a)}, {format_value(b)}] is not allowed; a link joins two different "
                                      "sites (self-loop)"))
    elif key in pairs:
        problems.append(Problem(path, f"[{format_value(a)}, {format_value(b)}] is not allowed; links[{pairs[key]}] already "
                                      "joins these sites (one link per pair; use modes for "
                                      "parallel fibres)"))
    else:
        pairs[key] = index


def parse_demands(value: Any, roles: Mapping[str, str] | None, edges: list[tuple[str, str]],
                  problems: list[Problem]) -> list[Demand]:
    """Check every demand: two connected user sites and either pairs or duration_s."""
    demands: list[Demand] = []
    neighbours = _neighbours(edges)
    for i, table in table_list(value, "demands", problems):
        path = f"demands[{i}]"
        count = len(problems)
        own = check_table(table, path, DEMAND_FIELDS, problems, extra=("users",))
        users = _users(table, f"{path}.users", roles, problems)
        if "pairs" in table and "duration_s" in table:
            problems.append(Problem(path, "both pairs and duration_s are given, which is not "
                                          "allowed; expected one of them (or neither: "
                                          f"{DEFAULT_DEMAND_PAIRS} pairs)"))
        if users is not None and roles is not None and not _relayed(users, neighbours, roles):
            problems.append(Problem(f"{path}.users", f"[{format_value(users[0])}, {format_value(users[1])}] is not allowed; "
                                    "no path of links joins these sites through repeaters or "
                                    "switches (end users do not relay)"))
        if "pairs" not in table and "duration_s" not in table:
            own["pairs"] = DEFAULT_DEMAND_PAIRS
        if len(problems) == count and users is not None:
            demands.append(Demand(index=i, a=users[0], b=users[1], **own))
    return demands


def _users(table: Mapping[str, Any], path: str, roles: Mapping[str, str] | None,
           problems: list[Problem]) -> tuple[str, str] | None:
    if "users" not in table:
        problems.append(Problem(path, 'missing; required, two user site names, e.g. ["Site A", "Site B"]'))
        return None
    pair = name_pair(table["users"], path, problems)
    if pair is None or roles is None:
        return pair
    ok = True
    for j, name in enumerate(pair):
        role = roles.get(name)
        if role is None:
            message = f"it is not the name of a site{suggest(name, roles)}"
        elif role == "":
            continue  # the site's role is itself invalid and reported there
        elif role != "user":
            message = f"it is a {role} site; demands join two user sites"
        else:
            continue
        ok = False
        problems.append(Problem(f"{path}[{j}]", f"{format_value(name)} is not allowed; {message}"))
    if ok and pair[0] == pair[1]:
        problems.append(Problem(path, f"[{format_value(pair[0])}, {format_value(pair[1])}] is not allowed; a demand joins "
                                      "two different user sites"))
        return None
    return pair if ok else None


def _neighbours(edges: list[tuple[str, str]]) -> dict[str, set[str]]:
    table: dict[str, set[str]] = {}
    for a, b in edges:
        table.setdefault(a, set()).add(b)
        table.setdefault(b, set()).add(a)
    return table


def _relayed(users: tuple[str, str], neighbours: Mapping[str, set[str]],
             roles: Mapping[str, str]) -> bool:
    """Whether a path joins the two users whose inner sites are all repeaters or switches."""
    start, goal = users
    seen, frontier = {start}, [start]
    while frontier:
        site = frontier.pop()
        for nxt in neighbours.get(site, ()):
            if nxt == goal:
                return True
            if nxt not in seen and roles.get(nxt) in ("repeater", "switch", ""):  # "": role invalid
                seen.add(nxt)
                frontier.append(nxt)
    return False
