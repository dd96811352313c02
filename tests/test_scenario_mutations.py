"""Random mutations of valid scenarios either load or raise ScenarioError, and nothing else.

Issue 3, section 2: "random mutations of a valid file either load or fail with this error type
and nothing else". The mutations delete keys, rename them (typos), replace values by values of
other types or odd numbers (NaN, infinities, zero, negatives, huge integers), swap site names
and edit the TOML text itself. The rules mutated here come from the TOML v1.0.0 specification
(toml.io, 2021) and the scenario reference; the property itself is the outside check: no input
may escape as a traceback.
"""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from netsim.errors import ScenarioError
from netsim.scenario import Scenario, load, load_data

SCENARIOS = Path(__file__).resolve().parent.parent / "scenarios"
SOURCES = {p.name: p.read_text(encoding="utf-8") for p in sorted(SCENARIOS.glob("*.toml"))}
PARSED = {name: tomllib.loads(text) for name, text in SOURCES.items()}

Path_ = tuple[Any, ...]

ODD_NUMBERS = st.sampled_from([0, -1, 0.0, -0.0, -2.5, 1.0000001, 2, 1e308, -1e308, 10**400,
                               float("nan"), float("inf"), float("-inf"), 5e-324])
ODD_VALUES = st.one_of(
    ODD_NUMBERS,
    st.booleans(),
    st.none(),
    st.integers(),
    st.floats(),
    st.text(max_size=12),
    st.sampled_from(["user", "switch", "bb84", "binary", "none", "dejmps", "two_photon", ""]),
    st.lists(st.one_of(st.integers(-3, 3), st.floats(-2, 2), st.text(max_size=4)), max_size=4),
    st.dictionaries(st.text(max_size=6), st.integers(), max_size=2),
    st.lists(st.lists(st.floats(-1.5, 1.5), min_size=3, max_size=3), max_size=4),
)


def _paths(node: Any, prefix: Path_ = ()) -> list[Path_]:
    """Every path to a value inside nested dicts and lists (the root excluded)."""
    found: list[Path_] = []
    items = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(node, list) else ()
    for key, value in items:
        found.append((*prefix, key))
        found.extend(_paths(value, (*prefix, key)))
    return found


def _parent(root: Any, path: Path_) -> Any:
    for key in path[:-1]:
        root = root[key]
    return root


def _mutate(data: dict[str, Any], path: Path_, kind: str, value: Any, names: list[str]) -> None:
    parent, key = _parent(data, path), path[-1]
    if kind == "delete":
        del parent[key]
    elif kind == "rename" and isinstance(parent, dict):
        parent[str(key)[::-1] or "x"] = parent.pop(key)
    elif kind == "name" and names:
        parent[key] = names[len(str(value)) % len(names)]
    elif kind == "duplicate" and isinstance(parent, list):
        parent.append(copy.deepcopy(parent[key]))
    else:
        parent[key] = value


def _site_names(data: dict[str, Any]) -> list[str]:
    return [s.get("name") for s in data.get("sites", []) if isinstance(s, dict) and "name" in s]


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_mutated_data_loads_or_raises_scenario_error(data: st.DataObject) -> None:
    name = data.draw(st.sampled_from(sorted(PARSED)))
    scenario = copy.deepcopy(PARSED[name])
    for _ in range(data.draw(st.integers(1, 4))):
        paths = _paths(scenario)
        if not paths:
            break
        path = data.draw(st.sampled_from(paths))
        kind = data.draw(st.sampled_from(["delete", "rename", "replace", "replace", "name", "duplicate"]))
        _mutate(scenario, path, kind, data.draw(ODD_VALUES), _site_names(PARSED[name]))
    try:
        result = load_data(scenario, source=name)
    except ScenarioError as error:
        assert error.problems, "a ScenarioError must list at least one problem"
        assert all(p.message and "\n" not in str(p) for p in error.problems)
    else:
        assert isinstance(result, Scenario)


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_mutated_text_loads_or_raises_scenario_error(data: st.DataObject, tmp_path_factory: pytest.TempPathFactory) -> None:
    name = data.draw(st.sampled_from(sorted(SOURCES)))
    lines = SOURCES[name].splitlines(keepends=True)
    for _ in range(data.draw(st.integers(1, 3))):
        i = data.draw(st.integers(0, len(lines) - 1))
        edit = data.draw(st.sampled_from(["drop", "insert", "truncate", "double"]))
        if edit == "drop":
            del lines[i]
        elif edit == "insert":
            lines.insert(i, data.draw(st.text(max_size=20)) + "\n")
        elif edit == "truncate":
            lines[i] = lines[i][: data.draw(st.integers(0, max(0, len(lines[i]) - 1)))] + "\n"
        else:
            lines.insert(i, lines[i])
    path = tmp_path_factory.mktemp("mut") / name
    path.write_text("".join(lines), encoding="utf-8", errors="surrogatepass")
    try:
        load(path)
    except ScenarioError as error:
        assert error.problems


@pytest.mark.parametrize("name", sorted(PARSED))
def test_unmutated_scenarios_load(name: str) -> None:
    """The starting points of the mutations are themselves valid."""
    assert isinstance(load_data(PARSED[name], source=name), Scenario)
