"""Tables of the bundled hardware profiles, and of the profiles one scenario uses.

``profile_list()`` lists every profile (name, variant, platform and a few headline values);
``profile_detail(name)`` gives every value of one profile with its source; ``scenario_usage``
says which sites and links of a scenario rest on which profile and where the file overrides a
profile's value. Presentation only: the data and the precedence rules live in
:mod:`netsim.scenario.profiles`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from netsim.report.table import Column, Table
from netsim.scenario.model import Scenario
from netsim.scenario.profiles import Profile, get_profile, profiles

__all__ = ["LIST_COLUMNS", "VALUE_COLUMNS", "profile_detail", "profile_list", "profile_record",
           "scenario_usage", "usage_tables"]

LIST_COLUMNS: tuple[Column, ...] = (
    Column("profile", "profile"), Column("variant", "variant"), Column("scheme", "scheme"),
    Column("emission_efficiency", "emission efficiency"), Column("t2_s", "T2 (s)"),
    Column("modes", "modes"), Column("platform", "platform"),
)

VALUE_COLUMNS: tuple[Column, ...] = (
    Column("table", "table"), Column("key", "key"), Column("value", "value"), Column("source", "source"),
)

_NOTE = ("demonstrated: values reached in published experiments; projected: published targets, or "
         "values reached in a stand-alone device but not yet in a network. (memory): recalled, not "
         "re-checked; derived: computed from published figures as stated.")


def profile_list() -> Table:
    """One row per bundled profile."""
    rows: list[Mapping[str, Any]] = []
    for p in profiles().values():
        site, link = p.site_values(), p.link_values()
        rows.append({"profile": p.name, "variant": p.variant, "scheme": link.get("scheme"),
                     "emission_efficiency": site.get("emission_efficiency"), "t2_s": site.get("t2_s"),
                     "modes": link.get("modes"), "platform": p.platform})
    notes = [_NOTE, "netsim profiles NAME: every value with its source. A site, a link or "
             "[defaults.site]/[defaults.link] picks one with profile = \"NAME\"."]
    return Table("Hardware profiles", LIST_COLUMNS, rows, notes)


def _value_rows(profile: Profile) -> list[Mapping[str, Any]]:
    rows: list[Mapping[str, Any]] = []
    for part, values in (("site", profile.site), ("link", profile.link)):
        for key, entry in values.items():
            rows.append({"table": part, "key": key, "value": entry.value, "source": entry.source})
    return rows


def profile_detail(name: str) -> Table:
    """Every value of profile ``name`` with its source (a one-line error for an unknown name)."""
    p = get_profile(name)
    notes = [f"platform: {p.platform}", p.summary, _NOTE]
    return Table(f"Profile {p.name} ({p.variant})", VALUE_COLUMNS, _value_rows(p), notes)


def profile_record(name: str) -> dict[str, Any]:
    """JSON-ready record of one profile: every value with its source."""
    p = get_profile(name)
    return {"profile": p.name, "platform": p.platform, "variant": p.variant, "summary": p.summary,
            "site": {k: {"value": v.value, "source": v.source} for k, v in p.site.items()},
            "link": {k: {"value": v.value, "source": v.source} for k, v in p.link.items()}}


def scenario_usage(scenario: Scenario) -> list[dict[str, Any]]:
    """Per profile the scenario uses: which sites and links rest on it and which of its values
    the file overrides there (``{"site or link": {key: value used}}``)."""
    out: dict[str, dict[str, Any]] = {}

    def entry(name: str) -> dict[str, Any]:
        return out.setdefault(name, {"profile": name, "variant": get_profile(name).variant,
                                     "sites": [], "links": [], "overrides": {}})

    for site in scenario.sites:
        if site.profile:
            e = entry(site.profile)
            e["sites"].append(site.name)
            _overrides(e, site.name, get_profile(site.profile).site, vars(site))
    for link in scenario.links:
        if link.profile:
            e = entry(link.profile)
            e["links"].append(link.name)
            _overrides(e, link.name, get_profile(link.profile).link, vars(link))
    return list(out.values())


def _overrides(entry: dict[str, Any], where: str, values: Mapping[str, Any], used: Mapping[str, Any]) -> None:
    changed = {k: used[k] for k, v in values.items() if used.get(k) != v.value}
    if changed:
        entry["overrides"][where] = changed


def usage_tables(scenario: Scenario) -> list[Table]:
    """For ``netsim check --profiles``: per profile used, its values with sources, who uses it and
    the values the file overrides."""
    tables = []
    for use in scenario_usage(scenario):
        table = profile_detail(use["profile"])
        notes = [f"used by sites: {', '.join(use['sites']) or 'none'}",
                 f"used by links: {', '.join(use['links']) or 'none'}"]
        for where, changed in use["overrides"].items():
            pairs = ", ".join(f"{k} = {v!r}" for k, v in changed.items())
            notes.append(f"overridden in the file at {where}: {pairs}")
        tables.append(Table(table.title, table.columns, table.rows, notes + list(table.notes)))
    return tables
