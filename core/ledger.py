"""The ledger: one SQLite file holding a whole vetting job.

A ledger (``NAME.ledger.sqlite``) keeps the stars and their photometry (so it
is self-contained), the user's exclusion masks (never deletions), the analysis
results keyed by the hash of the settings that made them, the verdicts, and an
append-only history of every change.  It is the only place in Phasewise that
speaks SQL.

Durability
    Every user action is one transaction, committed before the call returns
    (WAL mode, ``synchronous=FULL``).  Killing the program loses nothing that
    a call already returned.

One writer
    A writable open takes a lock row (pid, host, since) inside the file under
    ``BEGIN IMMEDIATE``.  A second writer gets :class:`LedgerLockedError`
    naming the holder; a lock left by a dead process on this host is taken
    over.  Read-only opens never look at the lock.

Damage
    On open the header is checked (magic, page size, stated length against
    the file length) and then SQLite's ``quick_check`` runs on a read-only
    connection.  A damaged file raises :class:`LedgerError` and is left
    byte-for-byte as it was.

Undo and redo
    Each user action is a row of ``actions`` (kind ``do``) with its changes in
    ``history`` (what, old, new).  Undo applies the ``old`` values of the
    latest action still done and appends a new action (kind ``undo``) with its
    own history rows; redo does the same with the ``new`` values.  No history
    row is ever changed or deleted.  The only mutable mark is the ``state`` of
    a ``do`` action: ``done``, ``undone`` (can be redone), or ``dropped`` (an
    undone action that a later new action made unreachable, as in any editor).
    Undo takes the newest ``done`` action, redo the oldest ``undone`` one.
    Imports and settings changes are recorded in the history but are not
    undoable.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import socket
import sqlite3
import struct
import threading
import uuid
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from . import __version__
from .errors import LedgerError, LedgerLockedError, LedgerVersionError
from .lightcurve import LightCurve, StarMeta

__all__ = [
    "SCHEMA_VERSION",
    "APPLICATION_ID",
    "VERDICT_STATUSES",
    "MIGRATIONS",
    "Ledger",
    "StoredResult",
    "Verdict",
    "StarRow",
    "HistoryEntry",
    "Action",
    "Change",
    "LockHolder",
    "file_checksum",
]

#: Version of the table layout written by this Phasewise.
SCHEMA_VERSION = 2

#: SQLite ``application_id`` of a Phasewise ledger ("PhWL").
APPLICATION_ID = 0x5068574C

#: Verdict states, in the order the star list counts them.
VERDICT_STATUSES = ("unreviewed", "confirmed", "relabelled", "rejected", "deferred")

_SQLITE_MAGIC = b"SQLite format 3\x00"


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="microseconds")


def file_checksum(path: str | os.PathLike, *, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file's bytes, as 64 hex digits."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while block := handle.read(chunk):
            digest.update(block)
    return digest.hexdigest()


# --------------------------------------------------------------------- JSON
def _plain(value: Any) -> Any:
    """numpy scalars/arrays and tuples as plain JSON-able Python."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, np.generic):
        return value.item()
    return value


def _dumps(value: Any) -> str:
    # NaN/inf are kept (Python's json reads them back); results use them.
    return json.dumps(_plain(value), separators=(",", ":"), allow_nan=True)


def _loads(text: str | None) -> Any:
    return None if text is None else json.loads(text)


def _finite_or_none(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


# ------------------------------------------------------------------ records
@dataclass(frozen=True)
class StoredResult:
    """An analysis result as stored, with its freshness."""

    star_id: str
    result: dict[str, Any] | None  # AnalysisResult.to_dict(); None when failed
    settings_hash: str
    computed_at: str
    stale: bool  # other settings than the ledger's current ones, or mask changed since
    failed: bool
    error: str | None


@dataclass(frozen=True)
class Verdict:
    """The person's decision on a star."""

    star_id: str
    status: str = "unreviewed"
    class_code: str | None = None
    period: float | None = None
    note: str | None = None
    decided_at: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "status": self.status,
            "class_code": self.class_code,
            "period": self.period,
            "note": self.note,
            "decided_at": self.decided_at,
        }


@dataclass(frozen=True)
class StarRow:
    """One line of the star list (read in one query, no JSON parsing)."""

    star_id: str
    status: str
    suggested_class: str | None
    suggested_score: float | None
    suggested_period: float | None
    verdict_class: str | None
    period: float | None  # the verdict's period if chosen, else the analysis period
    amplitude: float | None
    fap: float | None
    flags: tuple[str, ...]
    analysed: bool
    failed: bool
    stale: bool


@dataclass(frozen=True)
class HistoryEntry:
    """One change: what changed on which star, from what to what, when."""

    id: int
    action: int
    kind: str  # do, undo, redo, import, settings
    at: str
    star_id: str | None
    what: str
    old: Any
    new: Any


@dataclass(frozen=True)
class Action:
    """A user action (or its undo/redo) with the changes it made."""

    id: int
    kind: str
    label: str
    at: str
    target: int | None  # the action undone or redone
    entries: tuple[HistoryEntry, ...]


@dataclass(frozen=True)
class Change:
    """What a committed write changed, for listeners (see :meth:`Ledger.subscribe`)."""

    what: str  # import, verdict, excluded, results, settings, undo, redo
    star_ids: tuple[str, ...]


@dataclass(frozen=True)
class LockHolder:
    """Who holds a ledger for writing."""

    pid: int
    host: str
    since: str
    program: str

    def describe(self) -> str:
        return f"process {self.pid} on {self.host} ({self.program}) since {self.since}"


# ------------------------------------------------------------------ schema
_SCHEMA_V1 = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT);
CREATE TABLE stars (
    id INTEGER PRIMARY KEY,
    star_id TEXT NOT NULL UNIQUE,
    ra REAL, dec REAL,
    source_file TEXT, source_checksum TEXT,
    time_scale TEXT NOT NULL, has_errors INTEGER NOT NULL,
    n_points INTEGER NOT NULL, meta TEXT NOT NULL
);
CREATE TABLE photometry (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    time BLOB NOT NULL, mag BLOB NOT NULL, mag_err BLOB NOT NULL,
    bands TEXT NOT NULL, band_index BLOB, excluded BLOB
);
CREATE TABLE results (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    settings_hash TEXT NOT NULL, computed_at TEXT NOT NULL,
    failed INTEGER NOT NULL DEFAULT 0, error TEXT, result TEXT,
    status TEXT, suggested_class TEXT, suggested_score REAL, suggested_period REAL,
    period REAL, amplitude REAL, fap REAL, flags TEXT
);
CREATE TABLE verdicts (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    status TEXT NOT NULL, class_code TEXT, period REAL, note TEXT, decided_at TEXT
);
CREATE TABLE actions (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    kind TEXT NOT NULL, label TEXT NOT NULL, at TEXT NOT NULL,
    target INTEGER, state TEXT
);
CREATE TABLE history (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    action INTEGER NOT NULL REFERENCES actions(id),
    at TEXT NOT NULL, star_id TEXT, what TEXT NOT NULL, old TEXT, new TEXT
);
CREATE INDEX history_star ON history(star_id);
CREATE TABLE lock (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    token TEXT NOT NULL, pid INTEGER NOT NULL, host TEXT NOT NULL,
    since TEXT NOT NULL, program TEXT NOT NULL
);
"""


def _migrate_1_to_2(conn: sqlite3.Connection) -> None:
    # Version 2 marks results whose star's exclusion mask changed after the
    # analysis, and indexes the action states undo/redo look up.
    conn.execute("ALTER TABLE results ADD COLUMN outdated INTEGER NOT NULL DEFAULT 0")
    conn.execute("CREATE INDEX IF NOT EXISTS actions_state ON actions(state)")


#: Migration steps: ``MIGRATIONS[v]`` turns a version-``v`` file into ``v + 1``.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {1: _migrate_1_to_2}


def _header_problem(path: Path) -> str | None:
    """What is wrong with the SQLite header and length, or None."""
    size = path.stat().st_size
    if size == 0:
        return "the file is empty"
    with open(path, "rb") as handle:
        header = handle.read(100)
    if len(header) < 100 or not header.startswith(_SQLITE_MAGIC):
        return "not an SQLite file (bad header); it is not a ledger or it is damaged"
    page_size = struct.unpack(">H", header[16:18])[0]
    page_size = 65536 if page_size == 1 else page_size
    if page_size < 512 or page_size & (page_size - 1):
        return f"damaged header (page size {page_size})"
    change_counter, n_pages = struct.unpack(">II", header[24:32])
    valid_for = struct.unpack(">I", header[92:96])[0]
    if size % page_size:
        return f"damaged: length {size} bytes is not a whole number of {page_size}-byte pages"
    if n_pages and valid_for == change_counter and size < n_pages * page_size:
        return f"damaged: truncated to {size} bytes; the header says {n_pages * page_size} bytes"
    return None


# ------------------------------------------------------------------ ledger
class Ledger:
    """A vetting job on disk.  Use :meth:`create` or :meth:`open`.

    The object is safe to share between threads (one lock serialises calls);
    use it as a context manager or call :meth:`close`.
    """

    def __init__(self, path: Path, conn: sqlite3.Connection, readonly: bool) -> None:
        self.path = path
        self.readonly = readonly
        self._conn = conn
        self._mutex = threading.RLock()
        self._token: str | None = None
        self._ids: dict[str, int] = {}
        self._order: list[str] = []
        self._listeners: list[Callable[[Change], None]] = []
        self._load_ids()

    # ------------------------------------------------------------- opening
    @classmethod
    def create(cls, path: str | os.PathLike, *, overwrite: bool = False) -> Ledger:
        """Make a new, empty ledger file and open it for writing."""
        path = Path(path)
        if path.exists():
            if not overwrite:
                raise LedgerError("a file of that name exists; choose another name", file=path)
            Ledger.open(path).close()  # refuses if another process holds it or it is damaged
        # WAL/SHM files left beside a deleted ledger would be replayed into the new one
        for suffix in ("", "-wal", "-shm"):
            Path(f"{path}{suffix}").unlink(missing_ok=True)
        # built under a temporary name and renamed, so a crash never leaves half a ledger
        temp = path.with_name(f".{path.name}.{uuid.uuid4().hex[:8]}.tmp")
        try:
            conn = sqlite3.connect(temp, isolation_level=None)
            conn.execute(f"PRAGMA application_id={APPLICATION_ID}")
            conn.executescript("BEGIN;" + _SCHEMA_V1 + "COMMIT;")
            conn.execute("BEGIN IMMEDIATE")
            for version in range(1, SCHEMA_VERSION):
                MIGRATIONS[version](conn)
            conn.execute(f"PRAGMA user_version={SCHEMA_VERSION}")
            conn.executemany(
                "INSERT INTO meta(key, value) VALUES (?, ?)",
                [("created_at", _now()), ("created_by", f"phasewise {__version__}")],
            )
            conn.execute("COMMIT")
            conn.execute("PRAGMA journal_mode=WAL")
            conn.close()
            os.replace(temp, path)
        except (sqlite3.Error, OSError) as exc:
            for suffix in ("", "-wal", "-shm", "-journal"):
                Path(f"{temp}{suffix}").unlink(missing_ok=True)
            raise LedgerError(f"cannot create the ledger: {exc}", file=path) from exc
        return cls.open(path)

    @classmethod
    def open(
        cls, path: str | os.PathLike, readonly: bool = False, *, check: str = "quick"
    ) -> Ledger:
        """Open a ledger.

        Parameters
        ----------
        path : path
        readonly : bool
            Read-only opens are allowed while another process writes.
        check : {"quick", "full", "none"}
            SQLite ``quick_check`` (default), ``integrity_check``, or only the
            header check.

        Raises
        ------
        LedgerError
            Missing, damaged or foreign file (left untouched).
        LedgerVersionError
            Written by a newer Phasewise.
        LedgerLockedError
            Another live process holds it for writing.
        """
        path = Path(path)
        if not path.is_file():
            raise LedgerError("no such ledger file", file=path)
        problem = _header_problem(path)
        if problem:
            raise LedgerError(problem, file=path)
        version = cls._check_readonly(path, check)
        if version > SCHEMA_VERSION:
            raise LedgerVersionError(
                f"written by a newer Phasewise (schema version {version}; this version "
                f"{__version__} reads up to {SCHEMA_VERSION}); update Phasewise to open it",
                file=path,
            )
        if readonly:
            if version < SCHEMA_VERSION:
                raise LedgerVersionError(
                    f"written by an older Phasewise (schema version {version}); open it "
                    "for writing once to upgrade it",
                    file=path,
                )
            conn = sqlite3.connect(
                f"{path.resolve().as_uri()}?mode=ro", uri=True, check_same_thread=False
            )
            conn.isolation_level = None
            return cls(path, conn, readonly=True)
        conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False, timeout=10)
        conn.execute("PRAGMA journal_mode=WAL")
        conn.execute("PRAGMA synchronous=FULL")
        conn.execute("PRAGMA foreign_keys=ON")
        token = cls._take_lock(conn, path)
        try:
            if version < SCHEMA_VERSION:
                cls._migrate(conn, path, version)
            ledger = cls(path, conn, readonly=False)
        except BaseException:
            conn.execute("DELETE FROM lock WHERE token = ?", (token,))
            conn.close()
            raise
        ledger._token = token
        return ledger

    @staticmethod
    def _check_readonly(path: Path, check: str) -> int:
        """Check the file on a read-only connection; return its schema version."""
        pragma = {"quick": "quick_check", "full": "integrity_check", "none": None}
        if check not in pragma:
            raise LedgerError(f"unknown check {check!r}; expected quick, full or none")
        side_files = [Path(f"{path}{s}") for s in ("-wal", "-shm")]
        existed = [p.exists() for p in side_files]
        try:
            conn = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
        except sqlite3.Error as exc:
            raise LedgerError(f"cannot open: {exc}", file=path) from exc
        try:
            app_id = conn.execute("PRAGMA application_id").fetchone()[0]
            version = conn.execute("PRAGMA user_version").fetchone()[0]
            if pragma[check]:
                rows = conn.execute(f"PRAGMA {pragma[check]}").fetchall()
                if [r[0] for r in rows] != ["ok"]:
                    detail = "; ".join(str(r[0]) for r in rows[:3])
                    raise LedgerError(f"damaged: SQLite check failed: {detail}", file=path)
            if app_id != APPLICATION_ID:
                raise LedgerError("an SQLite file, but not a Phasewise ledger", file=path)
        except sqlite3.DatabaseError as exc:
            conn.close()
            _remove_new_side_files(side_files, existed)
            raise LedgerError(f"damaged or not a ledger: {exc}", file=path) from exc
        except LedgerError:
            conn.close()
            _remove_new_side_files(side_files, existed)
            raise
        conn.close()
        return int(version)

    @staticmethod
    def _live_holder(conn: sqlite3.Connection, path: Path) -> None:
        """Raise :class:`LedgerLockedError` naming the holder if a live process holds the lock."""
        row = conn.execute(
            "SELECT pid, host, since, program, token FROM lock WHERE id = 1"
        ).fetchone()
        if row is None:
            return
        holder = LockHolder(int(row[0]), row[1], row[2], row[3])
        started = row[4].partition("/")[2]
        if holder.host != socket.gethostname() or _holder_alive(holder.pid, started):
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            conn.close()
            where = (
                "" if holder.host == socket.gethostname() else " (another machine: cannot check it)"
            )
            raise LedgerLockedError(
                f"held for writing by {holder.describe()}{where}; "
                "close it there, or open this ledger read-only",
                file=path,
            )
        # the holder died without closing: its lock is stale, to be taken over

    @staticmethod
    def _take_lock(conn: sqlite3.Connection, path: Path) -> str:
        # the token carries the process start time, so a reused pid is not mistaken
        # for the holder
        token = f"{uuid.uuid4().hex}/{_process_start(os.getpid()) or ''}"
        # a read first (in WAL mode it never waits for a writer): a live holder is
        # named at once, not after waiting for a write lock it keeps taking
        Ledger._live_holder(conn, path)
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            conn.close()
            raise LedgerLockedError(
                f"another process is writing to it and did not finish within 10 s ({exc})",
                file=path,
            ) from exc
        Ledger._live_holder(conn, path)  # again, inside the transaction: it may have changed
        conn.execute(
            "INSERT OR REPLACE INTO lock(id, token, pid, host, since, program) "
            "VALUES (1, ?, ?, ?, ?, ?)",
            (token, os.getpid(), socket.gethostname(), _now(), f"phasewise {__version__}"),
        )
        conn.execute("COMMIT")
        return token

    @staticmethod
    def _migrate(conn: sqlite3.Connection, path: Path, version: int) -> None:
        conn.execute("BEGIN IMMEDIATE")
        try:
            while version < SCHEMA_VERSION:
                step = MIGRATIONS.get(version)
                if step is None:
                    raise LedgerVersionError(
                        f"no migration from schema version {version}", file=path
                    )
                step(conn)
                version += 1
            conn.execute(f"PRAGMA user_version={SCHEMA_VERSION}")
            conn.execute("COMMIT")
        except BaseException:
            conn.execute("ROLLBACK")
            raise

    def lock_holder(self) -> LockHolder | None:
        """Who holds this ledger for writing (None if nobody)."""
        row = self._query("SELECT pid, host, since, program FROM lock WHERE id = 1").fetchone()
        return None if row is None else LockHolder(int(row[0]), row[1], row[2], row[3])

    def close(self) -> None:
        """Release the write lock and close the file."""
        with self._mutex:
            if self._conn is None:
                return
            try:
                if self._token is not None:
                    self._conn.execute("DELETE FROM lock WHERE token = ?", (self._token,))
                    self._conn.execute("PRAGMA optimize")
            finally:
                self._conn.close()
                self._conn = None

    def __enter__(self) -> Ledger:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        mode = "read-only" if self.readonly else "writable"
        return f"Ledger({str(self.path)!r}, {self.n_stars} stars, {mode})"

    # ------------------------------------------------------------ plumbing
    def _query(self, sql: str, params: Iterable[Any] = ()) -> _Rows:
        # Rows are fetched under the lock, so threads sharing one ledger never
        # interleave on the connection.
        with self._mutex:
            if self._conn is None:
                raise LedgerError("the ledger is closed", file=self.path)
            cursor = self._conn.execute(sql, tuple(params))
            return _Rows(cursor.fetchall(), cursor.lastrowid)

    def _stream(self, sql: str) -> Iterable[tuple[Any, ...]]:
        if self._conn is None:
            raise LedgerError("the ledger is closed", file=self.path)
        return self._conn.execute(sql)

    def _write(self, what: str) -> _Transaction:
        if self._conn is None:
            raise LedgerError("the ledger is closed", file=self.path)
        if self.readonly:
            raise LedgerError("opened read-only; cannot change it", file=self.path)
        return _Transaction(self, what)

    def _load_ids(self) -> None:
        rows = self._query("SELECT id, star_id FROM stars ORDER BY id").fetchall()
        self._ids = {star_id: key for key, star_id in rows}
        self._order = [star_id for _, star_id in rows]

    def _key(self, star_id: str) -> int:
        try:
            return self._ids[str(star_id)]
        except KeyError:
            raise LedgerError(f"no star {star_id!r} in this ledger", file=self.path) from None

    def _new_action(self, kind: str, label: str, target: int | None = None) -> int:
        state = "done" if kind == "do" else None
        if kind == "do":
            # a new action makes every undone action unreachable for redo
            self._query("UPDATE actions SET state = 'dropped' WHERE state = 'undone'")
        cursor = self._query(
            "INSERT INTO actions(kind, label, at, target, state) VALUES (?, ?, ?, ?, ?)",
            (kind, label, _now(), target, state),
        )
        return int(cursor.lastrowid)

    def _log(self, action: int, star_id: str | None, what: str, old: Any, new: Any) -> None:
        self._query(
            "INSERT INTO history(action, at, star_id, what, old, new) VALUES (?, ?, ?, ?, ?, ?)",
            (action, _now(), star_id, what, _dumps(old), _dumps(new)),
        )

    # --------------------------------------------------------------- stars
    @property
    def n_stars(self) -> int:
        return len(self._order)

    def star_ids(self) -> list[str]:
        """Star ids in import order."""
        return list(self._order)

    def __contains__(self, star_id: object) -> bool:
        return str(star_id) in self._ids

    def add_stars(
        self,
        lightcurves: Iterable[LightCurve],
        *,
        source_file: str | os.PathLike | None = None,
        source_checksum: str | None = None,
    ) -> int:
        """Import stars with their photometry, in one transaction.

        Returns the number of stars added.  A star id already in the ledger
        raises :class:`LedgerError` and nothing of this call is kept.
        """
        source = None if source_file is None else str(source_file)
        added: list[str] = []
        try:
            with self._mutex, self._write("import") as tx:
                tx.star_ids = added
                self._add(lightcurves, added, source, source_checksum)
                self._load_ids()  # before the listeners hear of it
        except BaseException:
            self._load_ids()
            raise
        return len(added)

    def _add(
        self,
        lightcurves: Iterable[LightCurve],
        added: list[str],
        source: str | None,
        source_checksum: str | None,
    ) -> None:
        seen: set[str] = set()
        for lc in lightcurves:
            if lc.star_id in self._ids:
                raise LedgerError(f"star {lc.star_id!r} is already in this ledger", file=self.path)
            if lc.star_id in seen:
                raise LedgerError(
                    f"star {lc.star_id!r} appears twice in this import", file=self.path
                )
            self._insert_star(lc, source, source_checksum)
            added.append(lc.star_id)
            seen.add(lc.star_id)
        if added:
            action = self._new_action("import", f"import {len(added)} stars")
            self._log(
                action,
                None,
                "import",
                None,
                {
                    "n_stars": len(added),
                    "source_file": source,
                    "source_checksum": source_checksum,
                    "first": added[0],
                    "last": added[-1],
                },
            )

    def _insert_star(self, lc: LightCurve, source: str | None, checksum: str | None) -> None:
        meta = lc.meta.to_dict()
        cursor = self._query(
            "INSERT INTO stars(star_id, ra, dec, source_file, source_checksum, time_scale, "
            "has_errors, n_points, meta) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (
                lc.star_id,
                lc.meta.ra,
                lc.meta.dec,
                source or lc.meta.source_file,
                checksum,
                lc.time_scale,
                int(lc.has_errors),
                lc.n_points,
                _dumps(meta),
            ),
        )
        key = cursor.lastrowid
        names, index = np.unique(lc.band.astype(str), return_inverse=True)
        band_index = None
        if names.size > 1:
            dtype = np.uint8 if names.size < 256 else np.uint32
            band_index = index.astype(dtype).tobytes()
        excluded = lc.excluded.astype(np.uint8).tobytes() if lc.excluded.any() else None
        self._query(
            "INSERT INTO photometry(star, time, mag, mag_err, bands, band_index, excluded) "
            "VALUES (?, ?, ?, ?, ?, ?, ?)",
            (
                key,
                np.ascontiguousarray(lc.time, dtype="<f8").tobytes(),
                np.ascontiguousarray(lc.mag, dtype="<f8").tobytes(),
                np.ascontiguousarray(lc.mag_err, dtype="<f8").tobytes(),
                json.dumps([str(n) for n in names]),
                band_index,
                excluded,
            ),
        )
        self._query(
            "INSERT INTO verdicts(star, status) VALUES (?, 'unreviewed')",
            (key,),
        )

    def lightcurve(self, star_id: str) -> LightCurve:
        """The star's photometry with its stored exclusion mask."""
        key = self._key(star_id)
        row = self._query(
            "SELECT s.time_scale, s.has_errors, s.n_points, s.meta, p.time, p.mag, p.mag_err, "
            "p.bands, p.band_index FROM stars s JOIN photometry p ON p.star = s.id "
            "WHERE s.id = ?",
            (key,),
        ).fetchone()
        time_scale, has_errors, n, meta, time, mag, err, bands, band_index = row
        names = json.loads(bands)
        if band_index is None:
            band: Any = names[0] if names else "V"
        else:
            width = len(band_index) // n if n else 1
            index = np.frombuffer(band_index, dtype=np.uint8 if width == 1 else "<u4", count=n)
            band = np.asarray(names, dtype=object)[index]
        meta = json.loads(meta)
        return LightCurve(
            star_id=str(star_id),
            time=np.frombuffer(time, dtype="<f8", count=n),
            mag=np.frombuffer(mag, dtype="<f8", count=n),
            mag_err=np.frombuffer(err, dtype="<f8", count=n) if has_errors else None,
            band=band,
            time_scale=time_scale,
            excluded=self.excluded(star_id),
            meta=StarMeta(
                ra=meta.get("ra"),
                dec=meta.get("dec"),
                source_file=meta.get("source_file"),
                columns=dict(meta.get("columns") or {}),
                notes=tuple(meta.get("notes") or ()),
            ),
            has_errors=bool(has_errors),
        )

    def lightcurves(self, star_ids: Iterable[str] | None = None) -> Iterable[LightCurve]:
        """Light curves of the given stars (all, in import order, by default), one at a time."""
        for star_id in self._order if star_ids is None else star_ids:
            yield self.lightcurve(star_id)

    def star_info(self, star_id: str) -> dict[str, Any]:
        """Coordinates, source file and its checksum, time scale, number of points."""
        row = self._query(
            "SELECT ra, dec, source_file, source_checksum, time_scale, n_points FROM stars "
            "WHERE id = ?",
            (self._key(star_id),),
        ).fetchone()
        keys = ("ra", "dec", "source_file", "source_checksum", "time_scale", "n_points")
        return {"star_id": str(star_id), **dict(zip(keys, row, strict=True))}

    def excluded(self, star_id: str) -> np.ndarray:
        """The stored exclusion mask (True = excluded)."""
        key = self._key(star_id)
        n, blob = self._query(
            "SELECT s.n_points, p.excluded FROM stars s JOIN photometry p ON p.star = s.id "
            "WHERE s.id = ?",
            (key,),
        ).fetchone()
        if blob is None:
            return np.zeros(n, dtype=bool)
        return np.frombuffer(blob, dtype=np.uint8, count=n).astype(bool)

    def set_excluded(self, star_id: str, mask: Any, *, reason: str = "") -> None:
        """Store a new exclusion mask (one undoable action; results go stale)."""
        star_id = str(star_id)
        key = self._key(star_id)
        old = self.excluded(star_id)
        new = np.asarray(mask, dtype=bool)
        if new.shape != old.shape:
            raise LedgerError(
                f"star {star_id!r}: expected a mask of {old.size} points, got shape {new.shape}",
                file=self.path,
                field="excluded",
            )
        if np.array_equal(old, new):
            return
        with self._mutex, self._write("excluded") as tx:
            tx.star_ids = [star_id]
            action = self._new_action("do", f"exclude points of {star_id}")
            self._apply_excluded(key, new)
            self._log(
                action,
                star_id,
                "excluded",
                {"indices": np.flatnonzero(old).tolist()},
                {"indices": np.flatnonzero(new).tolist(), "reason": reason},
            )

    def _apply_excluded(self, key: int, mask: np.ndarray) -> None:
        blob = mask.astype(np.uint8).tobytes() if mask.any() else None
        self._query("UPDATE photometry SET excluded = ? WHERE star = ?", (blob, key))
        self._query("UPDATE results SET outdated = 1 WHERE star = ?", (key,))

    # ------------------------------------------------------------ analysis
    def set_analysis_settings(self, settings: Mapping[str, Any], settings_hash: str) -> None:
        """Record the current analysis settings; results of other settings become stale."""
        old = self.analysis_settings()
        new_value = {"settings": _plain(dict(settings)), "settings_hash": str(settings_hash)}
        if old is not None and old[1] == str(settings_hash):
            return
        with self._mutex, self._write("settings"):
            self._query(
                "INSERT OR REPLACE INTO meta(key, value) VALUES ('analysis_settings', ?)",
                (_dumps(new_value),),
            )
            action = self._new_action("settings", "analysis settings")
            self._log(
                action,
                None,
                "analysis_settings",
                None if old is None else {"settings": old[0], "settings_hash": old[1]},
                new_value,
            )

    def analysis_settings(self) -> tuple[dict[str, Any], str] | None:
        """``(settings_dict, settings_hash)`` last set, or None."""
        row = self._query("SELECT value FROM meta WHERE key = 'analysis_settings'").fetchone()
        if row is None:
            return None
        value = json.loads(row[0])
        return value["settings"], value["settings_hash"]

    @property
    def settings_hash(self) -> str | None:
        """Hash of the current analysis settings (None before any is set)."""
        current = self.analysis_settings()
        return None if current is None else current[1]

    def store_results(self, items: Iterable[tuple[str, str, Mapping[str, Any]]]) -> int:
        """Store analysis results in one transaction; returns how many.

        ``items`` are ``(star_id, settings_hash, AnalysisResult.to_dict())``.
        A star's earlier result (any settings) is replaced.
        """
        rows = []
        now = _now()
        items = list(items)
        for star_id, settings_hash, result in items:
            summary = _summary(result)
            rows.append((self._key(star_id), str(settings_hash), now, _dumps(result), *summary))
        with self._mutex, self._write("results") as tx:
            tx.star_ids = [str(item[0]) for item in items]
            self._conn.executemany(
                "INSERT OR REPLACE INTO results(star, settings_hash, computed_at, failed, error, "
                "result, status, suggested_class, suggested_score, suggested_period, period, "
                "amplitude, fap, flags, outdated) "
                "VALUES (?, ?, ?, 0, NULL, ?, ?, ?, ?, ?, ?, ?, ?, ?, 0)",
                rows,
            )
        return len(rows)

    def store_failures(self, items: Iterable[tuple[str, str, str]]) -> int:
        """Record failed analyses ``(star_id, settings_hash, message)`` in one transaction."""
        now = _now()
        items = list(items)
        rows = [(self._key(s), str(h), now, str(m)) for s, h, m in items]
        with self._mutex, self._write("results") as tx:
            tx.star_ids = [str(item[0]) for item in items]
            self._conn.executemany(
                "INSERT OR REPLACE INTO results(star, settings_hash, computed_at, failed, error, "
                "flags, outdated) VALUES (?, ?, ?, 1, ?, '[]', 0)",
                rows,
            )
        return len(rows)

    def store_failure(self, star_id: str, settings_hash: str, message: str) -> None:
        """Record that the analysis of a star failed, with its message."""
        self.store_failures([(star_id, settings_hash, message)])

    def result(self, star_id: str) -> StoredResult | None:
        """The stored result of a star (None if never analysed)."""
        row = self._query(
            "SELECT settings_hash, computed_at, failed, error, result, outdated FROM results "
            "WHERE star = ?",
            (self._key(star_id),),
        ).fetchone()
        if row is None:
            return None
        settings_hash, computed_at, failed, error, result, outdated = row
        current = self.settings_hash
        stale = bool(outdated) or (current is not None and settings_hash != current)
        return StoredResult(
            star_id=str(star_id),
            result=_loads(result),
            settings_hash=settings_hash,
            computed_at=computed_at,
            stale=stale,
            failed=bool(failed),
            error=error,
        )

    def stars_needing_analysis(self, settings_hash: str, only: str = "unanalysed") -> list[str]:
        """Star ids to analyse, in import order.

        ``only="unanalysed"``: stars without any result.  ``"stale"``: those
        plus stars whose result was made with other settings or before their
        mask changed (what a resumed run needs).  ``"all"``: every star.
        A recorded failure with the same settings counts as analysed.
        """
        sql = {
            "unanalysed": "SELECT s.star_id FROM stars s LEFT JOIN results r ON r.star = s.id "
            "WHERE r.star IS NULL ORDER BY s.id",
            "stale": "SELECT s.star_id FROM stars s LEFT JOIN results r ON r.star = s.id "
            "WHERE r.star IS NULL OR r.settings_hash != ? OR r.outdated ORDER BY s.id",
            "all": "SELECT star_id FROM stars ORDER BY id",
        }
        if only not in sql:
            raise LedgerError(
                f"got {only!r}; expected one of 'unanalysed', 'stale', 'all'", field="only"
            )
        params = (str(settings_hash),) if only == "stale" else ()
        return [r[0] for r in self._query(sql[only], params)]

    # ------------------------------------------------------------ verdicts
    def verdict(self, star_id: str) -> Verdict:
        """The star's current verdict."""
        row = self._query(
            "SELECT status, class_code, period, note, decided_at FROM verdicts WHERE star = ?",
            (self._key(star_id),),
        ).fetchone()
        return Verdict(str(star_id), *row)

    def verdicts(self) -> list[Verdict]:
        """Every star's verdict, in import order."""
        rows = self._query(
            "SELECT s.star_id, v.status, v.class_code, v.period, v.note, v.decided_at "
            "FROM stars s JOIN verdicts v ON v.star = s.id ORDER BY s.id"
        )
        return [Verdict(*row) for row in rows]

    def set_verdict(
        self,
        star_id: str,
        status: str,
        *,
        class_code: str | None = None,
        period: float | None = None,
        note: str | None = None,
    ) -> Verdict:
        """Record a verdict; committed before returning, undoable."""
        return self.set_verdicts([(star_id, status, class_code, period, note)])[0]

    def set_verdicts(
        self,
        items: Iterable[tuple[str, str, str | None, float | None, str | None]],
        *,
        label: str | None = None,
    ) -> list[Verdict]:
        """Several verdicts ``(star_id, status, class_code, period, note)`` as one action."""
        checked = [self._checked_verdict(*item) for item in items]
        if not checked:
            return []
        with self._mutex, self._write("verdict") as tx:
            tx.star_ids = [v.star_id for v in checked]
            text = label or (
                f"verdict {checked[0].status} on {checked[0].star_id}"
                if len(checked) == 1
                else f"{len(checked)} verdicts"
            )
            action = self._new_action("do", text)
            for verdict in checked:
                old = self.verdict(verdict.star_id)
                self._apply_verdict(verdict)
                self._log(action, verdict.star_id, "verdict", old.to_dict(), verdict.to_dict())
        return checked

    def _checked_verdict(
        self,
        star_id: str,
        status: str,
        class_code: str | None = None,
        period: float | None = None,
        note: str | None = None,
    ) -> Verdict:
        star_id = str(star_id)
        self._key(star_id)
        if status not in VERDICT_STATUSES:
            raise LedgerError(
                f"star {star_id!r}: unknown verdict status {status!r}; expected one of "
                + ", ".join(VERDICT_STATUSES),
                file=self.path,
                field="status",
            )
        class_code = None if class_code in (None, "") else str(class_code).strip()
        if status == "relabelled" and not class_code:
            raise LedgerError(
                f"star {star_id!r}: a relabelled verdict needs a class",
                file=self.path,
                field="class",
            )
        if period is not None:
            period = _finite_or_none(period)
            if period is None or period <= 0:
                raise LedgerError(
                    f"star {star_id!r}: a period must be a positive number of days",
                    file=self.path,
                    field="period",
                )
        decided_at = None if status == "unreviewed" else _now()
        return Verdict(star_id, status, class_code, period, note or None, decided_at)

    def _apply_verdict(self, verdict: Verdict) -> None:
        self._query(
            "UPDATE verdicts SET status = ?, class_code = ?, period = ?, note = ?, "
            "decided_at = ? WHERE star = ?",
            (
                verdict.status,
                verdict.class_code,
                verdict.period,
                verdict.note,
                verdict.decided_at,
                self._key(verdict.star_id),
            ),
        )

    def status_counts(self) -> dict[str, int]:
        """Number of stars in each verdict state."""
        counts = dict.fromkeys(VERDICT_STATUSES, 0)
        for status, n in self._query("SELECT status, COUNT(*) FROM verdicts GROUP BY status"):
            counts[status] = n
        return counts

    # ------------------------------------------------------------ the list
    def star_rows(self) -> list[StarRow]:
        """Every star's list line, in import order, from one query."""
        return self._star_rows("", ())

    def star_row(self, star_id: str) -> StarRow:
        """One star's list line (to refresh a row after a change)."""
        return self._star_rows("WHERE s.id = ?", (self._key(star_id),))[0]

    def _star_rows(self, where: str, params: tuple[Any, ...]) -> list[StarRow]:
        # stale is worked out in SQL and rows are built positionally: this is
        # what a 10,000-star list waits for
        current = self.settings_hash
        rows = self._query(
            "SELECT s.star_id, v.status, r.suggested_class, r.suggested_score, "
            "r.suggested_period, v.class_code, COALESCE(v.period, r.period), r.amplitude, r.fap, "
            "r.flags, r.star IS NOT NULL, COALESCE(r.failed, 0), "
            "r.star IS NOT NULL AND (r.outdated OR (? IS NOT NULL AND r.settings_hash != ?)) "
            "FROM stars s JOIN verdicts v ON v.star = s.id LEFT JOIN results r ON r.star = s.id "
            f"{where} ORDER BY s.id",
            (current, current, *params),
        ).fetchall()
        loads = json.loads
        return [
            StarRow(
                *row[:9],
                tuple(loads(row[9])) if row[9] and row[9] != "[]" else (),
                bool(row[10]),
                bool(row[11]),
                bool(row[12]),
            )
            for row in rows
        ]

    # ------------------------------------------------------------ listeners
    def subscribe(self, callback: Callable[[Change], None]) -> Callable[[], None]:
        """Call ``callback(Change)`` after every committed change; returns an unsubscribe."""
        self._listeners.append(callback)
        return lambda: self._listeners.remove(callback) if callback in self._listeners else None

    def _notify(self, change: Change) -> None:
        for callback in list(self._listeners):
            callback(change)

    # ------------------------------------------------------------- history
    def history(self, star_id: str | None = None) -> list[HistoryEntry]:
        """Every recorded change, oldest first (of one star if given)."""
        sql = (
            "SELECT h.id, h.action, a.kind, h.at, h.star_id, h.what, h.old, h.new "
            "FROM history h JOIN actions a ON a.id = h.action"
        )
        params: tuple[Any, ...] = ()
        if star_id is not None:
            self._key(star_id)
            sql += " WHERE h.star_id = ?"
            params = (str(star_id),)
        rows = self._query(sql + " ORDER BY h.id", params)
        return [
            HistoryEntry(r[0], r[1], r[2], r[3], r[4], r[5], _loads(r[6]), _loads(r[7]))
            for r in rows
        ]

    def can_undo(self) -> bool:
        return self._next_action("undo") is not None

    def can_redo(self) -> bool:
        return self._next_action("redo") is not None

    def undo_label(self) -> str | None:
        """What :meth:`undo` would undo (for an Edit menu), or None."""
        action = self._next_action("undo")
        return None if action is None else action[1]

    def redo_label(self) -> str | None:
        """What :meth:`redo` would redo, or None."""
        action = self._next_action("redo")
        return None if action is None else action[1]

    def _next_action(self, direction: str) -> tuple[int, str] | None:
        if direction == "undo":
            sql = "SELECT id, label FROM actions WHERE state = 'done' ORDER BY id DESC LIMIT 1"
        else:
            sql = "SELECT id, label FROM actions WHERE state = 'undone' ORDER BY id LIMIT 1"
        return self._query(sql).fetchone()

    def undo(self) -> Action | None:
        """Undo the latest action still done; returns what changed (None if nothing)."""
        return self._walk("undo")

    def redo(self) -> Action | None:
        """Redo the oldest undone action; returns what changed (None if nothing)."""
        return self._walk("redo")

    def _walk(self, direction: str) -> Action | None:
        with self._mutex:
            if self._next_action(direction) is None:
                return None
            return self._walk_one(direction)

    def _walk_one(self, direction: str) -> Action:
        with self._write(direction) as tx:
            target_id, label = self._next_action(direction)
            entries = self._query(
                "SELECT star_id, what, old, new FROM history WHERE action = ? ORDER BY id",
                (target_id,),
            ).fetchall()
            action = self._new_action(direction, f"{direction} {label}", target_id)
            if direction == "undo":
                entries = entries[::-1]
            for star_id, what, old, new in entries:
                before, after = (_loads(new), _loads(old))
                if direction == "redo":
                    before, after = after, before
                self._restore(star_id, what, after)
                self._log(action, star_id, what, before, after)
                tx.star_ids.append(star_id)
            state = "undone" if direction == "undo" else "done"
            self._query("UPDATE actions SET state = ? WHERE id = ?", (state, target_id))
        return self._action(action)

    def _restore(self, star_id: str, what: str, value: Any) -> None:
        if what == "verdict":
            self._apply_verdict(Verdict(star_id, **value))
        elif what == "excluded":
            key = self._key(star_id)
            n = self._query("SELECT n_points FROM stars WHERE id = ?", (key,)).fetchone()[0]
            mask = np.zeros(n, dtype=bool)
            mask[np.asarray(value["indices"], dtype=int)] = True
            self._apply_excluded(key, mask)
        else:  # pragma: no cover - only undoable kinds are recorded as "do"
            raise LedgerError(f"cannot undo a change of {what!r}", file=self.path)

    def _action(self, action_id: int) -> Action:
        kind, label, at, target = self._query(
            "SELECT kind, label, at, target FROM actions WHERE id = ?", (action_id,)
        ).fetchone()
        rows = self._query(
            "SELECT id, action, ?, at, star_id, what, old, new FROM history WHERE action = ? "
            "ORDER BY id",
            (kind, action_id),
        )
        entries = tuple(
            HistoryEntry(r[0], r[1], r[2], r[3], r[4], r[5], _loads(r[6]), _loads(r[7]))
            for r in rows
        )
        return Action(action_id, kind, label, at, target, entries)

    # ---------------------------------------------------------- provenance
    def meta(self) -> dict[str, str]:
        """Creation time and program, and other key/value facts of the file."""
        return dict(self._query("SELECT key, value FROM meta"))

    def checksum(self) -> str:
        """SHA-256 of the ledger's content (stars, photometry, masks, results, verdicts).

        Computed from the data in a fixed order, so it does not depend on
        SQLite's page layout or on whether the WAL has been checkpointed.
        """
        digest = hashlib.sha256()
        queries = (
            "SELECT s.star_id, s.ra, s.dec, s.time_scale, p.time, p.mag, p.mag_err, p.bands, "
            "p.band_index, p.excluded FROM stars s JOIN photometry p ON p.star = s.id ORDER BY s.id",
            "SELECT star, settings_hash, failed, error, result FROM results ORDER BY star",
            "SELECT star, status, class_code, period, note, decided_at FROM verdicts ORDER BY star",
        )
        with self._mutex:
            for sql in queries:
                for row in self._stream(sql):
                    for value in row:
                        data = value if isinstance(value, bytes) else repr(value).encode()
                        digest.update(len(data).to_bytes(8, "little"))
                        digest.update(data)
        return digest.hexdigest()

    def integrity_check(self) -> bool:
        """SQLite's full ``integrity_check`` of the open file."""
        rows = self._query("PRAGMA integrity_check").fetchall()
        return [r[0] for r in rows] == ["ok"]


class _Rows:
    """Fetched rows with the cursor's ``lastrowid``."""

    def __init__(self, rows: list[tuple[Any, ...]], lastrowid: int | None) -> None:
        self.rows = rows
        self.lastrowid = lastrowid

    def fetchone(self) -> tuple[Any, ...] | None:
        return self.rows[0] if self.rows else None

    def fetchall(self) -> list[tuple[Any, ...]]:
        return self.rows

    def __iter__(self):
        return iter(self.rows)


class _Transaction:
    """``BEGIN IMMEDIATE`` … ``COMMIT`` (or ``ROLLBACK`` on error)."""

    def __init__(self, ledger: Ledger, what: str) -> None:
        self.ledger = ledger
        self.conn = ledger._conn
        self.path = ledger.path
        self.what = what
        self.star_ids: list[str] = []

    def __enter__(self) -> _Transaction:
        try:
            self.conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise LedgerError(f"cannot write: {exc}", file=self.path) from exc
        return self

    def __exit__(self, exc_type: Any, exc: Any, tb: Any) -> None:
        if exc_type is None:
            try:
                self.conn.execute("COMMIT")
            except sqlite3.Error as error:
                self.conn.execute("ROLLBACK")
                raise LedgerError(f"cannot write: {error}", file=self.path) from error
            self.ledger._notify(Change(self.what, tuple(self.star_ids)))
            return
        self.conn.execute("ROLLBACK")


def _remove_new_side_files(side_files: list[Path], existed: list[bool]) -> None:
    # Leave a refused file as it was found: drop empty WAL/SHM files our check made.
    for side, was_there in zip(side_files, existed, strict=True):
        try:
            if (
                not was_there
                and side.exists()
                and (side.name.endswith("-shm") or not side.stat().st_size)
            ):
                side.unlink()
        except OSError:
            pass


def _process_start(pid: int) -> str | None:
    """Start time of a process in clock ticks since boot (Linux), else None."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            return handle.read().rsplit(")", 1)[1].split()[19]
    except (OSError, IndexError):
        return None


def _holder_alive(pid: int, started: str) -> bool:
    if not _pid_alive(pid):
        return False
    now = _process_start(pid)
    return not (started and now and now != started)


def _pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return _not_zombie(pid)


def _not_zombie(pid: int) -> bool:
    # A killed child that its parent has not reaped yet still answers kill(0).
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            return handle.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return True


def _summary(result: Mapping[str, Any]) -> tuple[Any, ...]:
    """Columns the star list shows, read once when a result is stored."""
    suggestions = result.get("suggestions") or []
    top = suggestions[0] if suggestions else {}
    flags = [str(f) for f in (result.get("flags") or [])]
    return (
        result.get("status"),
        top.get("class") or top.get("class_code"),
        _finite_or_none(top.get("score")),
        _finite_or_none(top.get("period")),
        _finite_or_none(result.get("period")),
        _finite_or_none(result.get("amplitude")),
        _finite_or_none(result.get("fap")),
        json.dumps(flags),
    )
