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
"""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Self

from netsim.errors import StoreError

__all__ = ["FORMAT", "SCHEMA_VERSION", "PointRecord", "SweepStore", "create_or_resume", "open_store",
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

    def __init__(self, path: Path, connection: sqlite3.Connection) -> None:
        self.path = path
        self._db = connection

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
            rec["parameters"] = json.loads(rec["parameters"])
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
        for rec in out:
            rec["parameters"] = json.loads(rec["parameters"])
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


def _connect(path: Path) -> sqlite3.Connection:
    with _guard(path):
        db = sqlite3.connect(str(path), isolation_level=None, timeout=30.0)
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
    db = _connect(path)
    try:
        _check_format(path, db)
        db.execute("PRAGMA query_only = ON")
    except BaseException:
        db.close()
        raise
    return SweepStore(path, db)


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
        refuse_other(path, _check_format(path, db), meta)
    except BaseException:
        db.close()
        raise
    return SweepStore(path, db)
