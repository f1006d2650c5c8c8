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
    the file length, allowing for a live WAL); opening never reads the whole
    file.  Every stored record (photometry, result, verdict, history entry,
    setting) carries a seal, a checksum of its values, verified whenever it is
    read: a damaged record is reported for its star and the rest of the
    ledger stays usable.  :meth:`Ledger.check` (``phasewise ledger check``)
    runs SQLite's ``integrity_check`` and verifies every seal.  A damaged file
    raises :class:`LedgerError` and is left byte-for-byte as it was.

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
import tempfile
import threading
import time
import uuid
import zlib
from collections.abc import Callable, Collection, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import asdict, dataclass, replace
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, NamedTuple

import numpy as np

from . import __version__
from .errors import LedgerError, LedgerLockedError, LedgerVersionError
from .lightcurve import LightCurve, StarMeta

__all__ = [
    "SCHEMA_VERSION",
    "APPLICATION_ID",
    "VERDICT_STATUSES",
    "STAR_FLAGS_SQL",
    "STAR_ORDER_FIELDS",
    "MIGRATIONS",
    "Ledger",
    "StoredResult",
    "Verdict",
    "StarRow",
    "PointRow",
    "PointChunk",
    "HistoryEntry",
    "Action",
    "Change",
    "LockHolder",
    "Problem",
    "file_checksum",
    "lock_holder_of",
]

#: Version of the table layout written by this Phasewise.
SCHEMA_VERSION = 4

#: Page size of new ledgers (older files keep theirs).
PAGE_SIZE = 8192

#: SQLite ``application_id`` of a Phasewise ledger ("PhWL").
APPLICATION_ID = 0x5068574C

#: Verdict states, in the order the star list counts them.
VERDICT_STATUSES = ("unreviewed", "confirmed", "relabelled", "rejected", "deferred")

#: The star list's flags text of a star, in SQL: ``failed`` or ``not analysed``
#: first, then the result's flags, comma-separated ('' for none).
STAR_FLAGS_SQL = (
    "COALESCE("
    "(CASE WHEN COALESCE(r.failed, 0) THEN 'failed' WHEN r.star IS NULL THEN 'not analysed' END)"
    " || ',' || {flags}, "
    "(CASE WHEN COALESCE(r.failed, 0) THEN 'failed' WHEN r.star IS NULL THEN 'not analysed' END), "
    "{flags}, '')"
).format(
    flags="(SELECT group_concat(value, ',') FROM json_each("
    "CASE WHEN json_valid(r.flags) THEN r.flags ELSE '[]' END))"
)
#: Fields :meth:`Ledger.star_order` sorts by, and the SQL value of each (texts lower-cased).
STAR_ORDER_FIELDS = {
    "star_id": "lower(s.star_id)",
    "status": "lower(v.status)",
    "suggested_class": "lower(r.suggested_class)",
    "suggested_score": "r.suggested_score",
    "verdict_class": "lower(v.class_code)",
    "period": "COALESCE(v.period, r.period)",
    "amplitude": "r.amplitude",
    "fap": "r.fap",
    "flags": f"lower({STAR_FLAGS_SQL})",
}

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


def _dumps_plain(value: Any) -> str:
    """:func:`_dumps` of data that is plain JSON already (decoded from JSON): the same text."""
    return json.dumps(value, separators=(",", ":"), allow_nan=True)


def _loads(text: str | None) -> Any:
    return None if text is None else json.loads(text)


def _finite_or_none(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


#: Larger than any star key (SQLite rowids are signed 64-bit integers).
_MAX_KEY = 2**63 - 1


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
    damaged: bool = False  # the stored record failed its checksum; analyse the star again
    error_detail: str | None = None  # raw text of a failure, for debugging only


@dataclass(frozen=True)
class Verdict:
    """The person's decision on a star."""

    star_id: str
    status: str = "unreviewed"
    class_code: str | None = None
    period: float | None = None
    note: str | None = None
    decided_at: str | None = None
    final: dict[str, Any] | None = None  # the star's final numbers for this class and period

    def to_dict(self) -> dict[str, Any]:
        return {
            "status": self.status,
            "class_code": self.class_code,
            "period": self.period,
            "note": self.note,
            "decided_at": self.decided_at,
            "final": self.final,
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
    period_err: float | None = None  # of the analysis period
    mean_mag: float | None = None  # in the primary band
    primary_band: str | None = None


class PointRow(NamedTuple):
    """What the population diagrams read of one star (``Ledger.point_rows``)."""

    star_id: str
    status: str
    class_code: str | None
    period: float | None  # the verdict's period, when the person chose one
    has_final: bool  # the verdict has final numbers stored
    analysed: bool  # a result is stored and it did not fail
    result_point: dict[str, Any] | None  # core.diagrams.result_point_record of the result
    final_point: dict[str, Any] | None  # core.diagrams.final_point_record of the final numbers


class PointChunk(NamedTuple):
    """Parallel columns of a chunk of stars (``Ledger.point_columns``)."""

    star_ids: list[str]
    status: list[str]
    class_code: list[str | None]
    has_period: np.ndarray  # the person chose a period
    has_final: np.ndarray  # the verdict has final numbers stored
    analysed: np.ndarray  # a result is stored and it did not fail
    has_result_point: np.ndarray  # a diagram record of the result is stored
    has_final_point: np.ndarray  # a diagram record of the final numbers is stored
    result_plain: np.ndarray  # that record is plain JSON (its fields were read)
    final_plain: np.ndarray
    result_numbers: np.ndarray  # (stars, paths), NaN where missing
    final_numbers: np.ndarray
    result_texts: list[list[str | None]]  # one list per text path
    final_texts: list[list[str | None]]
    bands: tuple[str, ...] = ()  # bands of the band objects' numbers, in order
    new_bands: bool = False  # a record has a band not in ``bands`` (read again)


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


# Version 3: a checksum ("seal") on every stored record, verified on read and
# by ``ledger check``; the results table narrowed to the list's summary columns
# (the full result, compressed, in ``result_data``); the verdict's final
# numbers; an index of history rows by action (undo and redo cost the same at
# any history length); and the content sum kept up to date with every write,
# so the export's provenance checksum never reads the whole file.
_SCHEMA_V3_TABLES = """
CREATE TABLE results_v3 (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    settings_hash TEXT NOT NULL, computed_at TEXT NOT NULL,
    failed INTEGER NOT NULL DEFAULT 0, outdated INTEGER NOT NULL DEFAULT 0,
    status TEXT, suggested_class TEXT, suggested_score REAL, suggested_period REAL,
    period REAL, period_err REAL, amplitude REAL, fap REAL, mean_mag REAL,
    primary_band TEXT, flags TEXT, error TEXT, error_detail TEXT, seal BLOB
);
CREATE TABLE result_data (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    codec INTEGER, data BLOB NOT NULL
);
CREATE TABLE codecs (id INTEGER PRIMARY KEY, zdict BLOB NOT NULL);
CREATE TABLE finals (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    codec INTEGER, data BLOB NOT NULL
);
"""

#: Columns of ``results`` in the order they are sealed (after the star key).
_RESULT_COLUMNS = (
    "settings_hash, computed_at, failed, outdated, status, suggested_class, suggested_score, "
    "suggested_period, period, period_err, amplitude, fap, mean_mag, primary_band, flags, "
    "error, error_detail"
)
_PHOTOMETRY_SEALED = (
    "s.id, s.star_id, s.ra, s.dec, s.source_file, s.source_checksum, s.time_scale, "
    "s.has_errors, s.n_points, s.meta, p.time, p.mag, p.mag_err, p.bands, p.band_index, "
    "p.excluded"
)
_CONTENT_TABLES = ("photometry", "results", "verdicts")


def _migrate_2_to_3(conn: sqlite3.Connection) -> None:
    # one statement at a time: executescript() would commit the migration's transaction
    for statement in _SCHEMA_V3_TABLES.split(";"):
        if statement.strip():
            conn.execute(statement)
    for table in ("photometry", "verdicts", "history", "actions", "meta"):
        conn.execute(f"ALTER TABLE {table} ADD COLUMN seal BLOB")
    codec = _Codec(conn)
    rows = conn.execute(
        "SELECT star, settings_hash, computed_at, failed, outdated, error, result FROM results"
    ).fetchall()
    for star, settings_hash, computed_at, failed, outdated, error, text in rows:
        result = None if text is None else json.loads(text)
        summary = _summary(result) if result is not None and not failed else _EMPTY_SUMMARY
        values = (settings_hash, computed_at, failed, outdated, *summary, error, None)
        conn.execute(
            f"INSERT INTO results_v3(star, {_RESULT_COLUMNS}) VALUES ({', '.join('?' * 18)})",
            (star, *values),
        )
        if result is not None and not failed:
            text = _dumps(result)  # canonical form, as new results are written
            conn.execute(
                "INSERT INTO result_data(star, codec, data) VALUES (?, ?, ?)",
                (star, *codec.pack(text)),
            )
        else:
            text = None
        conn.execute(
            "UPDATE results_v3 SET seal = ? WHERE star = ?", (_seal(star, *values, text), star)
        )
    conn.execute("DROP TABLE results")
    conn.execute("ALTER TABLE results_v3 RENAME TO results")
    for key, *values in conn.execute(
        f"SELECT {_PHOTOMETRY_SEALED} FROM stars s JOIN photometry p ON p.star = s.id"
    ).fetchall():
        conn.execute("UPDATE photometry SET seal = ? WHERE star = ?", (_seal(key, *values), key))
    for row in conn.execute(
        "SELECT star, status, class_code, period, note, decided_at FROM verdicts"
    ).fetchall():
        conn.execute("UPDATE verdicts SET seal = ? WHERE star = ?", (_seal(*row, None), row[0]))
    for row in conn.execute(
        "SELECT id, action, at, star_id, what, old, new FROM history"
    ).fetchall():
        conn.execute("UPDATE history SET seal = ? WHERE id = ?", (_seal(*row[1:]), row[0]))
    for row in conn.execute("SELECT id, kind, label, at, target, state FROM actions").fetchall():
        conn.execute("UPDATE actions SET seal = ? WHERE id = ?", (_seal(*row[1:]), row[0]))
    conn.execute("CREATE INDEX history_action ON history(action)")
    conn.execute("CREATE INDEX verdicts_status ON verdicts(status)")
    total = 0
    for table in _CONTENT_TABLES:
        for star, seal in conn.execute(f"SELECT star, seal FROM {table}"):
            total = (total + _share(table, star, seal)) % _SUM_MODULUS
    conn.execute(
        "INSERT OR REPLACE INTO meta(key, value) VALUES ('content_sum', ?)", (f"{total:064x}",)
    )
    for key, value in conn.execute("SELECT key, value FROM meta").fetchall():
        conn.execute("UPDATE meta SET seal = ? WHERE key = ?", (_seal(key, value), key))


#: Migration steps: ``MIGRATIONS[v]`` turns a version-``v`` file into ``v + 1``.
# Version 4: the population diagrams' numbers of each result and of each
# verdict's final numbers, a few hundred bytes per star in their own table, so
# that drawing 10^5 stars never decodes a full result.  They are derived from
# the sealed records (``core.diagrams.result_point_record`` and
# ``final_point_record``), written in the same transaction, and compared with
# them by ``ledger check``.
def _migrate_3_to_4(conn: sqlite3.Connection) -> None:
    conn.execute(_POINTS_TABLE)
    codec = _Codec(conn)
    for star, codec_id, data in conn.execute(
        "SELECT r.star, d.codec, d.data FROM results r JOIN result_data d ON d.star = r.star "
        "WHERE NOT r.failed"
    ).fetchall():
        try:
            record = _result_point(json.loads(codec.unpack(codec_id, data)))
        except ValueError:
            record = None  # a damaged record: ledger check reports it; the view reads it alone
        conn.execute("INSERT INTO points(star, result_point) VALUES (?, ?)", (star, record))
    for star, codec_id, data in conn.execute("SELECT star, codec, data FROM finals").fetchall():
        try:
            record = _final_point(json.loads(codec.unpack(codec_id, data)))
        except ValueError:
            record = None
        conn.execute(
            "INSERT INTO points(star, final_point) VALUES (?, ?) "
            "ON CONFLICT(star) DO UPDATE SET final_point = excluded.final_point",
            (star, record),
        )


_POINTS_TABLE = """
CREATE TABLE points (
    star INTEGER PRIMARY KEY REFERENCES stars(id),
    result_point TEXT, final_point TEXT
)"""


def _result_point(result: Mapping[str, Any] | None) -> str | None:
    """The stored diagram record of a result (None for no result)."""
    if result is None:
        return None
    from .diagrams import result_point_record

    return _dumps(result_point_record(result))


def _final_point(final: Mapping[str, Any] | None) -> str | None:
    """The stored diagram record of a verdict's final numbers (None for none)."""
    if not final:
        return None
    from .diagrams import final_point_record

    return _dumps(final_point_record(final))


MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {
    1: _migrate_1_to_2,
    2: _migrate_2_to_3,
    3: _migrate_3_to_4,
}

_SUM_MODULUS = 1 << 256


def _seal(*values: Any) -> bytes:
    """A 16-byte checksum of one record's values, typed and length-prefixed.

    Numbers are sealed as float64 whatever their Python type, and NaN as
    NULL, because that is how SQLite gives them back.
    """
    digest = hashlib.blake2b(digest_size=16)
    for value in values:
        if value is None:
            digest.update(b"N")
        elif isinstance(value, (bytes, bytearray, memoryview)):
            data = bytes(value)
            digest.update(b"B" + len(data).to_bytes(8, "little") + data)
        elif isinstance(value, str):
            data = value.encode("utf-8", "surrogatepass")
            digest.update(b"S" + len(data).to_bytes(8, "little") + data)
        else:
            number = float(value)
            digest.update(b"N" if math.isnan(number) else b"F" + struct.pack("<d", number))
    return digest.digest()


def _share(table: str, star: int, seal: bytes | None) -> int:
    """One record's share of the content sum."""
    if seal is None:
        return 0
    data = table.encode() + int(star).to_bytes(8, "little", signed=True) + bytes(seal)
    return int.from_bytes(hashlib.blake2b(data, digest_size=32).digest(), "little")


class _Codec:
    """zlib with a preset dictionary stored in the file (data only, no pickle).

    The dictionary is the first result the ledger stores: every later result
    repeats its keys, class names and reason sentences, which then cost a
    few bytes each instead of their full text.
    """

    def __init__(self, conn: sqlite3.Connection) -> None:
        self.conn = conn
        self.zdicts: dict[int, bytes] = dict(conn.execute("SELECT id, zdict FROM codecs"))
        self._packers: dict[int, Any] = {}

    def pack(self, text: str) -> tuple[int | None, bytes]:
        data = text.encode("utf-8")
        if not self.zdicts:
            zdict = data[-32768:]
            self.conn.execute("INSERT INTO codecs(id, zdict) VALUES (1, ?)", (zdict,))
            self.zdicts[1] = zdict
        codec = max(self.zdicts)
        primed = self._packers.get(codec)
        if primed is None:
            primed = self._packers[codec] = zlib.compressobj(6, zdict=self.zdicts[codec])
        # a copy of a compressor primed with the dictionary: the same bytes,
        # without loading the dictionary again for every record
        packer = primed.copy()
        return codec, packer.compress(data) + packer.flush()

    def unpack(self, codec: int | None, data: bytes) -> str:
        """The stored text; raises ``ValueError`` if the bytes are damaged."""
        try:
            if codec is None:
                return zlib.decompress(data).decode("utf-8")
            unpacker = zlib.decompressobj(zdict=self.zdicts[codec])
            text = unpacker.decompress(data) + unpacker.flush()
            if not unpacker.eof:
                raise ValueError("truncated")
            return text.decode("utf-8")
        except (zlib.error, KeyError, UnicodeDecodeError) as exc:
            raise ValueError(str(exc)) from exc


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
    wal = Path(f"{path}-wal")
    live_wal = wal.exists() and wal.stat().st_size > 0
    # with a live WAL the pages beyond the file's end may still sit in the WAL
    # (a checkpoint stopped by a full disk): SQLite reads them from there
    if n_pages and valid_for == change_counter and size < n_pages * page_size and not live_wal:
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
        self._sum_delta = 0  # change of the content sum in the open transaction
        try:
            self._codec = _Codec(conn)
            self._load_ids()
        except (sqlite3.DatabaseError, LedgerError, UnicodeDecodeError) as exc:
            conn.close()
            self._conn = None
            if isinstance(exc, LedgerError):
                raise
            raise _damaged_file(exc, path) from None

    # ------------------------------------------------------------- opening
    @classmethod
    def create(cls, path: str | os.PathLike, *, overwrite: bool = False) -> Ledger:
        """Make a new, empty ledger file and open it for writing.

        With ``overwrite``, an existing ledger (not held by another process)
        is replaced by the new one only once the new one is complete.  To
        import into a replacement before it takes the old one's place, use
        :meth:`building`.
        """
        path = Path(path)
        cls._check_target(path, overwrite)
        temp = cls._new_file(path)
        try:
            cls._swap_in(temp, path)
        except BaseException:
            _unlink_ledger_files(temp)
            raise
        return cls.open(path)

    @classmethod
    @contextmanager
    def building(cls, path: str | os.PathLike, *, overwrite: bool = False) -> Iterator[Ledger]:
        """A new ledger built beside ``path``, moved into place only if the block succeeds.

        The block fills the ledger (an import, say).  If it raises, is
        interrupted, or the disk fills, the new file is removed and an
        existing ledger at ``path`` is left as it was, verdicts and all.  A
        process killed during the block leaves a hidden ``.NAME.*.building``
        file, which the next build of the same ledger removes.
        """
        path = Path(path)
        cls._check_target(path, overwrite)
        _remove_abandoned_builds(path)
        temp = cls._new_file(path)
        try:
            ledger = cls.open(temp)
        except BaseException:
            _unlink_ledger_files(temp)
            raise
        try:
            yield ledger
            ledger.close()
            if path.exists():
                cls._check_target(path, overwrite)  # nobody took it meanwhile
            cls._swap_in(temp, path)
        except BaseException:
            ledger.close()
            _unlink_ledger_files(temp)
            raise

    @classmethod
    def _check_target(cls, path: Path, overwrite: bool) -> None:
        if not path.exists():
            if not path.parent.is_dir():
                raise LedgerError("cannot create it: no such folder", file=path)
            if not os.access(path.parent, os.W_OK):
                raise LedgerError("cannot create it: the folder is not writable", file=path)
            return
        if not overwrite:
            raise LedgerError("a file of that name exists; choose another name", file=path)
        # refuses if another process holds it, it is damaged or read-only;
        # closing the last connection also folds its WAL into the file
        cls.open(path).close()

    @staticmethod
    def _new_file(path: Path) -> Path:
        """An empty ledger of the current schema under a hidden name beside ``path``."""
        try:
            handle, name = tempfile.mkstemp(
                prefix=f".{path.name}.", suffix=".building", dir=path.parent
            )
            os.close(handle)
            # mkstemp makes the file private; a ledger gets the usual mode
            mask = os.umask(0)
            os.umask(mask)
            os.chmod(name, 0o666 & ~mask)
        except OSError as exc:
            raise LedgerError(
                f"cannot create a file in its folder ({exc.strerror})", file=path
            ) from None
        temp = Path(name)
        try:
            conn = sqlite3.connect(temp, isolation_level=None)
            try:
                # 8 KiB pages: a star's photometry row (2.5 KB at 100 points) leaves
                # little of a page unused, where 4 KiB pages hold one row each
                conn.execute(f"PRAGMA page_size={PAGE_SIZE}")
                conn.execute(f"PRAGMA application_id={APPLICATION_ID}")
                conn.executescript("BEGIN;" + _SCHEMA_V1 + "COMMIT;")
                conn.execute("BEGIN IMMEDIATE")
                for version in range(1, SCHEMA_VERSION):
                    MIGRATIONS[version](conn)
                conn.execute(f"PRAGMA user_version={SCHEMA_VERSION}")
                facts = [("created_at", _now()), ("created_by", f"phasewise {__version__}")]
                conn.executemany(
                    "INSERT INTO meta(key, value, seal) VALUES (?, ?, ?)",
                    [(key, value, _seal(key, value)) for key, value in facts],
                )
                conn.execute("COMMIT")
                conn.execute("PRAGMA journal_mode=WAL")
            finally:
                conn.close()
        except (sqlite3.Error, OSError) as exc:
            _unlink_ledger_files(temp)
            raise LedgerError(
                "cannot create the ledger: " + _write_error(exc, path).reason, file=path
            ) from None
        return temp

    @staticmethod
    def _swap_in(temp: Path, path: Path) -> None:
        # side files of the old ledger must never meet the new one: a WAL
        # left beside it would be replayed into it
        try:
            for suffix in ("-wal", "-shm"):
                Path(f"{path}{suffix}").unlink(missing_ok=True)
            os.replace(temp, path)
        except OSError as exc:
            raise LedgerError(
                f"cannot put the new ledger in place ({exc.strerror})", file=path
            ) from None
        Path(f"{temp}-shm").unlink(missing_ok=True)

    @classmethod
    def open(
        cls,
        path: str | os.PathLike,
        readonly: bool = False,
        *,
        check: str = "none",
        take_over: LockHolder | None = None,
    ) -> Ledger:
        """Open a ledger.

        Parameters
        ----------
        path : path
        readonly : bool
            Read-only opens are allowed while another process writes.
        check : {"none", "quick", "full"}
            Only the header check (default: opening never reads the whole
            file; :meth:`check` and ``phasewise ledger check`` do), or also
            SQLite's ``quick_check`` or ``integrity_check``.
        take_over : LockHolder, optional
            Take the write lock from exactly this holder (as given by
            :func:`lock_holder_of`), which the person has confirmed is gone:
            a process on another machine (a crashed container, a copied
            file) cannot be checked from here.  The take-over is written to
            the history.  A live process on this machine is never overruled.

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
        version = cls._readable_version(path, check)
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
            try:
                conn = _connect(_reader_uri(path), uri=True, check_same_thread=False)
            except sqlite3.Error as exc:
                raise LedgerError(f"cannot open it read-only: {exc}", file=path) from None
            conn.isolation_level = None
            return cls(path, conn, readonly=True)
        if not _writable(path):
            raise LedgerError(
                "the ledger is read-only here (the file or its folder is not writable): "
                "it can be read (info, history, export) but not changed; copy it to a "
                "writable folder to change it",
                file=path,
            )
        try:
            conn = _connect(path, isolation_level=None, check_same_thread=False, timeout=10)
            conn.execute("PRAGMA journal_mode=WAL")
            conn.execute("PRAGMA synchronous=FULL")
            conn.execute("PRAGMA foreign_keys=ON")
            token = cls._take_lock(conn, path, take_over)
        except sqlite3.Error as exc:
            raise _write_error(exc, path) from None
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

    @classmethod
    def schema_version(cls, path: str | os.PathLike) -> int:
        """The schema version of the ledger at ``path``, read without changing it."""
        return cls._readable_version(Path(path), "none")

    @classmethod
    def _readable_version(cls, path: Path, check: str) -> int:
        """The schema version of a file that looks like a ledger (header, then ``check``)."""
        if not path.is_file():
            raise LedgerError("no such ledger file", file=path)
        problem = _header_problem(path)
        if problem:
            raise LedgerError(problem, file=path)
        return cls._check_readonly(path, check)

    @staticmethod
    def _check_readonly(path: Path, check: str) -> int:
        """Check the file on a read-only connection; return its schema version."""
        pragma = {"quick": "quick_check", "full": "integrity_check", "none": None}
        if check not in pragma:
            raise LedgerError(f"unknown check {check!r}; expected quick, full or none")
        side_files = [Path(f"{path}{s}") for s in ("-wal", "-shm")]
        existed = [p.exists() for p in side_files]
        try:
            conn = _connect(_reader_uri(path), uri=True)
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
        except (sqlite3.DatabaseError, UnicodeDecodeError) as exc:
            conn.close()
            _remove_new_side_files(side_files, existed)
            raise _damaged_file(exc, path) from None
        except LedgerError:
            conn.close()
            _remove_new_side_files(side_files, existed)
            raise
        conn.close()
        return int(version)

    @staticmethod
    def _live_holder(
        conn: sqlite3.Connection, path: Path, take_over: LockHolder | None = None
    ) -> LockHolder | None:
        """Raise :class:`LedgerLockedError` naming the holder if a live process holds the lock.

        Returns the holder whose lock is taken over (None if there was none
        or it was a dead process of this host).
        """
        row = conn.execute(
            "SELECT pid, host, since, program, token FROM lock WHERE id = 1"
        ).fetchone()
        if row is None:
            return None
        holder = LockHolder(int(row[0]), row[1], row[2], row[3])
        started = row[4].partition("/")[2]
        here = holder.host == socket.gethostname()
        if take_over is not None and holder == take_over and not here:
            return holder
        if not here or _holder_alive(holder.pid, started):
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            conn.close()
            where = (
                ""
                if here
                else " (another machine: cannot check it; if that process is gone, "
                "take the lock over with 'phasewise ledger unlock')"
            )
            raise LedgerLockedError(
                f"held for writing by {holder.describe()}{where}; "
                "close it there, or open this ledger read-only",
                file=path,
            )
        # the holder died without closing: its lock is stale, to be taken over
        return holder

    @staticmethod
    def _take_lock(
        conn: sqlite3.Connection, path: Path, take_over: LockHolder | None = None
    ) -> str:
        # the token carries the process start time, so a reused pid is not mistaken
        # for the holder
        token = f"{uuid.uuid4().hex}/{_process_start(os.getpid()) or ''}"
        # a read first (in WAL mode it never waits for a writer): a live holder is
        # named at once, not after waiting for a write lock it keeps taking
        Ledger._live_holder(conn, path, take_over)
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            conn.close()
            raise LedgerLockedError(
                f"another process is writing to it and did not finish within 10 s ({exc})",
                file=path,
            ) from exc
        try:
            # again, inside the transaction: it may have changed
            previous = Ledger._live_holder(conn, path, take_over)
            mine = LockHolder(os.getpid(), socket.gethostname(), _now(), f"phasewise {__version__}")
            conn.execute(
                "INSERT OR REPLACE INTO lock(id, token, pid, host, since, program) "
                "VALUES (1, ?, ?, ?, ?, ?)",
                (token, mine.pid, mine.host, mine.since, mine.program),
            )
            if take_over is not None and previous == take_over:
                _record_take_over(conn, previous, mine)
            conn.execute("COMMIT")
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise
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
            try:
                cursor = self._conn.execute(sql, tuple(params))
                return _Rows(cursor.fetchall(), cursor.lastrowid)
            except sqlite3.OperationalError as exc:
                raise _write_error(exc, self.path) from None
            except (sqlite3.DatabaseError, UnicodeDecodeError) as exc:
                raise _damaged_file(exc, self.path) from None

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
        # one JSON array per column, not a row object per star: opening a survey
        # of 10^5 stars reads its ids in a few tens of milliseconds
        ordered = "FROM (SELECT id, star_id FROM stars ORDER BY id)"
        first, last, n = self._query("SELECT min(id), max(id), count(*) FROM stars").fetchone()
        order = json.loads(self._query(f"SELECT json_group_array(star_id) {ordered}").fetchone()[0])
        if n and last - first + 1 == n:
            keys: Iterable[int] = range(first, last + 1)  # no star was ever deleted
        else:
            keys = json.loads(self._query(f"SELECT json_group_array(id) {ordered}").fetchone()[0])
        self._ids = dict(zip(order, keys, strict=True))
        self._order = order

    def _key(self, star_id: str) -> int:
        try:
            return self._ids[str(star_id)]
        except KeyError:
            raise LedgerError(f"no star {star_id!r} in this ledger", file=self.path) from None

    def _new_action(self, kind: str, label: str, target: int | None = None) -> int:
        return self._new_action_at(kind, label, target)[0]

    def _new_action_at(self, kind: str, label: str, target: int | None = None) -> tuple[int, str]:
        """Append an action; returns its id and time."""
        state = "done" if kind == "do" else None
        if kind == "do":
            # a new action makes every undone action unreachable for redo
            for (action_id,) in self._query("SELECT id FROM actions WHERE state = 'undone'"):
                self._set_action_state(action_id, "dropped")
        values = (kind, label, _now(), target, state)
        cursor = self._query(
            "INSERT INTO actions(kind, label, at, target, state, seal) VALUES (?, ?, ?, ?, ?, ?)",
            (*values, _seal(*values)),
        )
        return int(cursor.lastrowid), values[2]

    def _set_action_state(
        self, action_id: int, state: str, known: tuple[Any, ...] | None = None
    ) -> None:
        """Change an action's state; ``known``: its (kind, label, at, target), already read."""
        kind, label, at, target = (
            known
            or self._query(
                "SELECT kind, label, at, target FROM actions WHERE id = ?", (action_id,)
            ).fetchone()
        )
        self._query(
            "UPDATE actions SET state = ?, seal = ? WHERE id = ?",
            (state, _seal(kind, label, at, target, state), action_id),
        )

    def _log(self, action: int, star_id: str | None, what: str, old: Any, new: Any) -> None:
        self._log_texts(action, star_id, what, _dumps(old), _dumps(new))

    def _log_texts(
        self, action: int, star_id: str | None, what: str, old: str | None, new: str | None
    ) -> tuple[int, str]:
        """Append a history row of values already in JSON; returns its id and time."""
        values = (action, _now(), star_id, what, old, new)
        cursor = self._query(
            "INSERT INTO history(action, at, star_id, what, old, new, seal) "
            "VALUES (?, ?, ?, ?, ?, ?, ?)",
            (*values, _seal(*values)),
        )
        return int(cursor.lastrowid), values[1]

    def _account(self, table: str, key: int, old: bytes | None, new: bytes | None) -> None:
        """Keep the content sum up to date when a record's seal changes."""
        self._sum_delta += _share(table, key, new) - _share(table, key, old)

    def _flush_sum(self) -> None:
        """Write the content sum changed by this transaction (called before COMMIT)."""
        if not self._sum_delta:
            return
        total = (self._content_sum() + self._sum_delta) % _SUM_MODULUS
        self._sum_delta = 0
        self._put_meta("content_sum", f"{total:064x}")

    def _content_sum(self) -> int:
        row = self._query("SELECT value, seal FROM meta WHERE key = 'content_sum'").fetchone()
        if row is None:
            return 0
        if _seal("content_sum", row[0]) != row[1]:
            raise self._damaged(None, "content checksum")
        return int(row[0], 16)

    def _put_meta(self, key: str, value: str) -> None:
        self._query(
            "INSERT OR REPLACE INTO meta(key, value, seal) VALUES (?, ?, ?)",
            (key, value, _seal(key, value)),
        )

    def _damaged(self, star_id: str | None, what: str) -> LedgerError:
        where = f"star {star_id!r}: " if star_id is not None else ""
        return LedgerError(
            f"{where}the stored {what} is damaged (its checksum does not match); "
            "run 'phasewise ledger check' on this ledger and restore it from a copy",
            file=self.path,
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
        star_row = (
            lc.star_id,
            lc.meta.ra,
            lc.meta.dec,
            source or lc.meta.source_file,
            checksum,
            lc.time_scale,
            int(lc.has_errors),
            lc.n_points,
            _dumps(meta),
        )
        cursor = self._query(
            "INSERT INTO stars(star_id, ra, dec, source_file, source_checksum, time_scale, "
            "has_errors, n_points, meta) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            star_row,
        )
        key = cursor.lastrowid
        names, index = np.unique(lc.band.astype(str), return_inverse=True)
        band_index = None
        if names.size > 1:
            dtype = np.uint8 if names.size < 256 else np.uint32
            band_index = index.astype(dtype).tobytes()
        excluded = lc.excluded.astype(np.uint8).tobytes() if lc.excluded.any() else None
        arrays = (
            np.ascontiguousarray(lc.time, dtype="<f8").tobytes(),
            np.ascontiguousarray(lc.mag, dtype="<f8").tobytes(),
            np.ascontiguousarray(lc.mag_err, dtype="<f8").tobytes(),
            json.dumps([str(n) for n in names]),
            band_index,
            excluded,
        )
        seal = _seal(key, *star_row, *arrays)
        self._query(
            "INSERT INTO photometry(star, time, mag, mag_err, bands, band_index, excluded, seal) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
            (key, *arrays, seal),
        )
        self._account("photometry", key, None, seal)
        self._apply_verdict(Verdict(lc.star_id, "unreviewed"), key=key, new=True)

    def lightcurve(self, star_id: str) -> LightCurve:
        """The star's photometry with its stored exclusion mask."""
        row = self._photometry_row(star_id)
        time_scale, has_errors, n, meta, time, mag, err, bands, band_index, excluded = row[5:]
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
            excluded=_mask(excluded, n),
            meta=StarMeta(
                ra=meta.get("ra"),
                dec=meta.get("dec"),
                source_file=meta.get("source_file"),
                columns=dict(meta.get("columns") or {}),
                notes=tuple(meta.get("notes") or ()),
            ),
            has_errors=bool(has_errors),
        )

    def _photometry_row(self, star_id: str) -> tuple[Any, ...]:
        """The star's sealed photometry values (after the key), checked against the seal."""
        key = self._key(star_id)
        row = self._query(
            f"SELECT {_PHOTOMETRY_SEALED}, p.seal FROM stars s JOIN photometry p "
            "ON p.star = s.id WHERE s.id = ?",
            (key,),
        ).fetchone()
        if row is None or _seal(*row[:-1]) != row[-1]:
            raise self._damaged(star_id, "photometry")
        return row[1:-1]

    def _reseal_photometry(self, key: int) -> None:
        row = self._query(
            f"SELECT {_PHOTOMETRY_SEALED}, p.seal FROM stars s JOIN photometry p "
            "ON p.star = s.id WHERE s.id = ?",
            (key,),
        ).fetchone()
        seal = _seal(*row[:-1])
        self._query("UPDATE photometry SET seal = ? WHERE star = ?", (seal, key))
        self._account("photometry", key, row[-1], seal)

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
        row = self._photometry_row(star_id)
        return _mask(row[-1], row[7])

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
        self._reseal_photometry(key)
        if self._query("SELECT outdated FROM results WHERE star = ?", (key,)).fetchone() == (0,):
            record = self._result_record(key)
            if record is not None and record[2]:  # a damaged result is never sealed over
                self._query("UPDATE results SET outdated = 1 WHERE star = ?", (key,))
                self._reseal_result(key)

    # ------------------------------------------------------------ analysis
    def set_analysis_settings(self, settings: Mapping[str, Any], settings_hash: str) -> None:
        """Record the current analysis settings; results of other settings become stale."""
        old = self.analysis_settings()
        new_value = {"settings": _plain(dict(settings)), "settings_hash": str(settings_hash)}
        if old is not None and old[1] == str(settings_hash):
            return
        with self._mutex, self._write("settings"):
            self._put_meta("analysis_settings", _dumps(new_value))
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
        row = self._query("SELECT value, seal FROM meta WHERE key = 'analysis_settings'").fetchone()
        if row is None:
            return None
        if _seal("analysis_settings", row[0]) != row[1]:
            raise self._damaged(None, "analysis settings")
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
        now = _now()
        items = list(items)
        with self._mutex, self._write("results") as tx:
            tx.star_ids = [str(item[0]) for item in items]
            for star_id, settings_hash, result in items:
                values = (str(settings_hash), now, 0, 0, *_summary(result), None, None)
                self._put_result(self._key(star_id), values, _dumps(result), _result_point(result))
        return len(items)

    def store_failures(self, items: Iterable[tuple[str, ...]]) -> int:
        """Record failed analyses in one transaction; returns how many.

        ``items`` are ``(star_id, settings_hash, message)`` or
        ``(star_id, settings_hash, message, detail)``: the message is a
        sentence for the person, the detail (raw error text) is kept for
        debugging only.
        """
        now = _now()
        items = list(items)
        with self._mutex, self._write("results") as tx:
            tx.star_ids = [str(item[0]) for item in items]
            for star_id, settings_hash, message, *detail in items:
                extra = str(detail[0]) if detail and detail[0] is not None else None
                values = (str(settings_hash), now, 1, 0, *_EMPTY_SUMMARY, str(message), extra)
                self._put_result(self._key(star_id), values, None)
        return len(items)

    def store_failure(
        self, star_id: str, settings_hash: str, message: str, detail: str | None = None
    ) -> None:
        """Record that the analysis of a star failed, with its message."""
        self.store_failures([(star_id, settings_hash, message, detail)])

    def _put_result(
        self, key: int, values: tuple[Any, ...], text: str | None, point: str | None = None
    ) -> None:
        old = self._query("SELECT seal FROM results WHERE star = ?", (key,)).fetchone()
        seal = _seal(key, *values, text)
        self._query(
            f"INSERT OR REPLACE INTO results(star, {_RESULT_COLUMNS}, seal) "
            f"VALUES ({', '.join('?' * 19)})",
            (key, *values, seal),
        )
        if text is None:
            self._query("DELETE FROM result_data WHERE star = ?", (key,))
        else:
            self._query(
                "INSERT OR REPLACE INTO result_data(star, codec, data) VALUES (?, ?, ?)",
                (key, *self._codec.pack(text)),
            )
        self._put_point(key, "result_point", point)
        self._account("results", key, None if old is None else old[0], seal)

    def _put_point(self, key: int, column: str, record: str | None) -> None:
        self._query(
            f"INSERT INTO points(star, {column}) VALUES (?, ?) "
            f"ON CONFLICT(star) DO UPDATE SET {column} = excluded.{column}",
            (key, record),
        )

    def _result_record(self, key: int) -> tuple[tuple[Any, ...], str | None, bool] | None:
        """``(values, result_text, intact)`` of a stored result, or None."""
        records = self._result_records("WHERE r.star = ?", (key,))
        return records[0][1:] if records else None

    def _result_records(
        self, where: str, params: tuple[Any, ...]
    ) -> list[tuple[int, tuple[Any, ...], str | None, bool]]:
        """``(key, values, result_text, intact)`` of the stored results ``where`` selects."""
        out = []
        for row in self._query(
            f"SELECT r.star, {_RESULT_COLUMNS}, r.seal, d.codec, d.data FROM results r "
            f"LEFT JOIN result_data d ON d.star = r.star {where} ORDER BY r.star",
            params,
        ):
            key, values, seal, codec, data = row[0], row[1:18], row[18], row[19], row[20]
            text = None
            intact = True
            if data is not None:
                try:
                    text = self._codec.unpack(codec, data)
                except ValueError:
                    intact = False
            out.append((key, values, text, intact and _seal(key, *values, text) == seal))
        return out

    def _reseal_result(self, key: int) -> None:
        record = self._result_record(key)
        old = self._query("SELECT seal FROM results WHERE star = ?", (key,)).fetchone()[0]
        seal = _seal(key, *record[0], record[1])
        self._query("UPDATE results SET seal = ? WHERE star = ?", (seal, key))
        self._account("results", key, old, seal)

    def result(self, star_id: str) -> StoredResult | None:
        """The stored result of a star (None if never analysed).

        A record that fails its checksum comes back as a failed, damaged
        result (``damaged=True``, no numbers): that star needs analysing
        again, and the rest of the ledger is unaffected.
        """
        record = self._result_record(self._key(star_id))
        if record is None:
            return None
        return self._stored_result(str(star_id), *record, current=self.settings_hash)

    def results_of(self, star_ids: Sequence[str]) -> dict[str, StoredResult]:
        """The stored results of several stars, read with one query per 500 stars.

        Equal to :meth:`result` star by star (a damaged record comes back
        damaged, a star never analysed is absent from the mapping); used
        where many stars' results are read in turn, as by the export.
        """
        keys = {self._key(s): str(s) for s in star_ids}
        out: dict[str, StoredResult] = {}
        ordered = sorted(keys)
        current = self.settings_hash
        for k in range(0, len(ordered), 500):
            part = ordered[k : k + 500]
            where = f"WHERE r.star IN ({','.join('?' * len(part))})"
            for key, values, text, intact in self._result_records(where, tuple(part)):
                out[keys[key]] = self._stored_result(
                    keys[key], values, text, intact, current=current
                )
        return out

    @staticmethod
    def _stored_result(
        star_id: str,
        values: tuple[Any, ...],
        text: str | None,
        intact: bool,
        *,
        current: str | None,
    ) -> StoredResult:
        settings_hash, computed_at, failed, outdated = values[:4]
        error = values[15]
        stale = bool(outdated) or (current is not None and settings_hash != current)
        if not intact:
            return StoredResult(
                star_id=star_id,
                result=None,
                settings_hash=str(settings_hash),
                computed_at=str(computed_at),
                stale=True,
                failed=True,
                error="the stored result is damaged (its checksum does not match); "
                "analyse this star again",
                damaged=True,
            )
        return StoredResult(
            star_id=star_id,
            result=_loads(text),
            settings_hash=settings_hash,
            computed_at=computed_at,
            stale=stale,
            failed=bool(failed),
            error=error,
            error_detail=values[16],
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
        """The star's current verdict (checked against its seal)."""
        return self._verdicts("WHERE v.star = ?", (self._key(star_id),))[0]

    def verdicts(self) -> list[Verdict]:
        """Every star's verdict, in import order.

        Raises :class:`LedgerError` naming the star if a verdict record is
        damaged: a decision is never guessed.
        """
        return self._verdicts("", ())

    def verdict_chunks(
        self, chunk: int = 2000, *, start: int = 0, stop: int | None = None
    ) -> Iterator[list[tuple[Verdict, dict[str, Any]]]]:
        """Every star's verdict (with its final numbers) and info, in import order, in chunks.

        Each chunk holds at most ``chunk`` stars as ``(verdict, star_info)``
        pairs, equal to :meth:`verdict` and :meth:`star_info` star by star
        but read with two queries per chunk, so a 100,000-star export keeps
        one chunk of final numbers in memory.  Seals are checked as
        :meth:`verdict` checks them: a damaged record raises
        :class:`LedgerError` naming its star.  ``start`` and ``stop`` select
        the stars at those import positions (as a slice does).
        """
        if chunk < 1:
            raise LedgerError(f"got chunk={chunk}; expected at least 1", field="chunk")
        keys = ("ra", "dec", "source_file", "source_checksum", "time_scale", "n_points")
        last, end = self._position_keys(start, stop)
        while True:
            verdicts = self._verdicts("WHERE v.star > ? AND v.star <= ?", (last, end), limit=chunk)
            if not verdicts:
                return
            first, last = self._key(verdicts[0].star_id), self._key(verdicts[-1].star_id)
            infos = {
                row[0]: {"star_id": str(row[0]), **dict(zip(keys, row[1:], strict=True))}
                for row in self._query(
                    "SELECT star_id, ra, dec, source_file, source_checksum, time_scale, n_points "
                    "FROM stars WHERE id BETWEEN ? AND ?",
                    (first, last),
                )
            }
            yield [(v, infos[v.star_id]) for v in verdicts]

    def _verdicts(
        self, where: str, params: tuple[Any, ...], limit: int | None = None
    ) -> list[Verdict]:
        rows = self._query(
            "SELECT v.star, s.star_id, v.status, v.class_code, v.period, v.note, v.decided_at, "
            "v.seal, f.codec, f.data FROM verdicts v JOIN stars s ON s.id = v.star "
            f"LEFT JOIN finals f ON f.star = v.star {where} ORDER BY v.star"
            + ("" if limit is None else f" LIMIT {int(limit)}"),
            params,
        )
        out = []
        for key, star_id, status, class_code, period, note, decided_at, seal, codec, data in rows:
            text = self._sealed_final_text(
                key, star_id, (status, class_code, period, note, decided_at), seal, codec, data
            )
            out.append(Verdict(star_id, status, class_code, period, note, decided_at, _loads(text)))
        return out

    def _sealed_final_text(self, key, star_id, fields, seal, codec, data) -> str | None:
        """A verdict's final numbers as stored text, its seal checked (damage named)."""
        try:
            text = None if data is None else self._codec.unpack(codec, data)
        except ValueError:
            raise self._damaged(star_id, "verdict") from None
        if _seal(key, *fields, text) != seal:
            raise self._damaged(star_id, "verdict")
        return text

    def _verdict_seal(self, key: int, star_id: str) -> bytes:
        """The seal of a star's verdict record, checked (as :meth:`verdict` checks it)."""
        row = self._query(
            "SELECT v.status, v.class_code, v.period, v.note, v.decided_at, v.seal, f.codec, "
            "f.data FROM verdicts v LEFT JOIN finals f ON f.star = v.star WHERE v.star = ?",
            (key,),
        ).fetchone()
        *fields, seal, codec, data = row
        self._sealed_final_text(key, star_id, fields, seal, codec, data)
        return seal

    def set_verdict(
        self,
        star_id: str,
        status: str,
        *,
        class_code: str | None = None,
        period: float | None = None,
        note: str | None = None,
        final: Mapping[str, Any] | None = None,
    ) -> Verdict:
        """Record a verdict (with its final numbers, if given); committed, undoable."""
        return self.set_verdicts([(star_id, status, class_code, period, note, final)])[0]

    def set_verdicts(
        self,
        items: Iterable[tuple[Any, ...]],
        *,
        label: str | None = None,
    ) -> list[Verdict]:
        """Several verdicts as one action.

        ``items`` are ``(star_id, status, class_code, period, note)`` or
        ``(star_id, status, class_code, period, note, final)``; ``final`` is a
        JSON-able dict of the star's final numbers, stored in the same
        transaction and restored by undo and redo.
        """
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

    def set_finals(
        self, items: Iterable[tuple[str, Mapping[str, Any] | None]], *, label: str | None = None
    ) -> list[Verdict]:
        """Replace the final numbers of verdicts, keeping the decisions, as one action.

        ``items`` are ``(star_id, final)``.  Status, class, period, note and
        the time of the decision stay as the person left them (new numbers
        after a re-analysis are not a new decision); undo restores the old
        numbers.
        """
        items = [(str(s), f) for s, f in items]
        if not items:
            return []
        with self._mutex, self._write("verdict") as tx:
            tx.star_ids = [s for s, _ in items]
            action = self._new_action("do", label or f"final numbers of {len(items)} verdict(s)")
            out = []
            for star_id, final in items:
                old = self.verdict(star_id)
                checked = self._checked_verdict(
                    star_id, old.status, old.class_code, old.period, old.note, final
                )
                new = replace(checked, decided_at=old.decided_at)
                self._apply_verdict(new)
                self._log(action, star_id, "verdict", old.to_dict(), new.to_dict())
                out.append(new)
        return out

    def _checked_verdict(
        self,
        star_id: str,
        status: str,
        class_code: str | None = None,
        period: float | None = None,
        note: str | None = None,
        final: Mapping[str, Any] | None = None,
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
        if final is not None and not isinstance(final, Mapping):
            raise LedgerError(
                f"star {star_id!r}: final numbers must be a mapping, got {type(final).__name__}",
                file=self.path,
                field="final",
            )
        final = None if final is None else _loads(_dumps(dict(final)))  # plain JSON data
        decided_at = None if status == "unreviewed" else _now()
        return Verdict(star_id, status, class_code, period, note or None, decided_at, final)

    def _apply_verdict(
        self,
        verdict: Verdict,
        *,
        key: int | None = None,
        new: bool = False,
        plain: bool = False,
        old_seal: bytes | None = None,
    ) -> None:
        key = self._key(verdict.star_id) if key is None else key
        dumps = _dumps_plain if plain else _dumps
        text = None if verdict.final is None else dumps(verdict.final)
        values = (verdict.status, verdict.class_code, verdict.period, verdict.note)
        seal = _seal(key, *values, verdict.decided_at, text)
        old = old_seal
        if not new and old is None:
            old = self._query("SELECT seal FROM verdicts WHERE star = ?", (key,)).fetchone()[0]
        self._query(
            "INSERT OR REPLACE INTO verdicts(star, status, class_code, period, note, decided_at, "
            "seal) VALUES (?, ?, ?, ?, ?, ?, ?)",
            (key, *values, verdict.decided_at, seal),
        )
        if text is None:
            if not new:
                self._query("DELETE FROM finals WHERE star = ?", (key,))
        else:
            self._query(
                "INSERT OR REPLACE INTO finals(star, codec, data) VALUES (?, ?, ?)",
                (key, *self._codec.pack(text)),
            )
        if text is not None or not new:
            self._put_point(key, "final_point", _final_point(verdict.final))
        self._account("verdicts", key, old, seal)

    def status_counts(self) -> dict[str, int]:
        """Number of stars in each verdict state."""
        counts = dict.fromkeys(VERDICT_STATUSES, 0)
        for status, n in self._query("SELECT status, COUNT(*) FROM verdicts GROUP BY status"):
            counts[status] = n
        return counts

    # ------------------------------------------------------------ the list
    def star_rows(self, start: int = 0, stop: int | None = None) -> list[StarRow]:
        """Every star's list line, in import order, from one query.

        ``start`` and ``stop`` select the stars at those import positions
        (as a slice does).
        """
        if start <= 0 and stop is None:
            return self._star_rows("", ())
        last, end = self._position_keys(start, stop)
        return self._star_rows("WHERE s.id > ? AND s.id <= ?", (last, end))

    def _position_keys(self, start: int, stop: int | None) -> tuple[int, int]:
        """Star keys ``(after, upto)`` that select import positions ``start:stop``."""
        if start < 0 or (stop is not None and stop < 0):
            raise LedgerError(
                f"got start={start}, stop={stop}; expected positions from 0", field="start"
            )

        def key_before(position: int) -> int:
            # the key of the star at ``position - 1`` (0 before the first star; star
            # keys are SQLite rowids, from 1), or the largest key past the end
            if position <= 0:
                return 0
            row = self._query(
                "SELECT id FROM stars ORDER BY id LIMIT 1 OFFSET ?", (position - 1,)
            ).fetchone()
            if row is None:
                row = self._query("SELECT COALESCE(MAX(id), 0) FROM stars").fetchone()
            return int(row[0])

        after = key_before(start)
        upto = _MAX_KEY if stop is None else key_before(stop)
        return after, max(after, upto)

    def point_rows(self, chunk: int = 5000) -> Iterator[PointRow]:
        """Every star's diagram records and verdict, in import order.

        Read ``chunk`` stars per query, so that only one chunk's records are
        held besides what the caller keeps.  The records are derived from the
        sealed result and final numbers when those are written (``ledger
        check`` compares them); a star whose result failed or was never made
        has ``analysed=False``.
        """
        last = 0  # star keys are SQLite rowids, from 1
        while True:
            # the records come as bytes (no text conversion per value) and each
            # chunk's are decoded by one JSON call
            rows = self._query(
                "SELECT s.id, s.star_id, v.status, v.class_code, v.period, f.star IS NOT NULL, "
                "r.star IS NOT NULL AND NOT r.failed, CAST(COALESCE(p.result_point, 'null') AS BLOB), "
                "CAST(COALESCE(p.final_point, 'null') AS BLOB) "
                "FROM stars s JOIN verdicts v ON v.star = s.id "
                "LEFT JOIN results r ON r.star = s.id LEFT JOIN finals f ON f.star = s.id "
                "LEFT JOIN points p ON p.star = s.id WHERE s.id > ? ORDER BY s.id LIMIT ?",
                (last, int(chunk)),
            ).fetchall()
            if not rows:
                return
            last = rows[-1][0]
            records = _json_records([record for row in rows for record in row[7:]])
            for k, (_, star_id, status, code, period, has_final, analysed, _p, _f) in enumerate(
                rows
            ):
                yield PointRow(
                    star_id,
                    status,
                    code,
                    period,
                    bool(has_final),
                    bool(analysed),
                    records[2 * k],
                    records[2 * k + 1],
                )

    def point_columns(
        self,
        result_numbers: Sequence[str],
        final_numbers: Sequence[str],
        result_texts: Sequence[str] = (),
        final_texts: Sequence[str] = (),
        *,
        band_maps: Sequence[str] = (),
        chunk: int = 5000,
    ) -> Iterator[PointChunk]:
        """Every star's verdict and chosen fields of its diagram records, as columns.

        The fields are JSON paths (``"$.period"``) into the records of the
        result (``core.diagrams.result_point_record``) and of the verdict's
        final numbers (``final_point_record``); ``band_maps`` names objects of
        both records keyed by band (``"amplitude_by_band"``), whose numbers
        come after the others, band by band (``PointChunk.bands``).  SQLite's
        JSON functions pick the numbers out in C as the text Python wrote, and
        each chunk's are decoded by one JSON call: no Python object is made
        per record.  A missing or null field is NaN (numbers) or None (texts).
        A record that is not plain JSON (a NaN written by Python, or damage)
        comes back with ``*_plain`` False and its fields missing: read that
        star in full.  ``chunk`` stars are read per query.  Raises ValueError
        for a band name a JSON path cannot hold (with ``"`` or ``\\``).
        """
        bands: list[str] = []
        last = 0  # star keys are SQLite rowids, from 1
        while True:
            paths = [f'$.{m}."{b}"' for m in band_maps for b in bands]
            rows = self._point_chunk(
                (*result_numbers, *paths),
                (*final_numbers, *paths),
                result_texts,
                final_texts,
                band_maps,
                bands,
                last,
                chunk,
            )
            if not rows:
                return
            columns = self._point_chunk_columns(
                rows,
                len(result_numbers) + len(paths),
                len(final_numbers) + len(paths),
                len(result_texts),
                len(final_texts),
                tuple(bands),
            )
            if columns.new_bands:
                # a band none of the chunks before had: find this chunk's and read it again
                found = self._point_bands(band_maps, last, rows[-1][0])
                if found <= set(bands) or any('"' in b or "\\" in b for b in found):
                    raise ValueError(f"band names a JSON path cannot hold: {sorted(found)!r}")
                bands = sorted(set(bands) | set(found))
                continue
            last = rows[-1][0]
            yield columns

    def _point_bands(self, maps: Sequence[str], after: int, upto: int) -> set[str]:
        """Keys of the named objects of the diagram records of stars ``after < key <= upto``."""
        found: set[str] = set()
        for column in ("result_point", "final_point"):
            for name in maps:
                found.update(
                    str(row[0])
                    for row in self._query(
                        f"SELECT DISTINCT j.key FROM points p, json_each(p.{column}, ?) j "
                        f"WHERE p.star > ? AND p.star <= ? AND json_valid(p.{column})",
                        (f"$.{name}", after, upto),
                    ).fetchall()
                )
        return found

    def _point_chunk(
        self,
        result_numbers: Sequence[str],
        final_numbers: Sequence[str],
        result_texts: Sequence[str],
        final_texts: Sequence[str],
        band_maps: Sequence[str],
        bands: Sequence[str],
        after: int,
        chunk: int,
    ) -> list[tuple[Any, ...]]:
        """The rows of one chunk of :meth:`point_columns`: ``(key, flags, numbers
        of the result, of the final numbers, texts)``, the last three as the
        comma-separated JSON values of each.  Records that are not plain JSON
        are looked for only when SQLite finds one (then a second query)."""
        remove = "".join(", ?" for _ in bands)
        band_params = [p for name in band_maps for p in (f"$.{name}", *(f'$."{b}"' for b in bands))]
        for guarded in (False, True):

            def plain(column: str, expression: str, guarded: bool = guarded) -> str:
                return (
                    f"CASE WHEN json_valid(p.{column}) THEN {expression} END"
                    if guarded
                    else expression
                )

            def unknown_bands(column: str) -> str:
                # the band objects less the known bands: anything left is a new band
                tests = [
                    f"COALESCE(json_remove(p.{column} -> ?{remove}), '{{}}') <> '{{}}'"
                    for _ in band_maps
                ]
                return plain(column, "(" + (" OR ".join(tests) or "0") + ")")

            def numbers(column: str, paths: Sequence[str]) -> str:
                # the numbers' paths, then the texts': one JSON call per record
                extract = f"json_extract(p.{column}, {', '.join('?' * len(paths))})"
                return f"CAST(trim({plain(column, extract)}, '[]') AS BLOB)"

            text_array = ", ".join(
                [
                    "s.star_id",
                    "v.status",
                    "v.class_code",
                ]
            )
            flags = " | ".join(
                f"(({test}) << {bit})"
                for bit, test in enumerate(
                    (
                        "v.period IS NOT NULL",
                        "f.star IS NOT NULL",
                        "r.star IS NOT NULL AND NOT r.failed",
                        "p.result_point IS NOT NULL",
                        "p.final_point IS NOT NULL",
                        "json_valid(p.result_point)" if guarded else "1",
                        "json_valid(p.final_point)" if guarded else "1",
                        f"COALESCE({unknown_bands('result_point')}, 0) OR "
                        f"COALESCE({unknown_bands('final_point')}, 0)",
                    )
                )
            )
            sql = (
                f"SELECT s.id, {flags}, "
                f"{numbers('result_point', (*result_numbers, *result_texts))}, "
                f"{numbers('final_point', (*final_numbers, *final_texts))}, "
                f"CAST(trim(json_array({text_array}), '[]') AS BLOB) "
                "FROM stars s JOIN verdicts v ON v.star = s.id "
                "LEFT JOIN results r ON r.star = s.id LEFT JOIN finals f ON f.star = s.id "
                "LEFT JOIN points p ON p.star = s.id WHERE s.id > ? ORDER BY s.id LIMIT ?"
            )
            params = (
                *band_params,
                *band_params,
                *result_numbers,
                *result_texts,
                *final_numbers,
                *final_texts,
                after,
                int(chunk),
            )
            with self._mutex:
                if self._conn is None:
                    raise LedgerError("the ledger is closed", file=self.path)
                try:
                    return self._conn.execute(sql, params).fetchall()
                except sqlite3.OperationalError as exc:
                    if guarded or "malformed json" not in str(exc).lower():
                        raise _write_error(exc, self.path) from None
                except (sqlite3.DatabaseError, UnicodeDecodeError) as exc:
                    raise _damaged_file(exc, self.path) from None
        raise AssertionError("unreachable")  # pragma: no cover

    @staticmethod
    def _point_chunk_columns(
        rows: list[tuple[Any, ...]],
        n_result: int,
        n_final: int,
        n_result_texts: int,
        n_final_texts: int,
        bands: tuple[str, ...],
    ) -> PointChunk:
        keys, flags, result, final, texts = zip(*rows, strict=True)
        flags = np.array(flags, dtype=np.int64)

        def flag(bit: int) -> np.ndarray:
            return (flags >> bit & 1).astype(bool)

        def fields(
            values: Sequence[bytes | None], width: int, n_texts: int
        ) -> tuple[np.ndarray, list[list[Any]]]:
            """Numbers (null -> NaN) and texts of one record kind: one JSON call for the
            chunk's records, no list per record."""
            size = width + n_texts
            empty = b",".join([b"null"] * size)
            flat = json.loads(b"[" + b",".join(v or empty for v in values) + b"]")
            if len(flat) != size * len(rows):
                raise ValueError("a diagram record holds a list or object where a value belongs")
            numbers = np.array([flat[j::size] for j in range(width)], dtype=float)
            texts = [flat[width + j :: size] for j in range(n_texts)]
            return numbers.T, texts

        flat = json.loads(b"[" + b",".join(texts) + b"]")
        columns = [flat[k::3] for k in range(3)]
        result_numbers, result_texts = fields(result, n_result, n_result_texts)
        final_numbers, final_texts = fields(final, n_final, n_final_texts)
        return PointChunk(
            star_ids=columns[0],
            status=columns[1],
            class_code=columns[2],
            has_period=flag(0),
            has_final=flag(1),
            analysed=flag(2),
            has_result_point=flag(3),
            has_final_point=flag(4),
            result_plain=flag(5),
            final_plain=flag(6),
            result_numbers=result_numbers,
            final_numbers=final_numbers,
            result_texts=result_texts,
            final_texts=final_texts,
            bands=bands,
            new_bands=bool(np.any(flag(7))),
        )

    def star_row(self, star_id: str) -> StarRow:
        """One star's list line (to refresh a row after a change)."""
        return self._star_rows("WHERE s.id = ?", (self._key(star_id),))[0]

    def star_rows_of(self, star_ids: Sequence[str]) -> list[StarRow]:
        """The list lines of these stars, in the order given (one query per 500 stars).

        What a list shows a page at a time: a survey's list never builds a
        line for a star nobody scrolled to.
        """
        keys = [self._key(s) for s in star_ids]
        rows: dict[str, StarRow] = {}
        for k in range(0, len(keys), 500):
            part = keys[k : k + 500]
            where = f"WHERE s.id IN ({','.join('?' * len(part))})"
            rows.update((row.star_id, row) for row in self._star_rows(where, tuple(part)))
        return [rows[str(s)] for s in star_ids]

    def star_order(
        self,
        sort: str | None = None,
        *,
        descending: bool = False,
        status: str | None = None,
        text: str = "",
        no_period: Collection[str] = (),
    ) -> list[str]:
        """Star ids of the star list, sorted and filtered in SQL.

        Only the ids come back, so ordering a survey of 10^5 stars builds no
        list line in Python.

        Parameters
        ----------
        sort : str, optional
            A field of :data:`STAR_ORDER_FIELDS`; None keeps import order.
            Texts compare lower-cased.  Missing numbers and texts sort last
            in either direction; ties keep import order.
        descending : bool
        status : str, optional
            Only stars whose verdict has this status.
        text : str
            Only stars whose id, suggested class, verdict class or flags text
            (:data:`STAR_FLAGS_SQL`: ``failed`` or ``not analysed`` first,
            then the result's flags, comma-separated) contain it, ignoring
            case (of ASCII letters: SQLite's ``lower``).
        no_period : collection of str
            Class codes without a period: the ``period`` field is missing for
            them (the verdict's class, else the top suggestion's) and for
            rejected stars, as in the vetted catalogue.
        """
        if sort is not None and sort not in STAR_ORDER_FIELDS:
            raise LedgerError(
                f"cannot sort the star list by {sort!r}; fields: {', '.join(STAR_ORDER_FIELDS)}",
                file=self.path,
            )
        params: list[Any] = []
        where = []
        if status is not None:
            where.append("v.status = ?")
            params.append(status)
        needle = text.strip().lower()
        if needle:
            flags = f"instr(lower({STAR_FLAGS_SQL}), ?)"
            if needle.isascii() and needle.isprintable() and not set(needle) & set('[]",\\'):
                # building the flags text is most of the cost: test the stored
                # JSON first (such a needle lies within one flag, written as is)
                flags = f"(r.star IS NULL OR r.failed OR instr(lower(r.flags), ?)) AND {flags}"
            clause = (
                "(instr(lower(s.star_id), ?) OR instr(lower(COALESCE(r.suggested_class, '')), ?) "
                f"OR instr(lower(COALESCE(v.class_code, '')), ?) OR ({flags}))"
            )
            where.append(clause)
            params += [needle] * clause.count("?")
        order = "s.id"
        if sort is not None:
            expr = STAR_ORDER_FIELDS[sort]
            if sort == "period":
                codes = sorted({str(c) for c in no_period})
                without = (
                    f"COALESCE(NULLIF(v.class_code, ''), r.suggested_class) "
                    f"IN ({','.join('?' * len(codes))})"
                    if codes
                    else "0"
                )
                expr = f"CASE WHEN v.status = 'rejected' OR {without} THEN NULL ELSE {expr} END"
                params += codes * 2  # the expression is written twice below
            direction = "DESC" if descending else "ASC"
            order = f"({expr}) IS NULL, ({expr}) {direction}, s.id"
        sql = (
            "SELECT s.star_id FROM stars s JOIN verdicts v ON v.star = s.id "
            "LEFT JOIN results r ON r.star = s.id "
            + (f"WHERE {' AND '.join(where)} " if where else "")
            + f"ORDER BY {order}"
        )
        return [row[0] for row in self._query(sql, params)]

    def _star_rows(self, where: str, params: tuple[Any, ...]) -> list[StarRow]:
        # stale is worked out in SQL and rows are built positionally: this is
        # what a 10,000-star list waits for
        current = self.settings_hash
        rows = self._query(
            "SELECT s.star_id, v.status, r.suggested_class, r.suggested_score, "
            "r.suggested_period, v.class_code, COALESCE(v.period, r.period), r.amplitude, r.fap, "
            "r.flags, r.star IS NOT NULL, COALESCE(r.failed, 0), "
            "r.star IS NOT NULL AND (r.outdated OR (? IS NOT NULL AND r.settings_hash != ?)), "
            "r.period_err, r.mean_mag, r.primary_band "
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
                *row[13:],
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
            "SELECT h.id, h.action, a.kind, h.at, h.star_id, h.what, h.old, h.new, h.seal "
            "FROM history h JOIN actions a ON a.id = h.action"
        )
        params: tuple[Any, ...] = ()
        if star_id is not None:
            self._key(star_id)
            sql += " WHERE h.star_id = ?"
            params = (str(star_id),)
        rows = self._query(sql + " ORDER BY h.id", params)
        return [self._history_entry(r[:3], r[3:8], r[8]) for r in rows]

    def _history_entry(
        self, ids: tuple[Any, ...], values: tuple[Any, ...], seal: bytes | None
    ) -> HistoryEntry:
        """A history row, checked: ``ids`` = (id, action, kind), ``values`` = (at, star, what, old, new)."""
        at, star_id, what, old, new = values
        if _seal(ids[1], *values) != seal:
            raise LedgerError(
                f"history entry {ids[0]} is damaged (its checksum does not match); "
                "run 'phasewise ledger check' on this ledger",
                file=self.path,
            )
        try:
            return HistoryEntry(*ids, at, star_id, what, _loads(old), _loads(new))
        except ValueError:  # pragma: no cover - the seal matched, so the text is ours
            raise LedgerError(f"history entry {ids[0]} cannot be read", file=self.path) from None

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
        row = self._next_action_row(direction)
        return None if row is None else (row[0], row[1])

    def _next_action_row(self, direction: str) -> tuple[Any, ...] | None:
        """The action undo (or redo) would walk: (id, label, kind, at, target), checked."""
        if direction == "undo":
            sql = "WHERE state = 'done' ORDER BY id DESC LIMIT 1"
        else:
            sql = "WHERE state = 'undone' ORDER BY id LIMIT 1"
        row = self._query(
            f"SELECT id, label, kind, at, target, state, seal FROM actions {sql}"
        ).fetchone()
        if row is None:
            return None
        if _seal(row[2], row[1], row[3], row[4], row[5]) != row[6]:
            raise LedgerError(
                f"action {row[0]} in the history is damaged (its checksum does not match); "
                "run 'phasewise ledger check' on this ledger",
                file=self.path,
            )
        return row[:5]

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
            target_id, label, kind, at, target = self._next_action_row(direction)
            known = (kind, label, at, target)
            rows = self._query(
                "SELECT id, action, at, star_id, what, old, new, seal FROM history "
                "WHERE action = ? ORDER BY id",
                (target_id,),
            ).fetchall()
            entries = [self._history_entry((r[0], r[1], "do"), r[2:7], r[7]) for r in rows]
            texts = [(r[5], r[6]) for r in rows]  # old, new as stored: logged again as they are
            label = f"{direction} {label}"
            action, at = self._new_action_at(direction, label, target_id)
            order = range(len(entries))
            if direction == "undo":
                order = order[::-1]
            done = []
            for k in order:
                entry, (old, new) = entries[k], texts[k]
                before, after = (
                    (entry.new, entry.old) if direction == "undo" else (entry.old, entry.new)
                )
                before_text, after_text = (new, old) if direction == "undo" else (old, new)
                self._restore(entry.star_id, entry.what, after)
                row_id, row_at = self._log_texts(
                    action, entry.star_id, entry.what, before_text, after_text
                )
                done.append(
                    HistoryEntry(
                        row_id, action, direction, row_at, entry.star_id, entry.what, before, after
                    )
                )
                tx.star_ids.append(entry.star_id)
            self._set_action_state(target_id, "undone" if direction == "undo" else "done", known)
        # what was written, without reading it back
        return Action(action, direction, label, at, target_id, tuple(done))

    def _restore(self, star_id: str, what: str, value: Any) -> None:
        if what == "verdict":
            key = self._key(star_id)
            old = self._verdict_seal(key, star_id)  # a damaged record is reported, not sealed over
            # the value was read from the history's JSON: plain data already
            self._apply_verdict(Verdict(star_id, **value), key=key, plain=True, old_seal=old)
        elif what == "excluded":
            key = self._key(star_id)
            n = self._photometry_row(star_id)[7]  # checked before it is changed
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
            "SELECT id, action, ?, at, star_id, what, old, new, seal FROM history "
            "WHERE action = ? ORDER BY id",
            (kind, action_id),
        )
        entries = tuple(self._history_entry(r[:3], r[3:8], r[8]) for r in rows)
        return Action(action_id, kind, label, at, target, entries)

    # ---------------------------------------------------------- provenance
    def meta(self) -> dict[str, str]:
        """Creation time and program, and other key/value facts of the file."""
        return dict(self._query("SELECT key, value FROM meta"))

    def checksum(self) -> str:
        """SHA-256 naming the ledger's content (stars, photometry, masks, results, verdicts).

        Made from the content sum, which every write keeps up to date from the
        records' seals, so it costs one read whatever the ledger's size, and
        does not depend on SQLite's page layout or on the WAL.
        :meth:`check` confirms that the sum matches the records.
        """
        total = self._content_sum()
        text = f"phasewise ledger content/{SCHEMA_VERSION}/{total:064x}"
        return hashlib.sha256(text.encode()).hexdigest()

    def integrity_check(self) -> bool:
        """SQLite's full ``integrity_check`` of the open file."""
        rows = self._query("PRAGMA integrity_check").fetchall()
        return [r[0] for r in rows] == ["ok"]

    def check(self) -> list[Problem]:
        """Check the whole file: SQLite's ``integrity_check`` and every record's seal.

        Returns the problems found (empty when all is well), each naming the
        star or the history entry it concerns.  Reads the whole file: this is
        what ``phasewise ledger check`` runs, never an ordinary open.
        """
        problems: list[Problem] = []
        with self._mutex:
            try:
                rows = self._conn.execute("PRAGMA integrity_check").fetchall()
            except (sqlite3.DatabaseError, UnicodeDecodeError) as exc:
                return [Problem(None, "file", f"SQLite cannot check the file: {exc}")]
            if [r[0] for r in rows] != ["ok"]:
                detail = "; ".join(str(r[0]) for r in rows[:5])
                problems.append(Problem(None, "file", f"SQLite integrity check: {detail}"))
            try:
                problems += self._check_records()
            except (sqlite3.DatabaseError, LedgerError, ValueError) as exc:
                problems.append(Problem(None, "file", f"cannot read every record: {exc}"))
        return problems

    def _check_records(self) -> list[Problem]:
        problems: list[Problem] = []
        names = dict(self._conn.execute("SELECT id, star_id FROM stars"))
        total = 0
        keys = set(names)
        seen: set[int] = set()
        for row in self._conn.execute(
            f"SELECT {_PHOTOMETRY_SEALED}, p.seal FROM stars s LEFT JOIN photometry p "
            "ON p.star = s.id"
        ):
            seen.add(row[0])
            if _seal(*row[:-1]) != row[-1]:
                problems.append(Problem(names.get(row[0]), "photometry", "checksum mismatch"))
            total += _share("photometry", row[0], row[-1])
        points = {
            key: (result_point, final_point)
            for key, result_point, final_point in self._conn.execute(
                "SELECT star, result_point, final_point FROM points"
            )
        }

        def check_point(key: int, which: int, expected: str | None) -> None:
            if points.get(key, (None, None))[which] != expected:
                problems.append(
                    Problem(
                        names.get(key),
                        "points",
                        "the diagrams' record does not match the "
                        + ("result" if which == 0 else "verdict's final numbers"),
                    )
                )

        for (key,) in self._conn.execute("SELECT star FROM results"):
            values, text, intact = self._result_record(key)
            if not intact:
                problems.append(Problem(names.get(key), "result", "checksum mismatch"))
            elif not values[2]:  # not failed
                check_point(key, 0, _result_point(_loads(text)))
            seal = self._conn.execute("SELECT seal FROM results WHERE star = ?", (key,))
            total += _share("results", key, seal.fetchone()[0])
        verdict_keys = set()
        for key, seal in self._conn.execute("SELECT star, seal FROM verdicts"):
            verdict_keys.add(key)
            total += _share("verdicts", key, seal)
            try:
                (verdict,) = self._verdicts("WHERE v.star = ?", (key,))
            except LedgerError:
                problems.append(Problem(names.get(key), "verdict", "checksum mismatch"))
            else:
                check_point(key, 1, _final_point(verdict.final))
        for key in sorted(keys - verdict_keys):
            problems.append(Problem(names.get(key), "verdict", "missing"))
        for row in self._conn.execute(
            "SELECT id, action, at, star_id, what, old, new, seal FROM history"
        ):
            if _seal(*row[1:7]) != row[7]:
                problems.append(Problem(row[3], "history", f"entry {row[0]}: checksum mismatch"))
        for row in self._conn.execute(
            "SELECT id, kind, label, at, target, state, seal FROM actions"
        ):
            if _seal(*row[1:6]) != row[6]:
                problems.append(Problem(None, "history", f"action {row[0]}: checksum mismatch"))
        for key, value, seal in self._conn.execute("SELECT key, value, seal FROM meta"):
            if _seal(key, value) != seal:
                problems.append(Problem(None, "meta", f"{key!r}: checksum mismatch"))
        stored = self._conn.execute("SELECT value FROM meta WHERE key = 'content_sum'").fetchone()
        if stored is None or int(stored[0], 16) != total % _SUM_MODULUS:
            problems.append(
                Problem(None, "content", "the content checksum does not match the records")
            )
        return problems


@dataclass(frozen=True)
class Problem:
    """One thing :meth:`Ledger.check` found wrong."""

    star_id: str | None  # the star concerned, if any
    record: str  # file, photometry, result, points, verdict, history, meta, content
    detail: str

    def describe(self) -> str:
        where = f"star {self.star_id!r}" if self.star_id is not None else self.record
        what = self.record if self.star_id is not None else ""
        return " ".join(p for p in (where, what, self.detail) if p)


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
            raise _write_error(exc, self.path) from None
        self.ledger._sum_delta = 0
        return self

    def __exit__(self, exc_type: Any, exc: Any, tb: Any) -> None:
        if exc_type is None:
            try:
                self.ledger._flush_sum()
                self.conn.execute("COMMIT")
            except (sqlite3.Error, LedgerError) as error:
                self._rollback()
                if isinstance(error, LedgerError):
                    raise
                raise _write_error(error, self.path) from None
            self.ledger._notify(Change(self.what, tuple(self.star_ids)))
            return
        self._rollback()
        if isinstance(exc, sqlite3.Error):
            raise _write_error(exc, self.path) from None

    def _rollback(self) -> None:
        # SQLite may already have rolled back on its own (a full disk, an I/O
        # error); a second ROLLBACK must not hide the first error
        self.ledger._sum_delta = 0
        try:
            if self.conn.in_transaction:
                self.conn.execute("ROLLBACK")
        except sqlite3.Error:
            pass
        try:
            self.ledger._codec = _Codec(self.conn)  # forget a dictionary not committed
        except sqlite3.Error:
            pass


def _write_error(error: sqlite3.Error, path: Path) -> LedgerError:
    """One plain sentence for a failed write; nothing of it was kept."""
    text = str(error).lower()
    if "malformed" in text or "not a database" in text or "corrupt" in text:
        reason = (
            f"damaged: SQLite cannot read part of the file ({error}); run "
            "'phasewise ledger check' on it and restore it from a copy"
        )
    elif "full" in text:
        reason = (
            "the disk is full; nothing of this change was written and everything "
            "committed before is safe. Free some space and try again"
        )
    elif "readonly" in text or "read-only" in text:
        reason = "the ledger is read-only here (file or folder not writable); nothing was changed"
    elif "locked" in text or "busy" in text:
        reason = "another process is writing to it; nothing was changed, try again"
    else:
        reason = f"SQLite could not read or write it ({error}); nothing was changed"
    return LedgerError(reason, file=path)


def _damaged_file(error: Exception, path: Path) -> LedgerError:
    if isinstance(error, sqlite3.OperationalError):
        return _write_error(error, path)
    return LedgerError(
        f"damaged: SQLite cannot read part of the file ({error}); run "
        "'phasewise ledger check' on it and restore it from a copy",
        file=path,
    )


def _mask(blob: bytes | None, n: int) -> np.ndarray:
    """The exclusion mask stored as one byte per point (None: nothing excluded)."""
    if blob is None:
        return np.zeros(n, dtype=bool)
    return np.frombuffer(blob, dtype=np.uint8, count=n).astype(bool)


def lock_holder_of(path: str | os.PathLike) -> LockHolder | None:
    """Who holds a ledger file for writing (None if nobody), read without opening it."""
    return _file_lock_holder(Path(path))


def _record_take_over(conn: sqlite3.Connection, old: LockHolder, new: LockHolder) -> None:
    """Write a lock take-over to the history (not undoable), inside the caller's transaction."""
    at = _now()
    values = ("lock", f"take over the lock from {old.host}", at, None, None)
    action = conn.execute(
        "INSERT INTO actions(kind, label, at, target, state, seal) VALUES (?, ?, ?, ?, ?, ?)",
        (*values, _seal(*values)),
    ).lastrowid
    entry = (action, at, None, "lock", _dumps(asdict(old)), _dumps(asdict(new)))
    conn.execute(
        "INSERT INTO history(action, at, star_id, what, old, new, seal) "
        "VALUES (?, ?, ?, ?, ?, ?, ?)",
        (*entry, _seal(*entry)),
    )


def _json_records(texts: list[bytes]) -> list[Any]:
    """Decode many JSON texts (UTF-8 bytes) with one call; one by one if any is
    damaged, so the error names no other record."""
    try:
        return json.loads(b"[" + b",".join(texts) + b"]")
    except ValueError:
        return [json.loads(text) for text in texts]


def _connect(target: Any, **kwargs: Any) -> sqlite3.Connection:
    conn = sqlite3.connect(target, **kwargs)
    # a damaged byte in a stored text must not stop the reading: the text comes
    # back with the byte escaped, and its record's seal then reports the damage
    conn.text_factory = _text
    return conn


def _text(data: bytes) -> str:
    return data.decode("utf-8", "surrogateescape")


def _unlink_ledger_files(path: Path) -> None:
    for suffix in ("", "-wal", "-shm", "-journal"):
        try:
            Path(f"{path}{suffix}").unlink(missing_ok=True)
        except OSError:
            pass


def _remove_abandoned_builds(path: Path, *, grace: float = 60.0) -> None:
    """Remove ``.NAME.*.building`` files of builds whose process died.

    A build holds the lock of its file; a file whose lock names a dead
    process of this host (or without a lock, older than ``grace`` seconds)
    is what a killed ``ledger new`` left behind.
    """
    for temp in path.parent.glob(f".{path.name}.*.building"):
        try:
            holder = _file_lock_holder(temp)
            if holder is None:
                if time.time() - temp.stat().st_mtime < grace:
                    continue  # being created right now
            elif holder.host != socket.gethostname() or _pid_alive(holder.pid):
                continue
        except OSError:
            continue
        _unlink_ledger_files(temp)


def _file_lock_holder(path: Path) -> LockHolder | None:
    try:
        conn = _connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
        try:
            row = conn.execute("SELECT pid, host, since, program FROM lock").fetchone()
        finally:
            conn.close()
    except sqlite3.Error:
        return None
    return None if row is None else LockHolder(int(row[0]), row[1], row[2], row[3])


def _writable(path: Path) -> bool:
    """Whether SQLite can write the file and make its side files beside it."""
    return os.access(path, os.W_OK) and _folder_writable(path)


def _folder_writable(path: Path) -> bool:
    return os.access(path.parent, os.W_OK)


def _reader_uri(path: Path) -> str:
    """URI of a read-only connection that works where nothing may be written.

    A read-only folder cannot hold the WAL index that a reader normally
    creates; there, with no pending WAL, the file is opened ``immutable``.
    """
    uri = path.resolve().as_uri()
    wal = Path(f"{path}-wal")
    pending = wal.exists() and wal.stat().st_size > 0
    if not _folder_writable(path) and not pending:
        return f"{uri}?immutable=1"
    return f"{uri}?mode=ro"


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
    band = result.get("primary_band")
    return (
        result.get("status"),
        top.get("class") or top.get("class_code"),
        _finite_or_none(top.get("score")),
        _finite_or_none(top.get("period")),
        _finite_or_none(result.get("period")),
        _finite_or_none(result.get("period_err")),
        _finite_or_none(result.get("amplitude")),
        _finite_or_none(result.get("fap")),
        _finite_or_none(result.get("mean_mag")),
        None if band is None else str(band),
        json.dumps(flags),
    )


_EMPTY_SUMMARY = (None,) * 10 + ("[]",)
