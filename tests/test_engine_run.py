"""``netsim.engine.run`` on scenarios and the ``netsim run`` command."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

from netsim import engine
from netsim.errors import ParameterError
from netsim.scenario import load_data

#: Subprocesses run this checkout's netsim (not whatever copy is installed), from any directory.
_ENV = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parent.parent))

REQUIRED_KEYS = ("delivered_pairs", "simulated_time_s", "rate_per_s", "rate_ci95", "fidelity_mean",
                 "fidelity_ci95", "eof_mean", "eof_of_mean_state", "ebits_per_s", "coherent_information_mean",
                 "key_fraction", "key_rate_per_s", "expected_rate_per_s", "route_bound_bits_per_s")


def _data(cutoff: float | None = None, hub_slots: int = 4) -> dict[str, Any]:
    """An invented four-user network around one repeater hub (demo values only)."""
    sites = [{"name": "Orrin Hub", "role": "repeater", "memory_slots": hub_slots}]
    sites += [{"name": n, "role": "user"} for n in ("Tamsin Yard", "Wexcombe", "Hollin Mill", "Carrow Fen")]
    links = [{"ends": [n, "Orrin Hub"], "length_km": km}
             for n, km in (("Tamsin Yard", 8.0), ("Wexcombe", 11.0), ("Hollin Mill", 6.0), ("Carrow Fen", 9.0))]
    data: dict[str, Any] = {
        "network": {"name": "Orrin test star"},
        # stated: the closed form beside the run models neither shared optical interfaces, nor
        # transfer time, nor attempt dephasing (the built-in defaults are demonstrated NV values)
        "defaults": {"site": {"t1_s": 10.0, "t2_s": 1.0, "emission_efficiency": 0.3, "communication_qubits": 8,
                              "memory_transfer_s": 0.0, "memory_transfer_error": 0.0, "attempt_dephasing": 0.0}},
        "sites": sites, "links": links,
        "demands": [{"users": ["Tamsin Yard", "Wexcombe"], "pairs": 50},
                    {"users": ["Hollin Mill", "Carrow Fen"], "pairs": 50}],
        "encoding": {"states": "bb84"},
        "protocol": {},
    }
    if cutoff is not None:
        data["protocol"]["cutoff_s"] = cutoff
    return data


def test_run_reports_every_required_key_and_matches_budget() -> None:
    # Analytic expectation beside the simulated rate: they must agree for a lone two-hop demand
    # without cut-off (budget: Shchukin, Schmidt & van Loock 2019 waiting time, memory decay
    # ignored, which does not change the rate).
    result = engine.run(load_data(_data()), pairs=3000, seed=4)
    for row in result.demands:
        for key in REQUIRED_KEYS:
            assert key in row, key
        assert row["engine"] == "vector"
        low, high = row["rate_ci95"]
        half = (high - low) / 2
        assert abs(row["rate_per_s"] - row["expected_rate_per_s"]) < 4.5 / 1.96 * half
        assert row["rate_per_s"] <= row["route_bound_bits_per_s"]
    assert {r["link"] for r in result.links} == {"Tamsin Yard-Orrin Hub", "Wexcombe-Orrin Hub",
                                                  "Hollin Mill-Orrin Hub", "Carrow Fen-Orrin Hub"}
    assert all(0 <= s["memory_occupancy"] <= 1 for s in result.sites)


def test_same_seed_same_numbers_and_shared_sites_use_the_event_engine() -> None:
    scenario = load_data(_data(cutoff=0.2, hub_slots=2))
    a = engine.run(scenario, pairs=40, seed=7).to_dict()
    b = engine.run(scenario, pairs=40, seed=7).to_dict()
    c = engine.run(scenario, pairs=40, seed=8).to_dict()
    assert a == b
    assert a["demands"] != c["demands"]
    assert {row["engine"] for row in a["demands"]} == {"des"}


def test_write_produces_json_and_csv(tmp_path: Path) -> None:
    result = engine.run(load_data(_data()), time_s=0.5, seed=1)
    paths = result.write(tmp_path / "out")
    data = json.loads((tmp_path / "out" / "run.json").read_text())
    assert data["demands"][0]["simulated_time_s"] == 0.5
    header = (tmp_path / "out" / "run.csv").read_text().splitlines()[0].split(",")
    assert "rate_per_s" in header and len(paths) == 2


@pytest.mark.parametrize("kwargs, fragment", [
    ({"pairs": 0}, "--pairs = 0 is not allowed; expected an integer >= 1"),
    ({"time_s": -1.0}, "--time-s = -1 is not allowed"),
    ({"precision": 1.5}, "--precision = 1.5 is not allowed"),
    ({"pairs": 5, "time_s": 1.0}, "only one stop rule"),
    ({"pairs": 5, "seed": -3}, "seed = -3 is not allowed; expected an integer >= 0"),
])
def test_bad_stop_rules_are_one_line_errors(kwargs: dict[str, Any], fragment: str) -> None:
    with pytest.raises(ParameterError, match=fragment.replace("(", r"\(")):
        engine.run(load_data(_data()), **kwargs)


def test_too_few_slots_names_the_site() -> None:
    with pytest.raises(ParameterError, match=r"sites\[0\]\.memory_slots = 1 is not allowed; expected an integer >= 2"):
        engine.run(load_data(_data(hub_slots=1)), pairs=5)


def test_precision_rule_stops_at_the_requested_width() -> None:
    result = engine.run(load_data(_data()), precision=0.05, seed=2)
    for row in result.demands:
        low, high = row["rate_ci95"]
        assert (high - low) / 2 / row["rate_per_s"] <= 0.06


def _cli(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "netsim", "run", *args], capture_output=True, text=True,
                          cwd=cwd, env=_ENV, timeout=120, check=False)


def test_cli_writes_results_and_prints_a_table(tmp_path: Path) -> None:
    import tomllib  # noqa: F401  (the file below is TOML written by hand)

    toml = tmp_path / "orrin.toml"
    toml.write_text(_toml(_data()), encoding="utf-8")
    done = _cli(str(toml), "--pairs", "30", "--seed", "3", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert "rate (pairs/s)" in done.stdout
    data = json.loads((tmp_path / "results" / "orrin" / "run.json").read_text())
    assert [d["delivered_pairs"] >= 30 for d in data["demands"]] == [True, True]


def test_cli_bad_flag_is_one_line_exit_2(tmp_path: Path) -> None:
    toml = tmp_path / "orrin.toml"
    toml.write_text(_toml(_data()), encoding="utf-8")
    done = _cli(str(toml), "--time-s", "soon", cwd=tmp_path)
    assert done.returncode == 2
    expected = "netsim run: error: --time-s = 'soon' is not allowed; expected a finite time > 0 in seconds"
    assert done.stderr.strip().splitlines() == [expected]


def _toml(data: dict[str, Any]) -> str:
    """A tiny TOML writer for the test scenario (tables, arrays of tables, strings, numbers)."""
    def value(v: Any) -> str:
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    out = []
    for key in ("network", "encoding", "protocol"):
        out += [f"[{key}]"] + [f"{k} = {value(v)}" for k, v in data[key].items()]
    for k, table in data["defaults"].items():
        out += [f"[defaults.{k}]"] + [f"{kk} = {value(v)}" for kk, v in table.items()]
    for key in ("sites", "links", "demands"):
        for table in data[key]:
            out += [f"[[{key}]]"] + [f"{k} = {value(v)}" for k, v in table.items()]
    return "\n".join(out) + "\n"


def test_cli_ctrl_c_writes_what_was_delivered(tmp_path: Path) -> None:
    # A very long run interrupted with SIGINT: exit code 130, a message saying the files hold
    # the pairs delivered so far, and run.json flagged as interrupted. (The limit on link pairs is
    # raised: without it so long a run is refused before it starts.)
    import signal
    import time

    data = _data()
    data["demands"] = data["demands"][:1]
    toml = tmp_path / "orrin.toml"
    toml.write_text(_toml(data), encoding="utf-8")
    proc = subprocess.Popen([sys.executable, "-m", "netsim", "run", str(toml), "--time-s", "1e9",
                             "--max-link-pairs", "1e15"],
                            cwd=tmp_path, env=_ENV, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(6.0)
    proc.send_signal(signal.SIGINT)
    _out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "interrupted" in err
    data_out = json.loads((tmp_path / "results" / "orrin" / "run.json").read_text())
    assert data_out["interrupted"] is True
    assert data_out["demands"][0]["delivered_pairs"] > 0


def test_coherent_information_does_not_depend_on_which_user_is_written_first() -> None:
    """One-way hashing may run from either user (Devetak & Winter, Proc. R. Soc. A 461, 207,
    2005), so a demand written A-B or B-A reports the same coherent information: the better end.
    Here one user's memory decays fast (T1 = 0.5 ms), so the two directions differ by about 3x."""
    def scenario(users: list[str]) -> Any:
        return load_data({"network": {"name": "either end"},
                          # stated: a bright emitter, ideal interference and memories apart from the decay compared
                          "defaults": {"site": {"photon_indistinguishability": 1.0, "memory_transfer_s": 0.0,
                                                "emission_efficiency": 0.5, "attempt_prep_time_s": 1e-6,
                                                "memory_transfer_error": 0.0, "attempt_dephasing": 0.0},
                                       "link": {"phase_noise_rad": 0.0}},
                          "sites": [{"name": "Fenwick", "role": "user", "t1_s": 0.0005, "t2_s": 0.001},
                                    {"name": "Garrow", "role": "user", "t1_s": 100.0, "t2_s": 1.0}],
                          "links": [{"ends": ["Fenwick", "Garrow"], "length_km": 20.0, "scheme": "single_photon",
                                     "bright_state_population": 0.03, "midpoint_fraction": 0.2}],
                          "demands": [{"users": users}]})

    one, other = (engine.run(scenario(u), pairs=300, seed=4).to_dict()["demands"][0]
                  for u in (["Fenwick", "Garrow"], ["Garrow", "Fenwick"]))
    assert one["coherent_information_mean"] > 0.1
    assert one["coherent_information_mean"] == pytest.approx(other["coherent_information_mean"], rel=1e-9)
    assert one["distillable_ebits_per_s"] == pytest.approx(other["distillable_ebits_per_s"], rel=1e-9)
