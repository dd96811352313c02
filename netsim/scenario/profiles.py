"""Hardware profiles: cited parameter sets of memory platforms that a scenario picks by name.

The data live in ``netsim/hardware/profiles.toml`` (package data, so a pip install has it); this
module only reads and checks them, so that the scenario loader (the bottom layer) can resolve
``profile = "NAME"`` without importing any hardware code. Each profile has a ``platform``, a
``variant`` (``demonstrated``: values reached in published experiments; ``projected``: published
targets, or values reached in a stand-alone device but not yet in a network) and ``site`` and
``link`` tables of scenario keys, every value written ``{ value = ..., source = "..." }``.

A site takes the profile's site values, a link its link values. Precedence of a value (first
found wins): the key written in the site or link table itself > that table's own ``profile`` >
the key in ``[defaults.site]`` / ``[defaults.link]`` > the profile named there > the built-in
default (the dataclass defaults of :mod:`netsim.scenario.model`).
"""

from __future__ import annotations

import difflib
import functools
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from importlib import resources
from typing import Any

from netsim.errors import ParameterError, Problem, ScenarioError

__all__ = [
    "BUILT_IN",
    "PROFILE_FILE",
    "VARIANTS",
    "Profile",
    "ProfileValue",
    "check_profiles",
    "get_profile",
    "link_values",
    "profile_label",
    "profile_names",
    "profiles",
    "site_values",
]

#: Where the profiles live, relative to the ``netsim`` package.
PROFILE_FILE = "hardware/profiles.toml"
VARIANTS: tuple[str, ...] = ("demonstrated", "projected")


@dataclass(frozen=True)
class ProfileValue:
    """One value of a profile and where it comes from (paper, "(memory)", "derived: ...")."""

    value: Any
    source: str


@dataclass(frozen=True)
class Profile:
    """A named parameter set of one platform in one variant."""

    name: str
    platform: str
    variant: str
    summary: str
    site: Mapping[str, ProfileValue]
    link: Mapping[str, ProfileValue]

    def site_values(self) -> dict[str, Any]:
        """The site keys and their values (for ``Site(**...)``)."""
        return {k: v.value for k, v in self.site.items()}

    def link_values(self) -> dict[str, Any]:
        """The link keys and their values (for ``Link(**...)``)."""
        return {k: v.value for k, v in self.link.items()}


def _text() -> str:
    return resources.files("netsim").joinpath(PROFILE_FILE).read_text(encoding="utf-8")


@functools.cache
def profiles() -> Mapping[str, Profile]:
    """Every bundled profile by name, in file order (read once; not validated: see
    :func:`check_profiles`, which the tests and ``netsim profiles`` run)."""
    data = tomllib.loads(_text()).get("profiles", {})
    out: dict[str, Profile] = {}
    for name, table in data.items():
        out[name] = Profile(
            name=name, platform=str(table.get("platform", "")), variant=str(table.get("variant", "")),
            summary=str(table.get("summary", "")),
            site={k: _value(v) for k, v in table.get("site", {}).items()},
            link={k: _value(v) for k, v in table.get("link", {}).items()},
        )
    return out


def _value(entry: Any) -> ProfileValue:
    if isinstance(entry, Mapping):
        return ProfileValue(entry.get("value"), str(entry.get("source", "")))
    return ProfileValue(entry, "")  # reported by check_profiles: every value needs a source


def profile_names() -> tuple[str, ...]:
    """The names a scenario may give as ``profile``, in file order."""
    return tuple(profiles())


def get_profile(name: str) -> Profile:
    """The profile called ``name``, or a one-line :class:`ParameterError` listing the names
    (with the closest as a did-you-mean)."""
    table = profiles()
    if name in table:
        return table[name]
    close = difflib.get_close_matches(str(name), list(table), n=1, cutoff=0.5)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    raise ParameterError("profile", name, "one of " + ", ".join(table) + hint)


def check_profiles() -> list[Problem]:
    """Every problem of the bundled profile file: unknown keys, values outside the scenario
    reference's ranges, a missing source, an unknown variant, T2 > 2 T1."""
    from netsim.scenario.fields import LINK_DEFAULTABLE, SITE_DEFAULTABLE

    problems: list[Problem] = []
    for name, profile in profiles().items():
        path = f"profiles.{name}"
        if profile.variant not in VARIANTS:
            problems.append(Problem(f"{path}.variant", f"{profile.variant!r} is not allowed; expected "
                                    "one of " + ", ".join(VARIANTS)))
        for key in ("platform", "summary"):
            if not getattr(profile, key).strip():
                problems.append(Problem(f"{path}.{key}", "missing; required, a non-empty string"))
        for part, values, specs in (("site", profile.site, SITE_DEFAULTABLE), ("link", profile.link, LINK_DEFAULTABLE)):
            for key, entry in values.items():
                spec = specs.get(key)
                where = f"{path}.{part}.{key}"
                if spec is None or key == "profile":
                    problems.append(Problem(where, "unknown key; expected a scenario key of a "
                                                   f"{'[[sites]]' if part == 'site' else '[[links]]'} table"))
                elif not spec.accepts(entry.value):
                    problems.append(Problem(where, spec.complaint(entry.value)))
                if not entry.source.strip():
                    problems.append(Problem(where, "has no source; write { value = ..., source = \"...\" }"))
        site = profile.site_values()
        t1, t2 = site.get("t1_s"), site.get("t2_s")
        if isinstance(t1, (int, float)) and isinstance(t2, (int, float)) and t2 > 2 * t1:
            problems.append(Problem(f"{path}.site.t2_s", f"{t2:g} is not allowed; expected t2_s <= 2 * t1_s"))
    return problems


@functools.cache
def _checked() -> bool:
    problems = check_profiles()
    if problems:
        raise ScenarioError(problems, source=f"netsim/{PROFILE_FILE}")
    return True


def site_values(name: str | None) -> dict[str, Any]:
    """The site values of profile ``name`` (empty for ``None``); the file is checked once."""
    if name is None:
        return {}
    _checked()
    return get_profile(name).site_values()


def link_values(name: str | None) -> dict[str, Any]:
    """The link values of profile ``name`` (empty for ``None``); the file is checked once."""
    if name is None:
        return {}
    _checked()
    return get_profile(name).link_values()


#: How tables name the values of a site or link that names no profile.
BUILT_IN = "built-in"


def profile_label(*names: str | None) -> str:
    """The profiles behind one figure, for a table cell: the distinct names in order, joined by
    ``+``; ``built-in`` stands for a site or link that names no profile (built-in defaults)."""
    seen: list[str] = []
    for name in names:
        label = name or BUILT_IN
        if label not in seen:
            seen.append(label)
    return " + ".join(seen)
