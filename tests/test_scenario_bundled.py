"""The bundled scenarios load, have the promised shape, and the README's scenario reference is true.

Outside sources for the ranges checked here: metro fibre spans of a few km to a few tens of km
(Rabbie, Chakraborty, Avis & Wehner, npj Quantum Inf. 8, 5 (2022): repeater placement on real
fibre networks; common practice); deployed fibre attenuation 0.2-0.3 dB/km at 1550 nm
(common practice; ITU-T G.652 limit <= 0.4 dB/km, memory); T2 <= 2 T1 (Nielsen & Chuang 2010,
Sec. 8.3; memory); single-photon heralding success ~ 2 alpha eta (Cabrillo et al., PRA 59, 1025
(1999)) for the rate window the scenarios were designed for.
"""

from __future__ import annotations

import dataclasses
import re
from collections import Counter
from pathlib import Path

import pytest

from netsim.scenario import Scenario, load
from netsim.scenario import fields as F
from netsim.scenario import model as M

ROOT = Path(__file__).resolve().parent.parent / "scenarios"
BUNDLED = sorted(ROOT.glob("*.toml"))


@pytest.fixture(scope="module")
def mesh() -> Scenario:
    return load(ROOT / "vellmoor-mesh.toml")


@pytest.fixture(scope="module")
def star() -> Scenario:
    return load(ROOT / "vellmoor-star.toml")


def test_the_three_bundled_scenarios_exist() -> None:
    assert {p.name for p in BUNDLED} >= {"vellmoor-mesh.toml", "vellmoor-star.toml", "chain3.toml"}


@pytest.mark.parametrize("path", BUNDLED, ids=[p.name for p in BUNDLED])
def test_every_bundled_scenario_loads(path: Path) -> None:
    scenario = load(path)
    assert scenario.sites and scenario.links and scenario.demands
    for site in scenario.sites:
        assert site.t2_s <= 2 * site.t1_s
    for link in scenario.links:
        assert 2.0 <= link.length_km <= 40.0                   # metro spans (Rabbie et al. 2022)
        assert 0.2 <= link.attenuation_db_per_km <= 0.3        # deployed fibre (common practice)


def test_mesh_shape(mesh: Scenario) -> None:
    """Issue 3, section 6: >= 8 sites, >= 12 links, mixed roles, >= 4 demands."""
    roles = Counter(site.role for site in mesh.sites)
    assert len(mesh.sites) >= 8 and len(mesh.links) >= 12 and len(mesh.demands) >= 4
    assert roles["user"] >= 4 and roles["repeater"] >= 1 and roles["switch"] >= 1
    assert all(s.memory_slots >= 1 for s in mesh.sites if s.role == "repeater")
    assert all(s.x_km is not None for s in mesh.sites)


def test_star_has_the_same_sites_and_demands_as_a_hub_and_spoke(mesh: Scenario, star: Scenario) -> None:
    assert [dataclasses.replace(s, memory_slots=0) for s in star.sites] == \
           [dataclasses.replace(s, memory_slots=0) for s in mesh.sites]
    assert [(d.a, d.b, d.pairs, d.duration_s) for d in star.demands] == \
           [(d.a, d.b, d.pairs, d.duration_s) for d in mesh.demands]
    degree = Counter(end for link in star.links for end in (link.a, link.b))
    hub, spokes = degree.most_common(1)[0]
    assert spokes == len(star.sites) - 1 and star.site(hub).role == "repeater"
    assert len(star.links) == len(star.sites) - 1


def test_link_lengths_are_no_shorter_than_the_map_distance(mesh: Scenario, star: Scenario) -> None:
    """A fibre route is at least the straight line between its ends (common practice)."""
    for scenario in (mesh, star):
        for link in scenario.links:
            a, b = scenario.site(link.a), scenario.site(link.b)
            assert a.x_km is not None and b.x_km is not None and a.y_km is not None and b.y_km is not None
            distance = ((a.x_km - b.x_km) ** 2 + (a.y_km - b.y_km) ** 2) ** 0.5
            assert distance <= link.length_km <= 1.5 * distance + 1.0, link.name


def test_chain3_is_user_repeater_user() -> None:
    chain = load(ROOT / "chain3.toml")
    assert [s.role for s in chain.sites] == ["user", "repeater", "user"]
    assert [(link.a, link.b) for link in chain.links] == [(chain.sites[0].name, chain.sites[1].name),
                                                          (chain.sites[1].name, chain.sites[2].name)]
    assert (chain.demands[0].a, chain.demands[0].b) == (chain.sites[0].name, chain.sites[2].name)


KEY_LINE = re.compile(r"^\w+\s*=")


def _uncommented_defaults(path: Path) -> tuple[int, list[int]]:
    """Count the key lines of [defaults.*] tables; list those with neither an inline comment
    nor a comment block directly above them (a group of key lines may share one block)."""
    lines = path.read_text(encoding="utf-8").splitlines()
    count, bare, inside = 0, [], False
    for i, line in enumerate(lines):
        if line.startswith("["):
            inside = line.startswith("[defaults.")
        elif inside and KEY_LINE.match(line):
            count += 1
            j = i - 1
            while j >= 0 and KEY_LINE.match(lines[j]) and "#" not in lines[j]:
                j -= 1
            if "#" not in line and not lines[j].lstrip().startswith("#"):
                bare.append(i + 1)
    return count, bare


@pytest.mark.parametrize("path", BUNDLED, ids=[p.name for p in BUNDLED])
def test_every_default_hardware_value_carries_a_comment(path: Path) -> None:
    """Hardware numbers come with their source in a comment (issue 3, section 6), or from a
    bundled profile whose every value names its source (issue 9, section 1)."""
    count, bare = _uncommented_defaults(path)
    text = path.read_text(encoding="utf-8")
    assert (count >= 10 or 'profile = "' in text) and bare == [], f"{path.name}: lines {bare} have no comment"


def test_bundled_link_rates_are_quick_to_simulate() -> None:
    """Per-round success over attempt period between 1 and 1000 pairs/s on every link, the
    window the scenarios were designed for (single-photon success ~ 2 alpha eta, Cabrillo et al.
    1999); uses the hardware layer's formulas."""
    from netsim import hardware
    for path in BUNDLED:
        scenario = load(path)
        for link in scenario.links:
            physics = hardware.link_physics(link, scenario.site(link.a), scenario.site(link.b))
            rate = physics.round_success_probability / physics.attempt_period_s
            assert 1.0 <= rate <= 1000.0, f"{path.name} {link.name}: {rate:.3g} pairs/s"


# --- the README's scenario reference agrees with the code -----------------------------------

README = ROOT.parent / "README.md"


def _reference_text() -> str:
    """The README's "Scenario reference" section (up to the next second-level heading)."""
    text = README.read_text(encoding="utf-8")
    start = text.index("\n## Scenario reference")
    end = text.find("\n## ", start + 1)
    return text[start:end if end > 0 else None]

SECTIONS = {"[network]": (F.NETWORK_FIELDS, None), "[[sites]]": (F.SITE_FIELDS, M.Site),
            "[[links]]": (F.LINK_FIELDS, M.Link), "[[demands]]": (F.DEMAND_FIELDS, M.Demand),
            "[protocol]": (F.PROTOCOL_FIELDS, M.Protocol), "[costs]": (F.COSTS_FIELDS, M.Costs)}


def _reference_rows() -> dict[str, dict[str, list[str]]]:
    """Key rows of every section table of the reference: {section: {key: cells}}."""
    rows: dict[str, dict[str, list[str]]] = {}
    section = ""
    for line in _reference_text().splitlines():
        if line.startswith("### "):
            section = line[4:].strip()
            rows[section] = {}
        elif line.startswith("| `") and section:
            cells = [c.strip() for c in line.strip("|").split(" | ")]
            rows[section][cells[0].strip("`")] = cells
    return rows


def _default_text(cls: type | None, key: str, spec: F.Spec) -> str:
    if spec.required:
        return "required"
    if cls is None:
        return "`''`"
    value = {f.name: f.default for f in dataclasses.fields(cls)}[key]
    if value is None:
        return "none"
    if isinstance(value, bool):
        return f"`{str(value).lower()}`"  # as written in TOML
    return f"`{value!r}`" if isinstance(value, str) else f"`{value:g}`" if isinstance(value, float) else f"`{value}`"


@pytest.mark.parametrize("section", sorted(SECTIONS))
def test_reference_lists_every_key_with_its_default_and_range(section: str) -> None:
    specs, cls = SECTIONS[section]
    rows = _reference_rows()[section]
    assert set(rows) == set(specs)
    for key, spec in specs.items():
        _, unit, default, allowed, meaning = rows[key]
        assert allowed == spec.allowed(), key
        assert default == _default_text(cls, key, spec), key
        assert unit == (spec.unit or "-") and meaning, key


def test_reference_mentions_every_top_level_table_and_decision() -> None:
    from netsim.scenario import TOP_LEVEL_KEYS

    text = _reference_text()
    for key in TOP_LEVEL_KEYS:
        assert f"`[{key}]`" in text or f"`[[{key}]]`" in text or f"`[{key}.site]`" in text, key
    assert f"**{M.DEFAULT_DEMAND_PAIRS} pairs**" in text
    assert "at most one link joins a pair of sites" in text
