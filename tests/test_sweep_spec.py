"""Sweep specifications: key paths, values, grid/zip, repeats, identities, seeds and bad specs.

Outside references: ``numpy.linspace``/``numpy.geomspace`` define the linear and logarithmic
ranges (reference library); ``numpy.random.SeedSequence`` derives the seeds (reference library;
O'Neill, PCG report HMC-CS-2014-0905 (2014) describes the seeding scheme, memory). No physics is
asserted here.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_sweep_support import write_scenario

from netsim.cli import main
from netsim.errors import ScenarioError
from netsim.scenario import load
from netsim.sweep.keypath import parse_key
from netsim.sweep.plan import make_plan
from netsim.sweep.spec import parse_values, point_identity, point_seed


@pytest.fixture()
def scenario(tmp_path: Path):
    return load(write_scenario(tmp_path))


# ---- values ---------------------------------------------------------------------------------

def test_list_and_text_values() -> None:
    assert parse_values([10, 20.5]) == (10, 20.5)
    assert parse_values("10, 20.5,40") == (10.0, 20.5, 40.0)


def test_linear_range_matches_numpy_linspace() -> None:
    # Reference: numpy.linspace(0.18, 0.3, 5) (reference library), ends included.
    got = parse_values("lin:0.18:0.3:5")
    assert np.allclose(got, np.linspace(0.18, 0.3, 5), rtol=1e-12, atol=0)
    assert got[0] == 0.18 and got[-1] == 0.3


def test_log_range_matches_numpy_geomspace() -> None:
    # Reference: numpy.geomspace(0.01, 10, 7) (reference library): 0.01, ~0.0316, 0.1, ..., 10.
    got = parse_values({"from": 0.01, "to": 10, "points": 7, "scale": "log"})
    assert np.allclose(got, np.geomspace(0.01, 10, 7), rtol=1e-11, atol=0)
    assert got[2] == 0.1 and got[-1] == 10.0


@pytest.mark.parametrize(("raw", "fragment"), [
    ("lin:1:2", "expected a list of numbers"),
    ("log:0:10:3", "FROM > 0 and TO > 0"),
    ("lin:1:2:1", "points = 1 is not allowed; expected an integer in [2,"),
    ("abc", "'abc' is not allowed; expected a list of numbers"),
    ("1,nan", "expected a list of numbers"),
    ({"from": 1, "to": 2}, "is not allowed; expected a list of numbers"),
    ({"from": 1, "to": 2, "points": 3, "scale": "cubic"}, "scale = 'cubic' is not allowed"),
    ([], "[] is not allowed; expected at least one value"),
    ([1, True], "expected a list of numbers"),
])
def test_bad_values_name_what_is_allowed(raw: object, fragment: str) -> None:
    with pytest.raises(ValueError, match=None) as info:
        parse_values(raw)
    assert fragment in str(info.value)


# ---- key paths -------------------------------------------------------------------------------

def test_key_paths_are_normalised() -> None:
    assert str(parse_key(" links[ * ].length_km")) == "links[*].length_km"
    assert str(parse_key("sites[role = repeater].t2_s")) == "sites[role=repeater].t2_s"
    assert str(parse_key("defaults.link.attenuation_db_per_km")) == "defaults.link.attenuation_db_per_km"
    assert parse_key("sites[3].t1_s").selector == 3


def test_selectors_address_the_right_entries(scenario) -> None:
    plan = make_plan(scenario, ["sites[role=repeater].t2_s=0.25", "links[name=Gull's Reach Relay-Hobb Quay].length_km=30",
                                "defaults.link.attenuation_db_per_km=0.2", "protocol.cutoff_s=0.1"])
    data = plan.data_for(plan.points[0])
    assert [s.get("t2_s") for s in data["sites"]] == [None, 0.25, None]
    assert [link["length_km"] for link in data["links"]] == [10.0, 30.0]
    assert data["defaults"]["link"]["attenuation_db_per_km"] == 0.2
    assert data["protocol"]["cutoff_s"] == 0.1
    assert "sweep" not in data and "defaults" not in scenario.data  # the base data is untouched


# ---- grid, zip, repeats, identity, seeds ------------------------------------------------------

def test_grid_zip_and_repeats(scenario) -> None:
    grid = make_plan(scenario, ["links[*].length_km=5,10,20", "sites[1].t2_s=0.5,1"], repeats=2)
    assert len(grid.points) == 3 * 2 * 2
    assert len({p.point_id for p in grid.points}) == 12
    zipped = make_plan(scenario, ["links[*].length_km=5,10", "sites[1].t2_s=0.5,1"], combine="zip")
    assert [dict(p.parameters) for p in zipped.points] == [
        {"links[*].length_km": 5.0, "sites[1].t2_s": 0.5}, {"links[*].length_km": 10.0, "sites[1].t2_s": 1.0}]


def test_identity_and_seed_do_not_depend_on_position(scenario) -> None:
    a = make_plan(scenario, ["links[*].length_km=5,10,20"], seed=3)
    b = make_plan(scenario, ["links[*].length_km=20,10,5"], seed=3)
    seeds_a = {p.parameters["links[*].length_km"]: (p.point_id, p.seed) for p in a.points}
    seeds_b = {p.parameters["links[*].length_km"]: (p.point_id, p.seed) for p in b.points}
    assert seeds_a == seeds_b
    assert len({s for _, s in seeds_a.values()}) == 3


def test_seed_follows_seedsequence(scenario) -> None:
    # Reference: numpy.random.SeedSequence(entropy, spawn_key=...) (reference library).
    pid = point_identity({"links[*].length_km": 5.0}, 1)
    words = [int(pid[i:i + 8], 16) for i in range(0, 32, 8)]
    expected = int(np.random.SeedSequence(11, spawn_key=words).generate_state(1, np.uint64)[0]) >> 1
    assert point_seed(11, pid) == expected
    assert point_seed(12, pid) != expected
    assert point_identity({"links[*].length_km": 5.0}, 0) != pid


def test_file_table_and_cli_override(tmp_path: Path) -> None:
    sweep = '[sweep]\nrepeats = 2\nseed = 4\npairs = 30\n[sweep.vary]\n"links[*].length_km" = [5, 10]\n' \
            '"sites[role=repeater].t2_s" = {from = 0.1, to = 10, points = 3, scale = "log"}\n'
    sc = load(write_scenario(tmp_path, sweep))
    plan = make_plan(sc)
    assert len(plan.points) == 2 * 3 * 2 and plan.spec.seed == 4 and dict(plan.spec.stop) == {"pairs": 30}
    over = make_plan(sc, ["links[*].length_km=7"], time_s=2.0)
    assert len(over.points) == 1 * 3 * 2 and dict(over.spec.stop) == {"time_s": 2.0}
    assert over.spec.hash != plan.spec.hash


def test_integer_keys_take_whole_numbers(scenario) -> None:
    plan = make_plan(scenario, ["links[*].modes=lin:1:10:4"])
    assert [p.parameters["links[*].modes"] for p in plan.points] == [1, 4, 7, 10]
    assert all(isinstance(p.parameters["links[*].modes"], int) for p in plan.points)


# ---- bad specs: one line each, naming the key, the value and what is allowed -------------------

@pytest.mark.parametrize(("vary", "fragments"), [
    (["links[*].scheme=1,2"], ["--vary links[*].scheme", "'scheme' is not a numeric key of links", "length_km"]),
    (["nodes[*].t1_s=1"], ["--vary nodes[*].t1_s", "is not a sweep key; expected"]),
    (["links.length_km=1"], ["--vary links.length_km", "needs a selector"]),
    (["links[*].length_km"], ["--vary: 'links[*].length_km' is not allowed; expected KEY=VALUES"]),
    (["links[*].length_km=lin:1:5"], ["--vary links[*].length_km", "'lin:1:5' is not allowed; expected"]),
    (["links[*].modes=1.5,2"], ["--vary links[*].modes", "[1.5, 2.0] is not allowed; modes takes whole numbers"]),
    (["links[*].length_km=5,5"], ["--vary links[*].length_km", "expected distinct values"]),
    (["sites[role=router].t1_s=5"], ["--vary sites[role=router].t1_s", "selector matches no entry of sites"]),
    (["links[7].length_km=5"], ["--vary links[7].length_km", "indices 0 to 1"]),
    (["links[*].length_km=5,10", "links[0].length_km=3"],
     ["--vary links[0].length_km", "sets the same scenario key as --vary links[*].length_km"]),
])
def test_bad_vary_is_one_line_per_problem(scenario, vary: list[str], fragments: list[str]) -> None:
    with pytest.raises(ScenarioError) as info:
        make_plan(scenario, vary)
    text = str(info.value)
    for fragment in fragments:
        assert fragment in text
    assert len(info.value.problems) == 1 and "\n" not in text


def test_bad_table_reports_every_problem(tmp_path: Path) -> None:
    sweep = ('[sweep]\nrepeats = 0\ncombine = "cross"\nseeds = 3\npairs = 10\ntime_s = 1.0\n'
             '[sweep.vary]\n"links[*].length_km" = [5, 10]\n"sites[1].t2_s" = [1]\n')
    sc = load(write_scenario(tmp_path, sweep))
    with pytest.raises(ScenarioError) as info:
        make_plan(sc)
    lines = str(info.value).splitlines()
    assert all(line.startswith(str(sc.source)) for line in lines)
    text = "\n".join(lines)
    assert "sweep.seeds: unknown key; expected one of vary, combine, repeats, seed" in text
    assert "sweep.repeats: 0 is not allowed; expected an integer >= 1" in text
    assert "sweep.combine: 'cross' is not allowed; expected 'grid' or 'zip'" in text
    assert "pairs, time_s given together; expected at most one stop rule" in text


def test_sweep_table_of_the_wrong_shape() -> None:
    from netsim.sweep.spec import build_spec

    with pytest.raises(ScenarioError, match=r"^sweep: 3 is not allowed; expected a table$"):
        build_spec(3)  # type: ignore[arg-type]
    with pytest.raises(ScenarioError, match=r"^sweep\.vary: \[1, 2\] is not allowed; expected a table of KEY = VALUES$"):
        build_spec({"vary": [1, 2]})
    with pytest.raises(ScenarioError, match=r"^sweep\.vary: no axes; expected at least one KEY = VALUES"):
        build_spec({})


def test_zip_needs_equal_lengths(scenario) -> None:
    with pytest.raises(ScenarioError, match=r"--combine: zipped axes need equal lengths; "
                                            r"--vary links\[\*\]\.length_km has 3, --vary sites\[1\]\.t2_s has 2"):
        make_plan(scenario, ["links[*].length_km=5,10,20", "sites[1].t2_s=0.5,1"], combine="zip")


def test_point_that_invalidates_the_scenario_is_found_before_running(scenario) -> None:
    # T2 <= 2 T1 is the physical limit of the memory channel (DESIGN conventions; common practice).
    with pytest.raises(ScenarioError) as info:
        make_plan(scenario, ["sites[role=repeater].t2_s=1,50", "sites[role=repeater].t1_s=10"])
    text = str(info.value)
    assert "sweep point 1 (sites[role=repeater].t2_s=50, sites[role=repeater].t1_s=10): " \
           "is refused: sites[1]" in text
    assert "sweep point 0" not in text


def test_negative_length_in_a_range_is_refused(scenario) -> None:
    with pytest.raises(ScenarioError) as info:
        make_plan(scenario, ["links[*].length_km=lin:-10:10:3"])
    assert "links[0].length_km" in str(info.value) and "-10" in str(info.value)


def test_cli_prints_one_line_and_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = write_scenario(tmp_path)
    code = main(["sweep", str(path), "--vary", "links[*].length_km=log:-1:10:3", "--dry-run"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err
    assert ("--vary links[*].length_km: from = -1, to = 10 is not allowed; expected FROM > 0 and TO > 0 "
            "for a log range") in err


def test_cli_rejects_bad_numbers(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = write_scenario(tmp_path)
    code = main(["sweep", str(path), "--vary", "links[*].length_km=5", "--point-timeout-s", "-3"])
    assert code == 2
    assert "--point-timeout-s = -3 is not allowed; expected a number of seconds > 0" in capsys.readouterr().err


def test_dry_run_lists_points_and_estimates(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import argparse

    from netsim.cli import build_parser
    from netsim.cli.sweep_cmd import run_command
    from netsim.sweep.synthetic import SyntheticPoint

    path = write_scenario(tmp_path)
    store = tmp_path / "s.sqlite"
    args: argparse.Namespace = build_parser().parse_args(
        ["sweep", str(path), "--vary", "links[*].length_km=5,10,20", "--repeats", "2", "--workers", "2",
         "--store", str(store), "--dry-run"])
    assert run_command(args, point_function=SyntheticPoint(sleep_s=0.05)) == 0
    out = capsys.readouterr().out.splitlines()
    assert len([line for line in out if line.startswith("#")]) == 6
    assert "6 points, 6 to run" in out[6]
    # a length sweep of a lone two-hop chain cannot change its route (the sweep reports route changes)
    assert out[7] == "route changes against the base scenario: none"
    seconds = float(out[8].split(" took ")[1].split(" s;")[0])
    assert seconds >= 0.05 and "on 2 workers" in out[8]
    assert not store.exists()  # a dry run writes nothing
    assert math.isfinite(seconds)


def test_dry_run_calibration_is_bounded(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from netsim.cli import build_parser
    from netsim.cli.sweep_cmd import run_command
    from netsim.sweep.synthetic import SyntheticPoint

    path = write_scenario(tmp_path)
    args = build_parser().parse_args(["sweep", str(path), "--vary", "links[0].length_km=10,20", "--workers", "1",
                                      "--point-timeout-s", "0.3", "--dry-run", "--store", str(tmp_path / "s.sqlite")])
    assert run_command(args, point_function=SyntheticPoint(hang_at_length_km=10.0)) == 0
    last = capsys.readouterr().out.splitlines()[-1]
    assert last.startswith("calibration point #0 did not finish within 0.3 s; "
                           "estimated run time for 2 points on 1 worker: more than")


_KEYS = ["links[*].length_km", "links[1].modes", "sites[role=repeater].t2_s", "sites[name=Hobb Quay].t1_s",
         "defaults.link.attenuation_db_per_km", "protocol.cutoff_s", "demands[0].pairs", "links[9].length_km",
         "sites[*].role", "links[x].length_km", "defaults.site.x_km", "links[*].len\ngth_km", "\n"]
_VALUES = ["1,2", "lin:1:5:3", "log:0.1:10:3", "-1,5", "0", "1e400", "lin:5:1:2", "log:1:1:2", "x", ""]


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(items=st.lists(st.tuples(st.sampled_from(_KEYS) | st.text(max_size=12),
                                st.sampled_from(_VALUES) | st.text(max_size=8)), min_size=1, max_size=3),
       combine=st.sampled_from([None, "grid", "zip"]))
def test_any_vary_loads_or_fails_with_one_line_problems(scenario, items: list[tuple[str, str]],
                                                         combine: str | None) -> None:
    """Robustness (common practice): any --vary text gives a plan or a ScenarioError, nothing else."""
    try:
        plan = make_plan(scenario, [f"{k}={v}" for k, v in items], combine=combine)
    except ScenarioError as exc:
        assert exc.problems and all("\n" not in str(p) for p in exc.problems)
    else:
        assert 1 <= len(plan.points) <= 27
