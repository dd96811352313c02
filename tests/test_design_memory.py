"""Memory sizing from the simulation: reserved slots, waiting share, slots for a waiting target."""

from __future__ import annotations

from typing import Any

import pytest

from netsim.design.output import memory_rows, slots_for_wait
from netsim.engine import run
from netsim.scenario import load_data


def star(relay_slots: int) -> Any:
    """Invented: two demands through one relay (Kiln Relay), each reserving one slot per hop end
    there, i.e. 2 slots per demand (common practice: one memory per link end)."""
    return load_data({
        "network": {"name": "Kiln star"},
        "sites": [{"name": "Ash Lab", "role": "user"}, {"name": "Birch Lab", "role": "user"},
                  {"name": "Cedar Lab", "role": "user"}, {"name": "Kiln Relay", "role": "repeater",
                                                           "memory_slots": relay_slots}],
        "links": [{"ends": ["Ash Lab", "Kiln Relay"], "length_km": 8.0},
                  {"ends": ["Kiln Relay", "Birch Lab"], "length_km": 9.0},
                  {"ends": ["Kiln Relay", "Cedar Lab"], "length_km": 7.0}],
        "demands": [{"users": ["Ash Lab", "Birch Lab"]}, {"users": ["Ash Lab", "Cedar Lab"]}],
    })


def test_slots_for_wait_by_hand() -> None:
    """Loads met by 10 requests: 2 (x6), 4 (x3), 6 (x1). With 4 slots 1 of 10 waits (0.1), with
    2 slots 4 of 10 (hand count)."""
    loads = {"2": 6, "4": 3, "6": 1}
    assert slots_for_wait(loads, 0.1, 0) == 4
    assert slots_for_wait(loads, 0.05, 0) == 6
    assert slots_for_wait(loads, 0.4, 0) == 2
    assert slots_for_wait({}, 0.05, 3) == 3


def test_two_greedy_demands_on_two_slots_wait_and_need_four() -> None:
    """Two demands that each reserve 2 of the relay's 2 slots take turns: about half of the
    requests find the other's cycle running (counting argument), and 4 slots (2 x 2) end the
    waiting; with 4 slots nobody waits."""
    tight = {s["site"]: s for s in run(star(2), pairs=300, seed=3, ensembles=False).to_dict()["sites"]}
    relay = tight["Kiln Relay"]
    assert relay["slots_peak"] == 2 and relay["slots_p99"] == 2
    assert 0.3 < relay["waited_share"] <= 1.0
    rows = {r["site"]: r for r in memory_rows(list(tight.values()), 0.05)}
    assert rows["Kiln Relay"]["slots_for_target"] == 4
    roomy = {s["site"]: s for s in run(star(4), pairs=300, seed=3, ensembles=False).to_dict()["sites"]}
    assert roomy["Kiln Relay"]["waited_share"] == 0.0
    assert roomy["Kiln Relay"]["slots_peak"] == 4


def test_a_lone_chain_holds_its_slots() -> None:
    data = star(2)
    lone = load_data({**data.data, "demands": data.data["demands"][:1]})
    sites = {s["site"]: s for s in run(lone, pairs=100, seed=1, ensembles=False).to_dict()["sites"]}
    assert sites["Kiln Relay"]["slots_peak"] == 2
    assert sites["Kiln Relay"]["waited_share"] == pytest.approx(0.0)
