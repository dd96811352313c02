"""Routes cannot change unseen across a sweep: dry run, store, report tables and figures; and the
entries a defaults.* axis does not reach are named."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from test_sweep_support import write_scenario

from netsim.cli import main
from netsim.report.build import report_figures, report_tables
from netsim.report.sources import load_source
from netsim.scenario import load
from netsim.sweep.plan import make_plan
from netsim.sweep.routes import route_changes, unswept_overrides
from netsim.sweep.runner import store_meta, tasks_for
from netsim.sweep.store import create_or_resume
from netsim.sweep.worker import engine_point, execute

#: Invented: Ivel Lab reaches Jessop Lab over Kiln Relay (2 x 10 km at the default attenuation) or
#: over Lark Relay (2 x 11 km that set 0.25 dB/km themselves). Extra loss 1 dB per link.
#: Loss adds in dB (common practice): via Kiln 20 a + 2 dB, via Lark 7.5 dB, so least_loss takes
#: Kiln up to a = 0.275 dB/km and Lark above it.
TWO_WAYS = """\
[network]
name = "Ivel two ways"

[defaults.link]
attenuation_db_per_km = 0.2
extra_loss_db = 1.0

[[sites]]
name = "Ivel Lab"
role = "user"

[[sites]]
name = "Kiln Relay"
role = "repeater"
memory_slots = 4

[[sites]]
name = "Lark Relay"
role = "repeater"
memory_slots = 4
t2_s = 0.5

[[sites]]
name = "Jessop Lab"
role = "user"

[[links]]
ends = ["Ivel Lab", "Kiln Relay"]
length_km = 10.0

[[links]]
ends = ["Kiln Relay", "Jessop Lab"]
length_km = 10.0

[[links]]
ends = ["Ivel Lab", "Lark Relay"]
length_km = 11.0
attenuation_db_per_km = 0.25

[[links]]
ends = ["Lark Relay", "Jessop Lab"]
length_km = 11.0
attenuation_db_per_km = 0.25

[[demands]]
users = ["Ivel Lab", "Jessop Lab"]
pairs = 40
min_fidelity = 0.7
"""

SWEEP = '[sweep]\nseed = 4\n[sweep.vary]\n"defaults.link.attenuation_db_per_km" = [0.2, 0.25, 0.3, 0.35]\n'


def _plan(tmp_path: Path):  # type: ignore[no-untyped-def]
    path = write_scenario(tmp_path, SWEEP, name="ivel.toml", base=TWO_WAYS)
    return path, make_plan(load(path))


def test_route_changes_and_unswept_links_are_listed_before_anything_runs(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path, plan = _plan(tmp_path)
    changes = route_changes(plan)
    assert len(changes) == 2  # 0.3 and 0.35 dB/km: 8 dB and 9 dB via Kiln exceed 7.5 dB via Lark
    assert all("Ivel Lab > Lark Relay > Jessop Lab (base Ivel Lab > Kiln Relay > Jessop Lab)" in c for c in changes)
    assert "defaults.link.attenuation_db_per_km=0.3" in changes[0]
    overrides = unswept_overrides(plan)
    assert len(overrides) == 1
    assert "links[2] (Ivel Lab-Lark Relay), links[3] (Lark Relay-Jessop Lab) set attenuation_db_per_km" in overrides[0]
    assert "links[*].attenuation_db_per_km" in overrides[0]
    assert main(["sweep", str(path), "--dry-run", "--store", str(tmp_path / "s.sqlite")]) == 0
    out = capsys.readouterr().out
    assert "route changes against the base scenario: 2" in out and "not swept: defaults.link" in out


def test_the_store_keeps_routes_and_the_report_marks_changed_points(tmp_path: Path) -> None:
    """Points run in this process (so this checkout's engine runs them), stored as the runner does."""
    path, plan = _plan(tmp_path)
    store_path = tmp_path / "ivel.sqlite"
    with create_or_resume(store_path, store_meta(plan)) as store:
        store.register((p.point_id, p.ordinal, json.dumps(dict(p.parameters), sort_keys=True), p.repeat, p.seed)
                       for p in plan.points)
        for task in tasks_for(plan, plan.points, None):
            assert store.record(execute(engine_point, task))
        meta = store.meta()
        routes = {m["parameters"]["defaults.link.attenuation_db_per_km"]: m["metric"]
                  for m in store.metrics(kind="route")}
    assert json.loads(meta["base_routes"]) == {"Ivel Lab-Jessop Lab": "Ivel Lab > Kiln Relay > Jessop Lab"}
    assert routes[0.2] == "Ivel Lab > Kiln Relay > Jessop Lab" and routes[0.35] == "Ivel Lab > Lark Relay > Jessop Lab"
    data = load_source(store_path)
    demands = [r for r in data.records if r["kind"] == "demand"]
    assert {r["defaults.link.attenuation_db_per_km"]: r["route_changed"] for r in demands} == {
        0.2: False, 0.25: False, 0.3: True, 0.35: True}
    tables = report_tables(data)
    fidelity = next(t for k, t in tables.items() if k.startswith("pivot-fidelity_mean"))
    assert [r["route"] for r in fidelity.rows] == [None, None, "Ivel Lab > Lark Relay > Jessop Lab",
                                                   "Ivel Lab > Lark Relay > Jessop Lab"]
    assert any("Route differs from the base scenario's at 2 point(s)" in n for n in fidelity.notes)
    assert all(r["meets"] in (True, False) for r in fidelity.rows)  # min_fidelity 0.7 judged per point
    assert any(k.startswith("pivot-useful_rate_per_s") for k in tables)
    figures = report_figures(data, tables)
    fig = figures["fidelity_mean-vs-defaults.link.attenuation_db_per_km"]
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert "min fidelity 0.7" in labels and "route differs from the base scenario's" in labels
