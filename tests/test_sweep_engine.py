"""A small sweep through the real engine, end to end through ``netsim sweep``.

The reference is outside the sweep layer: ``netsim.engine.run`` called directly on the point's
scenario (``netsim.scenario.load_data``) with the point's seed, as DEVELOPERS.md specifies
("Sweeps call engine.run with a seed derived from the base seed and the point's identity").
The one physical check is monotonic: a longer fibre transmits less (eta = 10^(-alpha L / 10),
ITU-T G.652 attenuation of a few tenths of a dB per km; common practice), so the engine's
analytic expected rate falls as ``length_km`` grows.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from test_sweep_support import metric_map, write_scenario

from netsim import engine
from netsim.cli import main
from netsim.scenario import load, load_data
from netsim.sweep.plan import make_plan
from netsim.sweep.worker import flatten_result

SWEEP = '[sweep]\nrepeats = 2\nseed = 9\npairs = 30\n[sweep.vary]\n"links[*].length_km" = [5, 40]\n'


def test_engine_sweep_matches_direct_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    path = write_scenario(tmp_path, SWEEP)
    monkeypatch.chdir(tmp_path)
    assert main(["sweep", str(path), "--workers", "2", "--quiet"]) == 0
    out = capsys.readouterr().out
    assert out.count(" done #") == 4 and "4 of 4 points done, 0 failed" in out
    store = tmp_path / "results" / "farrowmere" / "sweep.sqlite"   # the default location
    stored = metric_map(store)
    plan = make_plan(load(path))
    rates = {}
    for point in plan.points:
        direct = engine.run(load_data(plan.data_for(point)), pairs=30, seed=point.seed).to_dict()
        expected = {(point.point_id, k, n, m): v for k, n, m, v in flatten_result(direct)}
        assert {k: v for k, v in stored.items() if k[0] == point.point_id} == expected
        demand = "Farrowmere Lab-Hobb Quay"
        rates[(point.parameters["links[*].length_km"], point.repeat)] = (
            stored[(point.point_id, "demand", demand, "expected_rate_per_s")],
            stored[(point.point_id, "demand", demand, "rate_per_s")])
    assert rates[(40.0, 0)][0] < rates[(5.0, 0)][0]              # longer fibre, lower expected rate
    assert rates[(5.0, 0)][0] == rates[(5.0, 1)][0]              # analytic: seed-independent
    assert rates[(5.0, 0)][1] != rates[(5.0, 1)][1]              # simulated: independent seeds
