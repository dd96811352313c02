"""The event engine with the node physics (one communication qubit per site, memory transfer
time and error, attempt dephasing, photon indistinguishability, phase noise, cut-off) against
figures recorded before its second round of speed work.

``tests/data/engine_node_physics_figures.json`` was written by
``tests/data/record_engine_figures.py`` with the engine as it was before that work: the bundled
scenarios and two seeded generated grids (the 7x7 / 24-demand / 4-slot benchmark grid among them),
every hardware value written out, so later changes of profiles or built-in defaults do not move
the comparison. A figure now, from another seed, must agree with the recorded one within the two
runs' intervals (equal statistics whatever the internal event order).
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import pytest

from conftest import assert_agrees_with_record

from netsim.engine import run
from netsim.scenario import load_data

DATA = Path(__file__).resolve().parent / "data" / "engine_node_physics_figures.json"
REFERENCE = json.loads(DATA.read_text())
#: two independent estimates differ by more than 4 combined standard errors with p < 1e-4
#: (normal approximation; common practice)
Z_SPLIT = 4.0



@pytest.mark.parametrize("name", list(REFERENCE))
def test_figures_agree_with_those_recorded_before_the_speed_work(name: str) -> None:
    ref = REFERENCE[name]
    result = run(load_data(ref["scenario"], source=name), pairs=ref["pairs"], seed=ref["seed"] + 1, ensembles=False)
    assert {row["demand"] for row in result.demands} == set(ref["demands"])
    assert_agrees_with_record(result, ref, Z_SPLIT, _link_tolerance)


def _link_tolerance(link: dict[str, Any], tol: float, rel_rate: float) -> float:
    # busy time = the rounds of N successes: a sum of N geometric counts with N itself random,
    # relative standard error about sqrt((2 - p) / N) (p = successes / attempts; common
    # practice), on top of the run length's (the worst demand's rate error)
    n = max(link["successes"], 1)
    p = link["successes"] / max(link["attempts"], 1)
    rel = math.hypot(math.sqrt((2.0 - p) / n), rel_rate)
    return max(tol, Z_SPLIT * math.sqrt(2.0) * rel)  # two independent runs


def test_the_recorded_cases_carry_the_node_physics() -> None:
    """The comparison is only worth something if the recorded networks exercise the node physics:
    one communication qubit, a memory transfer time and error, attempt dephasing, imperfect
    interference and phase noise at the values written out in the data file."""
    for name in ("chain3", "grid-7x7-24-demands-slots-4-seed-1"):
        scenario = load_data(REFERENCE[name]["scenario"], source=name)
        for site in scenario.sites:
            assert site.communication_qubits == 1 and site.memory_transfer_s > 0 and site.memory_transfer_error > 0
            assert site.attempt_dephasing > 0 and site.photon_indistinguishability < 1
        assert all(link.phase_noise_rad > 0 for link in scenario.links)
        assert scenario.protocol.cutoff_s is not None


def test_same_seed_gives_the_same_numbers_with_the_node_physics() -> None:
    """Seeded simulation repeats exactly (common practice): one seed, the same figures twice; another
    seed, other figures. On the 4x4 grid every site has one communication qubit, a transfer time
    and error and attempt dephasing, and demands contend for slots, interfaces and fibres."""
    name = "grid-4x4-8-demands-slots-2-seed-3"
    scenario = load_data(REFERENCE[name]["scenario"], source=name)
    a = run(scenario, pairs=60, seed=4, ensembles=False).to_dict()
    b = run(scenario, pairs=60, seed=4, ensembles=False).to_dict()
    c = run(scenario, pairs=60, seed=5, ensembles=False).to_dict()
    assert a["demands"] == b["demands"] and a["sites"] == b["sites"] and a["links"] == b["links"]
    assert a["demands"] != c["demands"]
