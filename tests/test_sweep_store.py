"""The SQLite result store: layout, atomic points, and refusal of foreign or corrupt files.

Outside references: the SQLite file format (sqlite.org/fileformat.html: a database starts with
the 16-byte header "SQLite format 3\\0") and its documented atomic commit and WAL journal
(sqlite.org/atomiccommit.html, sqlite.org/wal.html) (reference library documentation).
"""

from __future__ import annotations

import json
import os
import sqlite3
from pathlib import Path

import pytest
from test_sweep_support import write_scenario

from netsim.cli import main
from netsim.errors import StoreError
from netsim.scenario import load
from netsim.sweep.executors import LocalPool
from netsim.sweep.plan import make_plan
from netsim.sweep.runner import run_sweep, scenario_hash
from netsim.sweep.store import PointRecord, create_or_resume, open_store
from netsim.sweep.synthetic import SyntheticPoint
from netsim.sweep.worker import PointTask, execute, flatten_result

META = {"scenario_hash": "a" * 64, "spec_hash": "b" * 64, "scenario_name": "Test"}


def _filled_store(path: Path, points: int = 200) -> None:
    with create_or_resume(path, META) as store:
        store.register([(f"p{i}", i, json.dumps({"k": i}), 0, i) for i in range(points)])
        for i in range(points):
            metrics = [("demand", "Ash-Birch", f"m{j}", float(i * j)) for j in range(15)]
            store.record(PointRecord(f"p{i}", "done", "t0", "t1", 0.1, None, metrics))
    db = sqlite3.connect(path)
    db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    db.close()


def test_layout_meta_and_wal(tmp_path: Path) -> None:
    path = tmp_path / "deep" / "dir" / "s.sqlite"
    with create_or_resume(path, META):  # WAL while the sweep writes
        db = sqlite3.connect(path)
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        db.close()
    _filled_store(path, 3)
    assert path.read_bytes()[:16] == b"SQLite format 3\x00"  # SQLite file format header
    db = sqlite3.connect(path)
    # closed: the journal folded into the file, one self-contained file (sqlite.org/wal.html)
    assert db.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    assert not Path(f"{path}-wal").exists()
    db.close()
    with open_store(path) as store:
        meta = store.meta()
        assert meta["format"] == "netsim sweep store" and meta["schema_version"] == "1"
        assert meta["scenario_hash"] == "a" * 64 and meta["spec_hash"] == "b" * 64
        points = store.points()
        assert [p["parameters"] for p in points] == [{"k": 0}, {"k": 1}, {"k": 2}]
        assert {p["status"] for p in points} == {"done"} and {p["attempts"] for p in points} == {1}
        assert len(store.metrics()) == 45 and len(store.metrics(metric="m2")) == 3
        assert store.counts() == {"pending": 0, "done": 3, "failed": 0}


def test_a_failing_write_leaves_the_point_whole(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    with create_or_resume(path, META) as store:
        store.register([("p0", 0, "{}", 0, 1)])
        duplicate = [("demand", "x", "m", 1.0), ("demand", "x", "m", 2.0)]  # breaks the primary key
        with pytest.raises(StoreError, match="cannot use the store"):
            store.record(PointRecord("p0", "done", metrics=duplicate))
        assert store.points()[0]["status"] == "pending" and store.metrics() == []
        assert store.record(PointRecord("p0", "done", metrics=[("demand", "x", "m", 1.0)]))
        assert not store.record(PointRecord("p0", "done", metrics=[("demand", "x", "m", 9.0)]))
        assert [m["value"] for m in store.metrics()] == [1.0]


def test_names_with_quotes_survive(tmp_path: Path) -> None:
    # Parameterised SQL: a site name with an apostrophe and SQL text is stored verbatim.
    name = "Gull's Reach'); DROP TABLE points; --"
    path = tmp_path / "s.sqlite"
    with create_or_resume(path, META) as store:
        store.register([("p0", 0, json.dumps({"x": 1}), 0, 1)])
        store.record(PointRecord("p0", "done", metrics=[("site", name, "occupancy", 0.5)]))
    assert open_store(path).metrics()[0]["name"] == name


def test_not_a_database_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "notes.sqlite"
    path.write_bytes(b"These are meeting notes about the Farrowmere fibre, not a store.\n" * 50)
    with pytest.raises(StoreError, match=r"notes\.sqlite: is not a netsim sweep store \(not an SQLite database\)$"):
        open_store(path)
    with pytest.raises(StoreError, match="not an SQLite database"):
        create_or_resume(path, META)


def test_foreign_sqlite_file_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "other.sqlite"
    db = sqlite3.connect(path)
    db.execute("CREATE TABLE inventory (item TEXT)")
    db.commit()
    db.close()
    with pytest.raises(StoreError, match=r"is not a netsim sweep store \(it has tables inventory\)"):
        create_or_resume(path, META)


def test_other_schema_version_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    _filled_store(path, 1)
    db = sqlite3.connect(path)
    db.execute("UPDATE meta SET value = '99' WHERE key = 'schema_version'")
    db.commit()
    db.close()
    with pytest.raises(StoreError, match=r"store schema version '99' is not supported; expected 1"):
        open_store(path)


@pytest.mark.parametrize("where", ["header", "page", "truncated"])
def test_corrupt_store_is_refused(tmp_path: Path, where: str) -> None:
    path = tmp_path / "s.sqlite"
    _filled_store(path)
    data = bytearray(path.read_bytes())
    if where == "header":
        data[:100] = b"\xff" * 100
    elif where == "page":
        data[len(data) // 2: len(data) // 2 + 4096] = os.urandom(4096)
    else:
        data = data[: len(data) // 2]
    path.write_bytes(bytes(data))
    with pytest.raises(StoreError) as info:
        open_store(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path))
    assert ("corrupt" in message) or ("not an SQLite database" in message)


def test_missing_store_for_reading(tmp_path: Path) -> None:
    with pytest.raises(StoreError, match="no sweep store at this path"):
        open_store(tmp_path / "none.sqlite")


def _plan(tmp_path: Path, base_extra: str = "", vary: str = "links[*].length_km=5,10"):
    sc = load(write_scenario(tmp_path, base_extra))
    return make_plan(sc, [vary])


def test_store_of_another_scenario_or_sweep_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    store = tmp_path / "s.sqlite"
    run_sweep(_plan(tmp_path), LocalPool(SyntheticPoint(), 1), store_path=store, quiet=True)
    capsys.readouterr()
    other_scenario = _plan(tmp_path, "[protocol]\ncutoff_s = 0.2\n")
    with pytest.raises(StoreError, match=r"the store belongs to another scenario \('Farrowmere test chain'"):
        run_sweep(other_scenario, LocalPool(SyntheticPoint(), 1), store_path=store, quiet=True)
    other_sweep = _plan(tmp_path, vary="links[*].length_km=5,10,20")
    with pytest.raises(StoreError, match="the store holds another sweep of this scenario"):
        run_sweep(other_sweep, LocalPool(SyntheticPoint(), 1), store_path=store, quiet=True)
    path = write_scenario(tmp_path, "[protocol]\ncutoff_s = 0.2\n")
    code = main(["sweep", str(path), "--vary", "links[*].length_km=5,10", "--store", str(store), "--dry-run"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "belongs to another scenario" in err


def test_scenario_hash_ignores_only_the_sweep_table(tmp_path: Path) -> None:
    plain = _plan(tmp_path)
    with_sweep = _plan(tmp_path, '[sweep]\nrepeats = 2\n')
    changed = _plan(tmp_path, "[protocol]\ncutoff_s = 0.2\n")
    assert scenario_hash(plain) == scenario_hash(with_sweep) == plain.scenario.content_hash
    assert scenario_hash(changed) != scenario_hash(plain)


def test_flatten_result_long_format() -> None:
    result = {"demands": [{"name": "A-B", "rate_per_s": 2.0, "rate_ci95": [1.5, 2.5], "label": "x",
                           "budget": {"plob_bits_per_s": 9.0}, "eof_mean": float("nan")}],
              "links": {"A-R": {"attempts": 10, "ok": True}}, "simulated_time_s": 3.0, "note": "text"}
    rows = set(flatten_result(result))
    assert rows == {("demand", "A-B", "rate_per_s", 2.0), ("demand", "A-B", "rate_ci95_low", 1.5),
                    ("demand", "A-B", "rate_ci95_high", 2.5), ("demand", "A-B", "budget.plob_bits_per_s", 9.0),
                    ("demand", "A-B", "eof_mean", None), ("link", "A-R", "attempts", 10.0),
                    ("link", "A-R", "ok", 1.0), ("run", "", "simulated_time_s", 3.0)}


def test_execute_records_errors_with_their_text(tmp_path: Path) -> None:
    task = PointTask("p", 0, 1, {"links": [{"length_km": 4.0}]})
    record = execute(SyntheticPoint(fail_at_length_km=4.0), task)
    assert record.status == "failed" and record.metrics == ()
    assert record.error is not None and record.error.startswith("RuntimeError: synthetic failure at length_km = 4")
