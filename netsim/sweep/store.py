"""The SQLite result store of a sweep (WAL mode, parameterised SQL only).

Schema (version 1)::

    meta(key TEXT PRIMARY KEY, value TEXT)
        format = "netsim sweep store", schema_version = "1", scenario_hash (SHA-256 of the base
        scenario, before overrides), scenario_name, spec_hash, spec (canonical JSON),
        created_utc, netsim_version
    points(point_id TEXT PRIMARY KEY, ordinal, parameters (JSON object key path -> value),
           repeat, seed, status ('pending' | 'done' | 'failed'), started_utc, finished_utc,
           duration_s, attempts, error)
    metrics(point_id, kind ('demand' | 'link' | 'site' | 'run' | 'route'), name, metric, value REAL,
            PRIMARY KEY (point_id, kind, name, metric))          -- long format
        kind 'route': name = the demand, metric = its route (site names, switches included,
        joined by " > "), value = its heralded hops. meta base_routes: JSON demand -> route of
        the base scenario (stores made before it have none).

Only the coordinating process writes. Each finished point (its row and all its metric rows) is
committed in one transaction, so a store killed at any moment holds whole points only.

Every open (for reading or for resuming) checks the rows, not only the file: the tables and
columns of the schema, each column's type and range (``parameters`` a JSON object of numbers,
``value`` a finite number or NULL, ``status`` and ``kind`` from their sets, counts >= 0) and
the meta entries read later (``spec``, ``base_routes``). The first damaged cell is a one-line
:class:`StoreError` naming the table, the row and the column; a sweep refuses to resume into a
damaged store rather than carry on beside the damage.

The writer keeps the store in WAL mode while it runs; when it closes it checkpoints the journal
into the file and returns to rollback-journal mode, so a finished store is one self-contained
file. Reading never writes: :func:`open_store` connects with ``mode=ro`` (which makes no files
beside a finished store), and with ``immutable=1`` when the store's directory cannot be written
(nobody can then write the store, and SQLite needs no ``-shm`` file); a ``-wal`` journal left
with results in a read-only directory (a writer killed there) is refused in one line.
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
from urllib.parse import quote
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Self

from netsim.errors import StoreError

__all__ = ["FORMAT", "SCHEMA_VERSION", "PointRecord", "SweepStore", "check_rows", "create_or_resume", "open_store",
           "refuse_other"]

SCHEMA_VERSION = 1
FORMAT = "netsim sweep store"

_SCHEMA = (
    "CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL)",
    ("CREATE TABLE points (point_id TEXT PRIMARY KEY, ordinal INTEGER NOT NULL, "
    "parameters TEXT NOT NULL, repeat INTEGER NOT NULL, seed INTEGER NOT NULL, "
    "status TEXT NOT NULL CHECK (status IN ('pending', 'done', 'failed')), "
    "started_utc TEXT, finished_utc TEXT, duration_s REAL, "
    "attempts INTEGER NOT NULL DEFAULT 0, error TEXT)"),
    ("CREATE TABLE metrics (point_id TEXT NOT NULL REFERENCES points(point_id), "
    "kind TEXT NOT NULL, name TEXT NOT NULL, metric TEXT NOT NULL, value REAL, "
    "PRIMARY KEY (point_id, kind, name, metric))"),
    "CREATE INDEX points_status ON points (status)",
)
_POINT_COLUMNS = ("point_id", "ordinal", "parameters", "repeat", "seed", "status", "started_utc",
                  "finished_utc", "duration_s", "attempts", "error")


@dataclass(frozen=True)
class PointRecord:
    """What a finished (or failed) point writes to the store."""

    point_id: str
    status: str                      # "done" or "failed"
    started_utc: str | None = None
    finished_utc: str | None = None
    duration_s: float | None = None
    error: str | None = None
    metrics: Sequence[tuple[str, str, str, float | None]] = field(default_factory=tuple)


@contextmanager
def _guard(path: Path) -> Iterator[None]:
    """Turn SQLite failures into a one-line :class:`StoreError` naming the file."""
    try:
        yield
    except sqlite3.DatabaseError as exc:
        text = " ".join(str(exc).split())
        if "not a database" in text:
            raise StoreError(f"{path}: is not a netsim sweep store (not an SQLite database)") from None
        if "malformed" in text or "corrupt" in text:
            raise StoreError(f"{path}: the store is corrupt ({text}); move it aside and run the sweep again") from None
        raise StoreError(f"{path}: cannot use the store ({text})") from None


class SweepStore:
    """An open sweep store. Use :func:`open_store` to read and :func:`create_or_resume` to write."""

    def __init__(self, path: Path, connection: sqlite3.Connection, read_only: bool = False) -> None:
        self.path = path
        self._db = connection
        self.read_only = read_only

    # -- reading (the API for reports) ------------------------------------------------------
    def meta(self) -> dict[str, str]:
        """The meta table as a dict (all values are strings)."""
        with _guard(self.path):
            return dict(self._db.execute("SELECT key, value FROM meta").fetchall())

    def points(self, status: str | None = None) -> list[dict[str, Any]]:
        """One dict per point in listing order; ``parameters`` decoded from JSON."""
        sql = f"SELECT {', '.join(_POINT_COLUMNS)} FROM points"
        args: tuple[Any, ...] = ()
        if status is not None:
            sql, args = sql + " WHERE status = ?", (status,)
        with _guard(self.path):
            rows = self._db.execute(sql + " ORDER BY ordinal", args).fetchall()
        records = [dict(zip(_POINT_COLUMNS, row)) for row in rows]
        for rec in records:
            rec["parameters"] = _parameters(self.path, rec["point_id"], rec["parameters"])
        return records

    def metrics(self, kind: str | None = None, metric: str | None = None) -> list[dict[str, Any]]:
        """Metric records ``{point_id, repeat, parameters, kind, name, metric, value}``.

        Only finished points have metrics. Filter by ``kind`` and/or ``metric`` if given.
        """
        sql = ("SELECT m.point_id, p.repeat, p.parameters, m.kind, m.name, m.metric, m.value "
               "FROM metrics m JOIN points p ON p.point_id = m.point_id WHERE 1 = 1")
        args: list[Any] = []
        for column, value in (("m.kind", kind), ("m.metric", metric)):
            if value is not None:
                sql += f" AND {column} = ?"
                args.append(value)
        with _guard(self.path):
            rows = self._db.execute(sql + " ORDER BY p.ordinal, m.kind, m.name, m.metric", args).fetchall()
        keys = ("point_id", "repeat", "parameters", "kind", "name", "metric", "value")
        out = [dict(zip(keys, row)) for row in rows]
        decoded: dict[str, dict[str, Any]] = {}
        for rec in out:
            if rec["point_id"] not in decoded:
                decoded[rec["point_id"]] = _parameters(self.path, rec["point_id"], rec["parameters"])
            rec["parameters"] = decoded[rec["point_id"]]
        return out

    def counts(self) -> dict[str, int]:
        """Number of points per status."""
        with _guard(self.path):
            rows = self._db.execute("SELECT status, COUNT(*) FROM points GROUP BY status").fetchall()
        return {"pending": 0, "done": 0, "failed": 0, **dict(rows)}

    # -- writing (the coordinator only) -------------------------------------------------------
    def register(self, points: Iterable[tuple[str, int, str, int, int]]) -> None:
        """Insert points ``(point_id, ordinal, parameters_json, repeat, seed)`` not yet stored."""
        with _guard(self.path), self._transaction():
            self._db.executemany(
                "INSERT OR IGNORE INTO points (point_id, ordinal, parameters, repeat, seed, status) "
                "VALUES (?, ?, ?, ?, ?, 'pending')", list(points))

    def record(self, rec: PointRecord) -> bool:
        """Commit one point's outcome and metrics in one transaction; False if already done."""
        with _guard(self.path), self._transaction():
            cur = self._db.execute(
                "UPDATE points SET status = ?, started_utc = ?, finished_utc = ?, duration_s = ?, "
                "error = ?, attempts = attempts + 1 WHERE point_id = ? AND status != 'done'",
                (rec.status, rec.started_utc, rec.finished_utc, rec.duration_s, rec.error, rec.point_id))
            if cur.rowcount != 1:
                return False
            self._db.execute("DELETE FROM metrics WHERE point_id = ?", (rec.point_id,))
            self._db.executemany(
                "INSERT INTO metrics (point_id, kind, name, metric, value) VALUES (?, ?, ?, ?, ?)",
                [(rec.point_id, *row) for row in rec.metrics])
        return True

    def close(self) -> None:
        if not self.read_only:
            # Fold the journal into the file and leave WAL mode (resuming sets it again): a
            # finished store is one self-contained file, which readers open with mode=ro without
            # making -wal or -shm files beside it. Another open connection keeps WAL; SQLite then
            # checkpoints when the last one closes.
            try:
                self._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
                self._db.execute("PRAGMA journal_mode = DELETE")
            except sqlite3.DatabaseError:
                pass
        self._db.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def _transaction(self) -> Iterator[None]:
        self._db.execute("BEGIN IMMEDIATE")
        try:
            yield
        except BaseException:
            self._db.execute("ROLLBACK")
            raise
        self._db.execute("COMMIT")


def _connect(path: Path, uri_mode: str | None = None) -> sqlite3.Connection:
    """A connection that has passed SQLite's quick check; ``uri_mode`` (``"mode=ro"``,
    ``"immutable=1"``) opens the file read-only."""
    with _guard(path):
        if uri_mode is None:
            db = sqlite3.connect(str(path), isolation_level=None, timeout=30.0)
        else:
            uri = f"file:{quote(str(path.resolve()))}?{uri_mode}"
            db = sqlite3.connect(uri, uri=True, isolation_level=None, timeout=30.0)
        try:
            check = db.execute("PRAGMA quick_check").fetchone()
        except sqlite3.DatabaseError:
            db.close()
            raise
    if check is None or check[0] != "ok":
        db.close()
        detail = " ".join(str(check[0] if check else "no answer").replace("***", " ").split())
        raise StoreError(f"{path}: the store is corrupt ({detail}); move it aside and run the sweep again")
    return db


def _tables(db: sqlite3.Connection) -> set[str]:
    return {r[0] for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}


def _check_format(path: Path, db: sqlite3.Connection) -> dict[str, str]:
    with _guard(path):
        tables = _tables(db)
        if not {"meta", "points", "metrics"} <= tables:
            raise StoreError(f"{path}: is not a netsim sweep store (it has tables {', '.join(sorted(tables)) or 'none'})")
        meta = dict(db.execute("SELECT key, value FROM meta").fetchall())
    if meta.get("format") != FORMAT:
        raise StoreError(f"{path}: is not a netsim sweep store (meta format = {meta.get('format')!r})")
    if meta.get("schema_version") != str(SCHEMA_VERSION):
        raise StoreError(f"{path}: store schema version {meta.get('schema_version')!r} is not supported; "
                         f"expected {SCHEMA_VERSION}")
    return meta


def open_store(path: str | Path) -> SweepStore:
    """Open an existing store for reading; :class:`StoreError` if missing, foreign or corrupt."""
    path = Path(path)
    if not path.is_file():
        raise StoreError(f"{path}: no sweep store at this path")
    db = _connect(path, _read_mode(path))
    try:
        with _guard(path):
            db.execute("PRAGMA query_only = ON")
        check_rows(path, db, _check_format(path, db))
    except BaseException:
        db.close()
        raise
    return SweepStore(path, db, read_only=True)


def _read_mode(path: Path) -> str:
    """``mode=ro``, or ``immutable=1`` when no ``-shm`` file can be made beside the store (a
    read-only directory) and no ``-wal`` journal is waiting (a store closed cleanly has none)."""
    directory = path.parent if str(path.parent) else Path(".")
    if os.access(directory, os.W_OK | os.X_OK) or os.path.exists(f"{path}-shm"):
        return "mode=ro"
    wal = Path(f"{path}-wal")
    if wal.exists() and wal.stat().st_size > 0:
        raise StoreError(f"{path}: the store's journal ({wal.name}) holds results not yet in the file and its "
                         "directory is read-only; copy the store with its -wal file to a writable directory")
    return "immutable=1"


_RECOVER = "move the store aside (or give --store a new file) and run the sweep again"


def _damaged(path: Path, table: str, row: str, column: str, value: Any, allowed: str) -> StoreError:
    text = repr(value)
    text = text if len(text) <= 60 else text[:57] + "..."
    return StoreError(f"{path}: damaged store: table {table}, row {row}, column {column} = {text}; "
                      f"expected {allowed}; {_RECOVER}")


def _parameters(path: Path, point_id: Any, text: Any) -> dict[str, Any]:
    """A point's ``parameters`` cell decoded: a JSON object of key path -> finite number."""
    allowed = "a JSON object of swept key paths and their numbers"
    try:
        value = json.loads(text) if isinstance(text, str) else None
    except (json.JSONDecodeError, RecursionError, ValueError):
        value = None
    if not isinstance(value, dict) or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in value.values()):
        raise _damaged(path, "points", f"point_id={point_id!r}", "parameters", text, allowed)
    return value


#: Columns of each table and the check of each: (SQL condition a sound cell meets, allowed text).
_COLUMN_CHECKS: dict[str, tuple[tuple[str, str, str], ...]] = {
    "meta": (("key", "typeof(key) = 'text'", "text"), ("value", "typeof(value) = 'text'", "text")),
    "points": (
        ("point_id", "typeof(point_id) = 'text' AND length(point_id) > 0", "non-empty text"),
        ("ordinal", "typeof(ordinal) = 'integer' AND ordinal >= 0", "an integer >= 0"),
        ("parameters", "typeof(parameters) = 'text'", "a JSON object (text)"),
        ("repeat", "typeof(repeat) = 'integer' AND repeat >= 0", "an integer >= 0"),
        ("seed", "typeof(seed) = 'integer' AND seed >= 0", "an integer >= 0"),
        ("status", "status IN ('pending', 'done', 'failed')", "one of pending, done, failed"),
        ("started_utc", "typeof(started_utc) IN ('text', 'null')", "text or NULL"),
        ("finished_utc", "typeof(finished_utc) IN ('text', 'null')", "text or NULL"),
        ("duration_s", "duration_s IS NULL OR (typeof(duration_s) IN ('real', 'integer') AND duration_s >= 0 "
                       "AND duration_s < 9e999)", "a finite number of seconds >= 0, or NULL"),
        ("attempts", "typeof(attempts) = 'integer' AND attempts >= 0", "an integer >= 0"),
        ("error", "typeof(error) IN ('text', 'null')", "text or NULL"),
    ),
    "metrics": (
        ("point_id", "typeof(point_id) = 'text'", "text"),
        ("kind", "kind IN ('demand', 'link', 'site', 'run', 'route')", "one of demand, link, site, run, route"),
        ("name", "typeof(name) = 'text'", "text"),
        ("metric", "typeof(metric) = 'text'", "text"),
        ("value", "value IS NULL OR (typeof(value) IN ('real', 'integer') AND value > -9e999 AND value < 9e999)",
         "a finite number or NULL"),
    ),
}
_ROW_NAME = {"meta": "key", "points": "point_id", "metrics": "point_id"}


def check_rows(path: Path, db: sqlite3.Connection, meta: dict[str, str]) -> None:
    """A one-line :class:`StoreError` at the first damaged table, column or cell (see the module
    docstring); nothing when the store is sound."""
    with _guard(path):
        for table, checks in _COLUMN_CHECKS.items():
            present = {row[1] for row in db.execute(f"PRAGMA table_info({table})")}
            missing = [column for column, _, _ in checks if column not in present]
            if missing:
                raise StoreError(f"{path}: damaged store: table {table} has no column {missing[0]}; {_RECOVER}")
            for column, condition, allowed in checks:
                bad = db.execute(f"SELECT rowid, {_ROW_NAME[table]}, {column} FROM {table} "
                                 f"WHERE NOT ({condition}) OR ({condition}) IS NULL LIMIT 1").fetchone()
                if bad is not None:
                    raise _damaged(path, table, f"{_ROW_NAME[table]}={bad[1]!r} (rowid {bad[0]})", column, bad[2],
                                   allowed)
        for point_id, text in db.execute("SELECT point_id, parameters FROM points"):
            _parameters(path, point_id, text)
    for key in ("spec", "base_routes"):
        if key in meta:
            try:
                value = json.loads(meta[key])
            except (json.JSONDecodeError, RecursionError, ValueError):
                value = None
            if not isinstance(value, dict) or (key == "base_routes" and not all(
                    isinstance(v, str) for v in value.values())):
                raise _damaged(path, "meta", f"key={key!r}", "value", meta[key],
                               "a JSON object" + (" of demand -> route" if key == "base_routes" else ""))


def _initialise(path: Path, db: sqlite3.Connection, meta: dict[str, str]) -> None:
    with _guard(path):
        db.execute("BEGIN IMMEDIATE")
        try:
            for statement in _SCHEMA:
                db.execute(statement)
            db.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", sorted(meta.items()))
        except BaseException:
            db.execute("ROLLBACK")
            raise
        db.execute("COMMIT")


def refuse_other(path: Path, stored: dict[str, str], meta: dict[str, str]) -> None:
    if stored.get("scenario_hash") != meta["scenario_hash"]:
        raise StoreError(
            f"{path}: the store belongs to another scenario ({stored.get('scenario_name')!r}, content hash "
            f"{str(stored.get('scenario_hash'))[:12]}; this one {meta['scenario_hash'][:12]}); "
            "use --store for a new file or move this one aside")
    if stored.get("spec_hash") != meta["spec_hash"]:
        raise StoreError(
            f"{path}: the store holds another sweep of this scenario (spec hash "
            f"{str(stored.get('spec_hash'))[:12]}; this one {meta['spec_hash'][:12]}); "
            "use --store for a new file or move this one aside")


def create_or_resume(path: str | Path, meta: dict[str, str]) -> SweepStore:
    """Open a store for writing: create it, or resume it if it holds this scenario and sweep.

    ``meta`` must hold ``scenario_hash`` and ``spec_hash`` (plus anything else to record when
    the store is created); ``format`` and ``schema_version`` are added here.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StoreError(f"{path}: cannot create the store's directory ({exc.strerror})") from None
    meta = {**meta, "format": FORMAT, "schema_version": str(SCHEMA_VERSION)}
    db = _connect(path)
    try:
        with _guard(path):
            db.execute("PRAGMA journal_mode = WAL")
            db.execute("PRAGMA synchronous = FULL")
            if not _tables(db):
                _initialise(path, db, meta)
        stored = _check_format(path, db)
        refuse_other(path, stored, meta)
        check_rows(path, db, stored)
    except BaseException:
        db.close()
        raise
    return SweepStore(path, db)
