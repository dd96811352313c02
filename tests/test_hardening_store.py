"""Damaged sweep stores and stores in read-only directories.

Reproduces two reports of the hardening issue: a store that SQLite still opens but whose rows
are damaged (`points.parameters` not JSON, `metrics.value` = 'abc') gave `JSONDecodeError` /
`ValueError` in `report`, and a later `sweep` into it exited 0 leaving the damage; and `report`
on a finished store in a read-only directory failed with "attempt to write a readonly database".
Now reading raises a one-line StoreError naming the table, the row and the column, `sweep`
refuses a damaged store (exit 2) and says how to recover, and reading never writes.

Outside references: SQLite's documentation (reference library documentation): a column's
declared type is only an affinity, so a REAL column keeps the text 'abc' as TEXT
(sqlite.org/datatype3.html); `mode=ro` and `immutable=1` URI parameters (sqlite.org/uri.html);
a WAL database needs its -shm file, or immutable=1, to be read (sqlite.org/wal.html, "read-only
databases"). JSON text as in RFC 8259. POSIX: the superuser may write into a read-only directory
(IEEE Std 1003.1), so the permission test is skipped as root and the same code path is tested by
simulating the permission check. Exit code 2 for unusable input (common practice).
"""

from __future__ import annotations

import io
import os
import shutil
import sqlite3
import stat
from collections.abc import Iterator
from pathlib import Path

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from test_sweep_support import write_scenario

from netsim.cli import main
from netsim.errors import StoreError
from netsim.scenario import load
from netsim.sweep import store as store_module
from netsim.sweep.executors import LocalPool
from netsim.sweep.plan import make_plan
from netsim.sweep.runner import run_sweep
from netsim.sweep.store import open_store
from netsim.sweep.synthetic import SyntheticPoint

SWEEP = '[sweep]\npairs = 20\n[sweep.vary]\n"links[*].length_km" = "lin:2:30:4"\n'
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


@pytest.fixture(scope="module")
def finished(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A finished sweep store (4 points, synthetic metrics) beside its scenario file."""
    directory = tmp_path_factory.mktemp("finished")
    plan = make_plan(load(write_scenario(directory, SWEEP)))
    run_sweep(plan, LocalPool(SyntheticPoint(), 1), store_path=directory / "sweep.sqlite", quiet=True,
              stream=io.StringIO())
    return directory


@pytest.fixture
def copy(finished: Path, tmp_path: Path) -> Path:
    """A fresh copy of the finished store and its scenario, to damage."""
    target = tmp_path / "store"
    shutil.copytree(finished, target)
    return target


def _damage(path: Path, *statements: str) -> None:
    db = sqlite3.connect(path)
    db.execute("PRAGMA ignore_check_constraints = ON")
    for statement in statements:
        db.execute(statement)
    db.commit()
    db.close()


FIRST_POINT = "(SELECT point_id FROM points ORDER BY ordinal LIMIT 1)"
DAMAGE = [
    # (statements, table, column) -- the reported two first
    ([f"UPDATE points SET parameters = 'not json' WHERE point_id = {FIRST_POINT}"], "points", "parameters"),
    (["UPDATE metrics SET value = 'abc' WHERE rowid = 3"], "metrics", "value"),
    ([f"UPDATE points SET parameters = '[1, 2]' WHERE point_id = {FIRST_POINT}"], "points", "parameters"),
    ([f"UPDATE points SET parameters = '{{\"links[*].length_km\": \"far\"}}' WHERE point_id = {FIRST_POINT}"],
     "points", "parameters"),
    (["UPDATE metrics SET value = 9e999 WHERE rowid = 2"], "metrics", "value"),          # infinity
    (["UPDATE metrics SET kind = 'galaxy' WHERE rowid = 1"], "metrics", "kind"),
    (["UPDATE metrics SET metric = X'00ff' WHERE rowid = 1"], "metrics", "metric"),
    ([f"UPDATE points SET seed = 'x' WHERE point_id = {FIRST_POINT}"], "points", "seed"),
    ([f"UPDATE points SET repeat = -1 WHERE point_id = {FIRST_POINT}"], "points", "repeat"),
    ([f"UPDATE points SET attempts = 1.5 WHERE point_id = {FIRST_POINT}"], "points", "attempts"),
    ([f"UPDATE points SET status = 'finished' WHERE point_id = {FIRST_POINT}"], "points", "status"),
    ([f"UPDATE points SET duration_s = 'slow' WHERE point_id = {FIRST_POINT}"], "points", "duration_s"),
    (["UPDATE meta SET value = '{' WHERE key = 'base_routes'"], "meta", "value"),
    (["UPDATE meta SET value = '[1]' WHERE key = 'spec'"], "meta", "value"),
    (["ALTER TABLE points DROP COLUMN error"], "points", "error"),
]


@pytest.mark.parametrize(("statements", "table", "column"), DAMAGE,
                         ids=[f"{t}.{c}-{i}" for i, (_, t, c) in enumerate(DAMAGE)])
def test_damaged_rows_are_named_by_table_row_and_column(statements: list[str], table: str, column: str,
                                                        copy: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = copy / "sweep.sqlite"
    _damage(path, *statements)
    with pytest.raises(StoreError) as info:
        open_store(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"{path}: damaged store: table {table}")
    assert f"column {column}" in message or f"no column {column}" in message
    assert "move the store aside" in message

    # report: one line, exit 2 (was JSONDecodeError / ValueError)
    code = main(["report", str(path), "--no-figures", "--quiet", "--out", str(copy / "rep")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "Traceback" not in err[0], err
    assert "damaged store" in err[0]

    # sweep into it: refused, not resumed beside the damage (was exit 0)
    before = path.read_bytes()
    code = main(["sweep", str(copy / "farrowmere.toml"), "--store", str(path), "--quiet", "--workers", "1"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "Traceback" not in err[0], err
    assert ("damaged store" in err[0] and "--store" in err[0]) or "corrupt (CHECK constraint failed" in err[0], err
    assert "move" in err[0] and "run the sweep again" in err[0]
    with pytest.raises(StoreError):  # still damaged, and still refused: nothing was carried on
        open_store(path)
    assert len(path.read_bytes()) == len(before)


def test_missing_table_is_refused(copy: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = copy / "sweep.sqlite"
    _damage(path, "DROP TABLE metrics")
    code = main(["report", str(path), "--no-figures", "--out", str(copy / "rep")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "is not a netsim sweep store" in err[0], err


def test_a_sound_store_passes_and_reports(finished: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    with open_store(finished / "sweep.sqlite") as store:
        assert store.counts() == {"pending": 0, "done": 4, "failed": 0}
        assert len({m["point_id"] for m in store.metrics()}) == 4
    assert main(["report", str(finished / "sweep.sqlite"), "--no-figures", "--quiet",
                 "--out", str(tmp_path / "rep")]) == 0


def test_a_finished_store_is_one_file(finished: Path) -> None:
    """The writer folds its journal into the file on closing (no -wal, no -shm left), and reading
    makes none (mode=ro)."""
    with open_store(finished / "sweep.sqlite") as store:
        store.metrics()
    assert sorted(p.name for p in finished.iterdir()) == ["farrowmere.toml", "sweep.sqlite"]


@pytest.fixture
def locked(copy: Path) -> Iterator[Path]:
    copy.chmod(stat.S_IRUSR | stat.S_IXUSR)
    yield copy
    copy.chmod(stat.S_IRWXU)


@pytest.mark.skipif(IS_ROOT, reason="the superuser writes into read-only directories (POSIX); "
                                    "test_read_only_directory_simulated covers the same path")
def test_report_on_a_store_in_a_read_only_directory(locked: Path, tmp_path: Path) -> None:
    assert main(["report", str(locked / "sweep.sqlite"), "--no-figures", "--quiet",
                 "--out", str(tmp_path / "rep")]) == 0
    assert sorted(p.name for p in locked.iterdir()) == ["farrowmere.toml", "sweep.sqlite"]


def _deny_directory(monkeypatch: pytest.MonkeyPatch, directory: Path) -> None:
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if Path(p) == directory else real(p, mode, **kw))


def test_read_only_directory_simulated(copy: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    _deny_directory(monkeypatch, copy)
    path = copy / "sweep.sqlite"
    assert store_module._read_mode(path) == "immutable=1"
    connects: list[str] = []
    real_connect = sqlite3.connect

    def spy(target: str, *args: object, **kwargs: object) -> sqlite3.Connection:
        connects.append(str(target))
        return real_connect(target, *args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(sqlite3, "connect", spy)
    assert main(["report", str(path), "--no-figures", "--quiet", "--out", str(tmp_path / "rep")]) == 0
    assert connects and all(c.startswith("file:") and c.endswith("?immutable=1") for c in connects), connects
    assert sorted(p.name for p in copy.iterdir()) == ["farrowmere.toml", "sweep.sqlite"]


def test_journal_left_in_a_read_only_directory_is_one_line(copy: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A writer killed in a directory later made read-only leaves results in its -wal journal;
    they cannot be read without a -shm file, so the store is refused rather than read without them."""
    path = copy / "sweep.sqlite"
    writer = sqlite3.connect(path)
    writer.execute("PRAGMA journal_mode = WAL")
    writer.execute("PRAGMA wal_autocheckpoint = 0")
    writer.execute("UPDATE points SET error = 'note' WHERE rowid = 1")
    writer.commit()
    shutil.copy(path, copy / "kept.sqlite")
    shutil.copy(f"{path}-wal", copy / "kept.sqlite-wal")
    writer.close()
    _deny_directory(monkeypatch, copy)
    with pytest.raises(StoreError, match=r"kept\.sqlite: the store's journal \(kept\.sqlite-wal\) holds results"):
        open_store(copy / "kept.sqlite")


COLUMNS = {"points": ("point_id", "ordinal", "parameters", "repeat", "seed", "status", "started_utc", "finished_utc",
                      "duration_s", "attempts", "error"),
           "metrics": ("point_id", "kind", "name", "metric", "value"),
           "meta": ("value",)}
CELLS = (st.none() | st.integers(-10**12, 10**12) | st.floats(allow_nan=True, allow_infinity=True)
         | st.text(max_size=12) | st.binary(max_size=6)
         | st.sampled_from(["{}", "{\"a\": 1}", "[]", "null", "{\"links[*].length_km\": null}", "done", "route"]))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(table=st.sampled_from(sorted(COLUMNS)), data=st.data())
def test_random_damage_is_refused_in_one_line_or_harmless(table: str, data: st.DataObject, finished: Path,
                                                         tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Any cell of any table overwritten with any value: `report` either works (exit 0) or
    refuses in one line (exit 2); never a traceback."""
    column = data.draw(st.sampled_from(COLUMNS[table]))
    value = data.draw(CELLS)
    directory = tmp_path / "fuzz"
    shutil.rmtree(directory, ignore_errors=True)
    shutil.copytree(finished, directory)
    path = directory / "sweep.sqlite"
    db = sqlite3.connect(path)
    db.execute("PRAGMA ignore_check_constraints = ON")
    row = data.draw(st.integers(1, db.execute(f"SELECT COUNT(*) FROM {table}").fetchone()[0]))
    try:
        db.execute(f"UPDATE {table} SET {column} = ? WHERE rowid = (SELECT rowid FROM {table} "
                   f"ORDER BY rowid LIMIT 1 OFFSET ?)", (value, row - 1))
        db.commit()
    except sqlite3.IntegrityError:  # NOT NULL or a duplicate key: SQLite refuses the damage itself
        assume(False)
    finally:
        db.close()
    code = main(["report", str(path), "--no-figures", "--quiet", "--force", "--out", str(directory / "rep")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code in (0, 2), err
    assert not any("Traceback" in line for line in err)
    if code == 2:
        assert len(err) == 1, err
