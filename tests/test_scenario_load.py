"""Loading valid scenarios: defaults, the kept data and its hash, encodings and protocol choices.

Outside sources: the TOML v1.0.0 specification (toml.io, 2021) for what a file parses to;
FIPS 180-4 (NIST, 2015) SHA-256 via hashlib and RFC 8259 JSON for the content hash; Bloch
vectors of the BB84 states from Bennett & Brassard, Proc. IEEE Int. Conf. Computers, Systems and
Signal Processing, 175 (1984) and Nielsen & Chuang, Quantum Computation and Quantum Information
(CUP 2010), Sec. 4.2 (memory).
"""

from __future__ import annotations

import copy
import dataclasses
import hashlib
import json
import math
import tomllib
from typing import Any

import numpy as np
import pytest

from netsim.errors import ScenarioError
from netsim.scenario import Scenario, content_hash, load, load_data
from netsim.scenario.model import DEFAULT_DEMAND_PAIRS, Link, Site

TEXT = """\
[network]
name = "Wickford test ring"
purpose = "Loader tests"

[defaults.site]
t1_s = 60.0
gate_error = 0.02

[defaults.link]
attenuation_db_per_km = 0.2
modes = 3

[[sites]]
name = "Wren Hall"
role = "user"
x_km = 0
y_km = 1

[[sites]]
name = "Copper Lane Exchange"
role = "repeater"
t1_s = 5
t2_s = 4
memory_slots = 4

[[sites]]
name = "Gull Rock Switch"
role = "switch"
memory_slots = 0

[[sites]]
name = "Tansy Fields"
role = "user"

[[links]]
ends = ["Wren Hall", "Copper Lane Exchange"]
length_km = 7

[[links]]
ends = ["Copper Lane Exchange", "Gull Rock Switch"]
length_km = 4.5
modes = 1
scheme = "two_photon"

[[links]]
ends = ["Gull Rock Switch", "Tansy Fields"]
length_km = 3.25

[[demands]]
users = ["Wren Hall", "Tansy Fields"]
duration_s = 2

[[demands]]
users = ["Tansy Fields", "Wren Hall"]

[sweep]
anything = ["the loader", "does not look", 1, {inside = true}]
"""


@pytest.fixture
def scenario() -> Scenario:
    return load_data(tomllib.loads(TEXT), source="wickford.toml")


def test_site_values_come_from_site_then_defaults_then_model(scenario: Scenario) -> None:
    wren, copper = scenario.site("Wren Hall"), scenario.site("Copper Lane Exchange")
    assert wren.t1_s == 60.0 and copper.t1_s == 5.0          # defaults.site, then the site's own
    assert wren.gate_error == copper.gate_error == 0.02      # defaults.site
    assert wren.t2_s == Site.t2_s                             # the model's default
    assert copper.memory_slots == 4 and wren.memory_slots == Site.memory_slots
    assert (wren.x_km, wren.y_km) == (0.0, 1.0) and copper.x_km is None


def test_link_values_and_indices(scenario: Scenario) -> None:
    first, second, third = scenario.links
    assert [link.index for link in scenario.links] == [0, 1, 2]
    assert (first.a, first.b, first.length_km) == ("Wren Hall", "Copper Lane Exchange", 7.0)
    assert first.modes == 3 and second.modes == 1            # defaults.link, then the link's own
    assert second.scheme == "two_photon" and third.scheme == Link.scheme
    assert all(link.attenuation_db_per_km == 0.2 for link in scenario.links)
    assert isinstance(first.length_km, float)                # int accepted where float expected


def test_demands_and_default_pairs(scenario: Scenario) -> None:
    timed, default = scenario.demands
    assert (timed.a, timed.b, timed.duration_s, timed.pairs) == ("Wren Hall", "Tansy Fields", 2.0, None)
    assert default.pairs == DEFAULT_DEMAND_PAIRS == 100 and default.duration_s is None
    assert default.min_fidelity == 0.5 and default.index == 1


def test_data_is_the_file_before_defaults_and_keeps_sweep(scenario: Scenario) -> None:
    assert scenario.data == tomllib.loads(TEXT)
    assert "memory_slots" not in scenario.data["sites"][0]
    assert scenario.data["sweep"] == {"anything": ["the loader", "does not look", 1, {"inside": True}]}


def test_content_hash_is_sha256_of_canonical_json(scenario: Scenario) -> None:
    """SHA-256 (FIPS 180-4) of the JSON text (RFC 8259) with sorted keys and no spaces."""
    text = json.dumps(tomllib.loads(TEXT), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert scenario.content_hash == hashlib.sha256(text.encode("utf-8")).hexdigest()
    assert len(scenario.content_hash) == 64


def test_content_hash_ignores_key_order_but_not_values() -> None:
    data = tomllib.loads(TEXT)
    reordered = copy.deepcopy(dict(reversed(list(data.items()))))
    assert content_hash(reordered) == content_hash(data)
    data["links"][0]["length_km"] = 7.5
    assert content_hash(data) != content_hash(reordered)


def test_load_equals_load_data(tmp_path: Any, scenario: Scenario) -> None:
    path = tmp_path / "wickford.toml"
    path.write_text(TEXT, encoding="utf-8")
    loaded = load(path)
    assert dataclasses.replace(loaded, source="wickford.toml") == scenario
    assert loaded.content_hash == scenario.content_hash
    assert loaded.source == str(path) and loaded.slug == "wickford"


def test_load_data_accepts_numpy_scalars_and_tuples() -> None:
    """Sweeps may write numpy values into the data; they are kept as plain Python numbers."""
    data = tomllib.loads(TEXT)
    data["links"][0]["length_km"] = np.float64(9.5)
    data["links"][0]["modes"] = np.int64(2)
    data["links"][0]["ends"] = ("Wren Hall", "Copper Lane Exchange")
    scenario = load_data(data)
    assert scenario.links[0].length_km == 9.5 and scenario.links[0].modes == 2
    assert type(scenario.data["links"][0]["modes"]) is int
    json.dumps(scenario.data)                                 # plain, JSON-ready


def test_load_data_does_not_alias_the_input() -> None:
    data = tomllib.loads(TEXT)
    scenario = load_data(data)
    data["links"][0]["length_km"] = 99.0
    assert scenario.data["links"][0]["length_km"] == 7


def test_scenario_objects_are_frozen(scenario: Scenario) -> None:
    with pytest.raises(dataclasses.FrozenInstanceError):
        scenario.links[0].length_km = 1.0  # type: ignore[misc]


def test_default_encoding_is_bb84(scenario: Scenario) -> None:
    """BB84 states |0>, |1>, |+>, |-> have Bloch vectors +z, -z, +x, -x (Bennett & Brassard
    1984; Nielsen & Chuang 2010, Sec. 4.2; memory)."""
    assert scenario.encoding.name == "bb84"
    assert scenario.encoding.bloch_vectors == ((0, 0, 1), (0, 0, -1), (1, 0, 0), (-1, 0, 0))
    assert scenario.encoding.probabilities == (0.25,) * 4


def _with(extra: str) -> Scenario:
    return load_data(tomllib.loads(TEXT.replace("[sweep]", extra + "\n[sweep]")))


def test_binary_encoding_with_probabilities() -> None:
    encoding = _with('[encoding]\nstates = "binary"\nprobabilities = [0.3, 0.7]\n').encoding
    assert encoding.bloch_vectors == ((0, 0, 1), (0, 0, -1))
    assert encoding.probabilities == pytest.approx((0.3, 0.7), abs=1e-15)
    assert math.fsum(encoding.probabilities) == 1.0


def test_custom_bloch_vectors_on_and_inside_the_sphere() -> None:
    """A pure state has |r| = 1, a mixed state |r| < 1 (Nielsen & Chuang 2010, Ex. 2.72; memory)."""
    s = 1 / math.sqrt(2)
    encoding = _with(f"[encoding]\nstates = [[{s}, {s}, 0], [0, 0, 0.5], [0, -1, 0]]\n").encoding
    assert encoding.name == "custom" and len(encoding.bloch_vectors) == 3
    assert encoding.probabilities == pytest.approx((1 / 3,) * 3)


def test_protocol_defaults_and_purification_rounds() -> None:
    plain = _with("").protocol
    assert (plain.routing, plain.swap_policy, plain.scheduling) == ("least_loss", "asap", "fair")
    assert plain.cutoff_s is None and plain.purification == "none" and plain.purification_rounds == 0
    purified = _with('[protocol]\npurification = "dejmps"\ncutoff_s = 0.25\n').protocol
    assert purified.purification_rounds == 1 and purified.cutoff_s == 0.25
    assert _with('[protocol]\npurification = "bbpssw"\npurification_rounds = 3\n').protocol.purification_rounds == 3


def test_t2_equal_to_twice_t1_is_allowed() -> None:
    """T2 <= 2 T1 (Nielsen & Chuang 2010, Sec. 8.3; memory): the bound itself is physical."""
    data = tomllib.loads(TEXT)
    data["sites"][1]["t2_s"] = 10.0
    assert load_data(data).site("Copper Lane Exchange").t2_s == 10.0 == 2 * 5.0
    data["sites"][1]["t2_s"] = 10.000001
    with pytest.raises(ScenarioError, match=r"sites\[1\]\.t2_s: 10 is not allowed"):
        load_data(data)


def test_non_mapping_input_is_a_scenario_error() -> None:
    with pytest.raises(ScenarioError, match="expected a table of keys"):
        load_data(["not", "a", "table"])  # type: ignore[arg-type]


def test_error_lines_carry_the_source() -> None:
    data = tomllib.loads(TEXT)
    data["links"][2]["length_km"] = -1
    with pytest.raises(ScenarioError) as info:
        load_data(data, source="wickford.toml")
    assert str(info.value) == ("wickford.toml: links[2].length_km: -1 is not allowed; "
                               "expected a number in [0.0001, 40000] (km)")
    assert info.value.source == "wickford.toml"
