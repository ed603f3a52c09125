"""The results store: one SQLite file per sweep folder.

Tables: ``meta`` (what wrote the file, the stopping rule of the latest run),
``points`` (each point's canonical parameters and circuit size), ``members``
(the points of the latest run, in grid order, with their study label) and
``batches`` (one row per finished batch, written in its own transaction).
Counts are never stored as totals: they are recomputed from the batch rows
(:mod:`codebench.results.tally`), so an interrupted run loses at most the
batches in flight and can never count one twice.
"""

from __future__ import annotations

import contextlib
import json
import os
import sqlite3
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator
from urllib.parse import quote

from codebench.errors import OutputError, StoreError
from codebench.records import BatchResult, Point, Stopping

#: Written into the SQLite header so a foreign file is recognised ("CBNC").
APPLICATION_ID = 0x43424E43
#: 2: batches carry their seed and which of their shots failed (paired decoder comparisons).
SCHEMA_VERSION = 2

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS points (
    key TEXT PRIMARY KEY,
    params TEXT NOT NULL,
    qubits INTEGER NOT NULL,
    detectors INTEGER NOT NULL,
    batch_cap INTEGER NOT NULL
);
CREATE TABLE IF NOT EXISTS members (
    position INTEGER PRIMARY KEY,
    key TEXT NOT NULL REFERENCES points(key),
    study TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS batches (
    key TEXT NOT NULL REFERENCES points(key),
    batch_index INTEGER NOT NULL,
    shots INTEGER NOT NULL,
    failures INTEGER NOT NULL,
    seconds REAL NOT NULL,
    decode_seconds REAL NOT NULL,
    seed INTEGER,
    failed BLOB,
    PRIMARY KEY (key, batch_index, shots)
);
CREATE TABLE IF NOT EXISTS measured (
    key TEXT PRIMARY KEY,
    params TEXT NOT NULL,
    study TEXT NOT NULL,
    weights TEXT NOT NULL,
    shots INTEGER NOT NULL,
    failures INTEGER NOT NULL,
    qubits INTEGER NOT NULL,
    detectors INTEGER NOT NULL,
    decode_seconds REAL NOT NULL,
    records TEXT NOT NULL
);
"""


@dataclass(frozen=True)
class StoredPoint:
    """A point as the store knows it."""

    key: str
    point: Point
    qubits: int
    detectors: int
    batch_cap: int


@dataclass(frozen=True)
class MeasuredResult:
    """A point decoded from measured records (``codebench lab decode``): counts of its own, no batches.

    ``weights`` is ``model`` (the decoder's weights from the point's noise model) or ``data`` (weights
    estimated from the records themselves, decoded on held-out shots); ``records`` names the file.
    """

    key: str
    point: Point
    study: str
    weights: str
    shots: int
    failures: int
    qubits: int
    detectors: int
    decode_seconds: float
    records: str


#: The study label of stored points that the current sweep file no longer lists.
UNLISTED = "(not in the sweep file)"


class Store:
    """Open (or create) the store at ``path``.

    Raises :class:`~codebench.errors.StoreError` for a file that is not a
    codebench store; such a file is left untouched.
    """

    def __init__(self, path: str | Path, create: bool = True) -> None:
        self.path = Path(path)
        self.read_only = not create
        # An empty file holds nothing to lose (a run killed before its first write): start it afresh.
        existed = self.path.exists() and (self.path.is_dir() or self.path.stat().st_size > 0)
        if not existed and not create:
            raise StoreError(f"no results store at '{self.path}'.")
        if existed:
            self._check_foreign()
        if self.read_only:
            self._db = _connect_read_only(self.path)
            self._check_intact()
            return
        if existed and not _writable(self.path):
            raise StoreError(f"'{self.path}' is read-only (file or folder not writable, or a read-only file "
                             "system); analyze, figures, report and export read it as it is; to add shots, copy "
                             "the folder somewhere writable and run there.")
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"cannot create the folder '{self.path.parent}': {exc.strerror or exc}.") from exc
        try:
            self._db = sqlite3.connect(self.path, isolation_level=None, timeout=30)
        except sqlite3.Error as exc:
            raise OutputError(f"cannot create the results store '{self.path}': {exc}.") from exc
        try:
            if existed:
                self._check_intact()
            else:
                # Before WAL mode: written straight into the file header, so a store
                # killed before its first checkpoint is still recognised as ours.
                self._db.execute(f"PRAGMA application_id={APPLICATION_ID}")
                self._db.execute(f"PRAGMA user_version={SCHEMA_VERSION}")
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=NORMAL")
            self._db.executescript(_SCHEMA)
            self._upgrade()
        except sqlite3.OperationalError as exc:  # the file is fine; the disk is full, or not writable
            self._db.close()
            raise OutputError(f"cannot write the results store '{self.path}': {exc}; free some space (or "
                              "choose another --out) and run again.") from exc
        except sqlite3.DatabaseError as exc:
            self._db.close()
            raise StoreError(f"'{self.path}' is not a usable results store: {exc}.") from exc

    def _check_foreign(self) -> None:
        try:
            with self.path.open("rb") as handle:
                header = handle.read(100)
        except OSError as exc:
            raise StoreError(f"cannot read results store '{self.path}': {exc}.") from exc
        if len(header) < 100 or not header.startswith(b"SQLite format 3\x00"):
            raise StoreError(f"'{self.path}' is not a codebench results store (not an SQLite file); left untouched.")

    def _check_intact(self) -> None:
        """Refuse a damaged or newer store before anything is written to it."""
        try:
            # Read through the connection, not the file header: the header lags behind
            # the write-ahead log of a store that is open elsewhere or was killed.
            application_id = int(self._db.execute("PRAGMA application_id").fetchone()[0])
            verdict = [row[0] for row in self._db.execute("PRAGMA quick_check").fetchall()]
            version = int(self._db.execute("PRAGMA user_version").fetchone()[0])
        except sqlite3.DatabaseError as exc:
            application_id, verdict, version = APPLICATION_ID, [str(exc)], SCHEMA_VERSION
        if application_id != APPLICATION_ID:
            self._db.close()
            raise StoreError(f"'{self.path}' is an SQLite file written by another program; left untouched.")
        if verdict != ["ok"]:
            self._db.close()
            found = " ".join("; ".join(verdict[:2]).split())  # SQLite's report spans lines: one line here
            raise StoreError(f"'{self.path}' is damaged ({found}); left untouched: move it "
                             "away (or choose another --out) and run again.")
        if version > SCHEMA_VERSION:
            self._db.close()
            raise StoreError(f"'{self.path}' was written by a newer codebench (store schema {version}, "
                             f"this one reads {SCHEMA_VERSION}); left untouched.")

    def _upgrade(self) -> None:
        """Bring a store of an older schema up to this one (its batches keep their counts)."""
        columns = {row[1] for row in self._db.execute("PRAGMA table_info(batches)")}
        with self._transaction():
            for name, kind in (("seed", "INTEGER"), ("failed", "BLOB")):
                if name not in columns:
                    self._db.execute(f"ALTER TABLE batches ADD COLUMN {name} {kind}")
            self._db.execute(f"PRAGMA user_version={SCHEMA_VERSION}")

    def _batch_columns(self, failed: bool = True) -> str:
        """The batch columns to read (a read-only store of schema 1 has no seed or failure bits)."""
        columns = {row[1] for row in self._db.execute("PRAGMA table_info(batches)")}
        wanted = ("seed", "failed") if failed else ("seed",)
        extra = [name if name in columns else "NULL" for name in wanted] + ([] if failed else ["NULL"])
        return ", ".join(["key, batch_index, shots, failures, seconds, decode_seconds", *extra])

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # writing -------------------------------------------------------------

    def begin_run(self, stopping: Stopping, members: list[tuple[StoredPoint, str]], meta: dict[str, str]) -> None:
        """Record the points of this run (grid order) and its stopping rule, in one transaction."""
        with self._transaction():
            for stored, _ in members:
                # The batch cap follows the latest run's batch_bytes; batches cut to another
                # schedule stay stored but stop matching it (see engine/tally.py).
                self._db.execute(
                    "INSERT INTO points VALUES (?, ?, ?, ?, ?) "
                    "ON CONFLICT(key) DO UPDATE SET batch_cap = excluded.batch_cap",
                    (stored.key, json.dumps(stored.point.params(), sort_keys=True), stored.qubits,
                     stored.detectors, stored.batch_cap),
                )
            self._db.execute("DELETE FROM members")
            self._db.executemany(
                "INSERT INTO members VALUES (?, ?, ?)",
                [(i, stored.key, study) for i, (stored, study) in enumerate(members)],
            )
            rule = {
                "failure_target": stopping.failure_target,
                "shot_budget": stopping.shot_budget,
                "relative_precision": stopping.relative_precision,
            }
            for key, value in {**meta, "stopping": json.dumps(rule)}.items():
                self._db.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, value))

    def add_batch(self, result: BatchResult) -> None:
        """Record one finished batch in its own transaction (a repeat is ignored)."""
        with self._transaction():
            self._db.execute(
                "INSERT OR IGNORE INTO batches (key, batch_index, shots, failures, seconds, decode_seconds, seed, "
                "failed) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (result.point_key, result.batch_index, result.shots, result.failures,
                 result.seconds, result.decode_seconds, result.seed, result.failed),
            )

    def _transaction(self) -> _Transaction:
        return _Transaction(self._db, self._write_failed)

    def _write_failed(self, exc: sqlite3.Error) -> OutputError:
        """One line for a write the disk refused: which file, what is safely stored, what to do."""
        try:
            stored = int(self._db.execute("SELECT COUNT(*) FROM batches").fetchone()[0])
            held = f"{stored:,} finished batches are stored"
        except sqlite3.Error:
            held = "the batches committed before are stored"
        return OutputError(f"cannot write the results store '{self.path}': {exc}; {held}: free some space and "
                           "rerun the same command to resume.")

    def add_measured(self, result: MeasuredResult) -> None:
        """Record (or replace) the counts of one measured point, in one transaction."""
        with self._transaction():
            self._db.execute(
                "INSERT OR REPLACE INTO measured VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (result.key, json.dumps(result.point.params(), sort_keys=True), result.study, result.weights,
                 result.shots, result.failures, result.qubits, result.detectors, result.decode_seconds,
                 result.records),
            )

    # reading -------------------------------------------------------------

    def has_sweep(self) -> bool:
        """Whether a sweep has been set up in this store (measured points alone need none)."""
        return "stopping" in self.meta()

    def measured(self) -> list[MeasuredResult]:
        """The measured points, in the order they were first recorded (none in a store written before them)."""
        known = self._db.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'measured'").fetchone()
        if known is None:
            return []
        rows = self._db.execute(
            "SELECT key, params, study, weights, shots, failures, qubits, detectors, decode_seconds, records "
            "FROM measured ORDER BY rowid").fetchall()
        return [MeasuredResult(key, Point.from_params(json.loads(params), study), study, weights, shots, failures,
                               qubits, detectors, seconds, records)
                for key, params, study, weights, shots, failures, qubits, detectors, seconds, records in rows]

    def meta(self) -> dict[str, str]:
        return dict(self._db.execute("SELECT key, value FROM meta").fetchall())

    def stopping(self) -> Stopping:
        raw = self.meta().get("stopping")
        if raw is None:
            raise StoreError(f"'{self.path}' holds no finished sweep set-up.")
        return Stopping(**json.loads(raw))

    def members(self) -> list[tuple[StoredPoint, str]]:
        rows = self._db.execute(
            "SELECT p.key, p.params, p.qubits, p.detectors, p.batch_cap, m.study "
            "FROM members m JOIN points p ON p.key = m.key ORDER BY m.position"
        ).fetchall()
        return [
            (StoredPoint(key, Point.from_params(json.loads(params), study), qubits, detectors, cap), study)
            for key, params, qubits, detectors, cap, study in rows
        ]

    def unlisted(self) -> list[StoredPoint]:
        """Stored points with batches that the latest run's sweep file no longer lists (it was edited)."""
        rows = self._db.execute(
            "SELECT p.key, p.params, p.qubits, p.detectors, p.batch_cap FROM points p "
            "WHERE p.key NOT IN (SELECT key FROM members) AND p.key IN (SELECT key FROM batches) ORDER BY p.key"
        ).fetchall()
        return [StoredPoint(key, Point.from_params(json.loads(params), UNLISTED), qubits, detectors, cap)
                for key, params, qubits, detectors, cap in rows]

    def batches(self, key: str) -> Iterator[BatchResult]:
        for row in self._db.execute(f"SELECT {self._batch_columns()} FROM batches WHERE key = ?", (key,)):
            yield BatchResult(*row)

    def all_batches(self, failed: bool = False) -> dict[str, list[BatchResult]]:
        """Every stored batch by point key; ``failed``: with their failure bits (costlier to read)."""
        columns = self._batch_columns(failed)
        out: dict[str, list[BatchResult]] = {}
        for row in self._db.execute(f"SELECT {columns} FROM batches"):
            out.setdefault(row[0], []).append(BatchResult(*row))
        return out


class _Transaction:
    """One write transaction; a write the disk refuses becomes the store's one-line OutputError."""

    def __init__(self, db: sqlite3.Connection, failed: Callable[[sqlite3.Error], OutputError]) -> None:
        self._db = db
        self._failed = failed

    def __enter__(self) -> None:
        try:
            self._db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise self._failed(exc) from exc

    def __exit__(self, exc_type: Any, error: Any, trace: Any) -> None:
        if exc_type is not None:
            with contextlib.suppress(sqlite3.Error):
                self._db.execute("ROLLBACK")
            if isinstance(error, sqlite3.OperationalError):
                raise self._failed(error) from error
            return
        try:
            self._db.execute("COMMIT")
        except sqlite3.OperationalError as exc:
            with contextlib.suppress(sqlite3.Error):
                self._db.execute("ROLLBACK")
            raise self._failed(exc) from exc


def _writable(path: Path) -> bool:
    """Whether the store file and its folder (for the write-ahead log) can be written."""
    if not (os.access(path, os.W_OK) and os.access(path.parent, os.W_OK)):
        return False
    try:  # root passes os.access even on a read-only file system
        return not (os.statvfs(path.parent).f_flag & os.ST_RDONLY)
    except OSError:
        return True


def _connect_read_only(path: Path) -> sqlite3.Connection:
    """Open for reading only; on a read-only folder, where SQLite cannot create its shared-memory
    file, as immutable (nothing can be writing to it there)."""
    try:
        db = sqlite3.connect(f"file:{quote(str(path))}?mode=ro", uri=True, isolation_level=None, timeout=30)
        db.execute("SELECT COUNT(*) FROM sqlite_master").fetchone()
        return db
    except sqlite3.OperationalError:
        return sqlite3.connect(f"file:{quote(str(path))}?immutable=1", uri=True, isolation_level=None)
