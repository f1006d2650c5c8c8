"""Open photometry files: one long table of many stars, or a folder of one-star files.

Formats: CSV, TSV, whitespace-separated text, ECSV, FITS binary tables and
VOTable (the last three through :mod:`astropy.table`, read whole and grouped
by star with numpy).

Long CSV/TSV files are streamed.  Opening one makes a single pass over the
bytes that records, for each star, the byte ranges of its runs of
consecutive rows (one run per star when the file is sorted by star, as
surveys write them; more runs when ids are interleaved).  Each star is then
read by seeking to its runs, so at most one star's rows are held at a time
and the memory used by the index grows with the number of runs, not rows.
A consequence: a quoted field may not contain a line break in these files.

Row numbers in messages and in the :class:`ReadReport` are line numbers of
the file (the header counts) for CSV/TSV/text, and 1-based data rows for
ECSV, FITS and VOTable.
"""

from __future__ import annotations

import bz2
import csv
import gzip
import os
import re
import stat
import tempfile
import warnings
import weakref
import zipfile
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import PhasewiseError, ReadError
from ..lightcurve import LightCurve, StarMeta
from .columns import (
    ACCEPTED_NAMES,
    ColumnMapping,
    ResolvedColumns,
    id_like,
    normalise_scale,
    resolve_columns,
)

__all__ = ["FORMATS", "ReadReport", "PhotometrySource", "open_photometry", "detect_format"]

#: Formats read and written, with the file name endings that select them.
FORMATS: dict[str, tuple[str, ...]] = {
    "csv": (".csv",),
    "tsv": (".tsv", ".tab"),
    "ascii": (".txt", ".dat"),
    "ecsv": (".ecsv",),
    "fits": (".fits", ".fit", ".fts", ".fits.gz"),
    "votable": (".vot", ".votable", ".xml"),
}
_DELIMITERS = {"csv": ",", "tsv": "\t", "ascii": None}
#: Skipped rows listed one by one in a report (all are counted).
MAX_LISTED_SKIPS = 200
#: Pogson: 2.5 / ln(10), the factor between a relative flux error and a magnitude error.
POGSON_ERR = 2.5 / np.log(10.0)
#: Magnitudes outside this range are no star's (the Sun is -26.7; the faintest
#: objects measured are near 32): such points are skipped as invalid.
MAG_RANGE = (-30.0, 40.0)
#: Largest magnitude error accepted; larger ones are invalid (zero and negative
#: errors are left to the cleaning rules, which report them).
MAX_MAG_ERR = 10.0
#: A time column spanning more days than this (about 270 years) mixes scales or units.
MAX_TIME_SPAN = 1.0e5
#: Largest size a compressed file may inflate to before it is read.
MAX_INFLATED_BYTES = 256 * 2**20
# "15,234" or "-0,5e3": a number written with a decimal comma
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+(?:[eE][+-]?\d+)?$")


def detect_format(path: str | os.PathLike, format: str | None = None) -> str:
    """The format of a file, from ``format`` or the end of its name."""
    if format is not None:
        key = str(format).lower()
        if key not in FORMATS:
            raise ReadError(
                f"unknown format {format!r}; expected one of {', '.join(FORMATS)}",
                file=str(path),
            )
        return key
    name = Path(path).name.lower()
    for key, endings in FORMATS.items():
        if name.endswith(endings):
            return key
    accepted = ", ".join(e for endings in FORMATS.values() for e in endings)
    raise ReadError(f"unknown format; file names accepted end in {accepted}", file=str(path))


@dataclass(frozen=True)
class ReadReport:
    """What a reader did: rows read and skipped (with reasons), columns used."""

    source: str
    format: str
    shape: str  # "long table" or "folder"
    files: tuple[str, ...]
    columns_found: tuple[str, ...]
    columns_used: dict[str, str]
    time_scale: str
    table: str | None  # which table of a multi-table FITS/VOTable was read, or how (ECSV as text)
    n_stars: int
    rows_read: int
    rows_skipped: int
    skipped: tuple[dict[str, Any], ...]  # first MAX_LISTED_SKIPS: file, row, reason
    skip_counts: dict[str, int]  # reason kind -> rows
    notes: tuple[str, ...]
    complete: bool  # every star has been read, so the counts are final

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": self.source,
            "format": self.format,
            "shape": self.shape,
            "files": list(self.files),
            "columns_found": list(self.columns_found),
            "columns_used": dict(self.columns_used),
            "time_scale": self.time_scale,
            "table": self.table,
            "n_stars": self.n_stars,
            "rows_read": self.rows_read,
            "rows_skipped": self.rows_skipped,
            "skipped": [dict(s) for s in self.skipped],
            "skip_counts": dict(self.skip_counts),
            "notes": list(self.notes),
            "complete": self.complete,
        }


@dataclass
class _Tally:
    rows_read: int = 0
    skipped: list[dict[str, Any]] = field(default_factory=list)
    counts: Counter = field(default_factory=Counter)
    notes: list[str] = field(default_factory=list)

    def skip(self, file: str, row: int, kind: str, reason: str) -> None:
        self.counts[kind] += 1
        if len(self.skipped) < MAX_LISTED_SKIPS:
            self.skipped.append({"file": file, "row": int(row), "reason": reason})

    def note(self, text: str) -> None:
        if text not in self.notes:
            self.notes.append(text)


@dataclass
class _Rows:
    """Raw cells of one star from one file: column name -> values, with row numbers."""

    cells: dict[str, Any]
    masks: dict[str, np.ndarray]
    rows: np.ndarray


# ------------------------------------------------------------------ CSV backend
def _decode(raw: bytes, file: str, line: int) -> str:
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ReadError("not UTF-8 text", file=file, row=line) from None


class _DelimitedTable:
    """A CSV/TSV/text file, indexed by star and read star by star."""

    def __init__(self, path: Path, fmt: str) -> None:
        self.path = path
        self.file = str(path)
        self.delimiter = _DELIMITERS[fmt]
        self.header_end = 0
        self.header_line = 0
        self.table_note = None
        self._spool = None
        self._translate_cr_only()
        self.columns = self._read_header()
        self.meta: dict[str, Any] = {}

    def _open(self):
        """The file's bytes (with CR-only line ends turned into LF)."""
        if self._spool is not None:
            return os.fdopen(os.dup(self._spool.fileno()), "rb")
        try:
            return open(self.path, "rb")
        except OSError as exc:
            raise ReadError(f"cannot open: {exc.strerror or exc}", file=self.file) from None

    def _translate_cr_only(self) -> None:
        # Files from old Mac software end lines with CR alone; the line reader
        # splits on LF, so such a file is read through a translated copy.
        with self._open() as handle:
            head = handle.read(1 << 16)
        if b"\r" not in head or b"\n" in head:
            return
        spool = tempfile.TemporaryFile()
        with self._open() as handle:
            while block := handle.read(1 << 20):
                spool.write(block.replace(b"\r", b"\n"))
        spool.seek(0)
        self._spool = spool
        # the table has no close(): its copy is closed when the table goes away
        weakref.finalize(self, spool.close)
        self.table_note = "lines end with CR alone (old Mac style); read as ordinary lines"

    def _split(self, text: str, line: int) -> list[str]:
        if text.count('"') % 2:
            raise ReadError(
                "a quoted field runs over a line break (or a quote is not closed); "
                "line breaks inside quoted fields are not read: remove them",
                file=self.file,
                row=line,
            )
        try:
            if self.delimiter is None:
                if '"' in text:
                    reader = csv.reader([text], delimiter=" ", skipinitialspace=True)
                    return [p for p in next(reader) if p]
                return text.split()
            if '"' in text:
                return next(csv.reader([text], delimiter=self.delimiter))
        except csv.Error as exc:
            raise ReadError(
                f"cannot split the line into fields ({exc})", file=self.file, row=line
            ) from None
        return text.split(self.delimiter)

    def _read_header(self) -> list[str]:
        handle = self._open()
        with handle:
            offset = 0
            for number, raw in enumerate(handle, start=1):
                offset += len(raw)
                text = _decode(raw, self.file, number).lstrip("\ufeff").strip()
                if not text or text.startswith("#"):
                    continue
                if self.delimiter == "," and "," not in text and ";" in text:
                    self.delimiter = ";"  # European spreadsheets write semicolons
                names = [c.strip() for c in self._split(text, number)]
                # a trailing delimiter (spreadsheet exports) leaves unnamed columns
                names = [n or f"column {i + 1}" for i, n in enumerate(names)]
                if len(set(n.lower() for n in names)) < len(names):
                    raise ReadError(
                        f"the header names a column twice: {text[:80]!r}",
                        file=self.file,
                        row=number,
                    )
                self.header_end, self.header_line = offset, number
                return names
        raise ReadError("empty file: no header line and no data", file=self.file)

    def build_index(self, id_column: str | None, tally: _Tally, default_id: str) -> list[str]:
        """One pass over the data lines: byte runs per star id."""
        self.runs: dict[str, list[list[int]]] = {}
        index = self.columns.index(id_column) if id_column else None
        current = None
        with self._open() as handle:
            handle.seek(self.header_end)
            offset, number = self.header_end, self.header_line
            for raw in handle:
                number += 1
                start, offset = offset, offset + len(raw)
                stripped = raw.strip()
                if not stripped or stripped.startswith(b"#"):
                    continue
                tally.rows_read += 1
                if index is None:
                    star = default_id
                else:
                    parts = self._split(_decode(stripped, self.file, number), number)
                    star = parts[index].strip() if index < len(parts) else ""
                    if not star:
                        tally.skip(self.file, number, "empty star id", "empty star id")
                        current = None
                        continue
                if star == current:
                    self.runs[star][-1][1] = offset
                else:
                    self.runs.setdefault(star, []).append([start, offset, number])
                    current = star
        if not self.runs:
            raise ReadError("has a header but no data rows", file=self.file)
        return list(self.runs)

    def rows_for(self, star: str, needed: list[str], tally: _Tally) -> _Rows:
        positions = [self.columns.index(c) for c in needed]
        width = len(self.columns)
        cells: dict[str, list[str]] = {c: [] for c in needed}
        rows: list[int] = []
        with self._open() as handle:
            for start, end, first in self.runs.get(star, []):
                handle.seek(start)
                chunk = handle.read(end - start)
                for number, raw in enumerate(chunk.split(b"\n"), start=first):
                    stripped = raw.strip()
                    if not stripped or stripped.startswith(b"#"):
                        continue
                    parts = self._split(_decode(stripped, self.file, number), number)
                    if len(parts) != width:
                        tally.skip(
                            self.file,
                            number,
                            "wrong number of fields",
                            f"expected {width} fields, found {len(parts)}",
                        )
                        continue
                    rows.append(number)
                    for column, pos in zip(needed, positions, strict=True):
                        cells[column].append(parts[pos].strip())
        return _Rows(cells=cells, masks={}, rows=np.asarray(rows, dtype=np.int64))

    def column_text(self, name: str, limit: int = 200_000) -> list[str] | None:
        """The first ``limit`` cells of a column as text (for checks on whole columns)."""
        position = self.columns.index(name)
        out: list[str] = []
        for parts in self._data_rows():
            if position < len(parts):
                out.append(parts[position].strip())
            if len(out) >= limit:
                break
        return out

    def _data_rows(self):
        """The cells of each data row in file order (blank and comment lines skipped)."""
        with self._open() as handle:
            handle.seek(self.header_end)
            for number, raw in enumerate(handle, start=self.header_line + 1):
                stripped = raw.strip()
                if not stripped or stripped.startswith(b"#"):
                    continue
                yield self._split(_decode(stripped, self.file, number), number)

    def preview(self, n: int) -> list[dict[str, str]]:
        out: list[dict[str, str]] = []
        for parts in self._data_rows():
            out.append(dict(zip(self.columns, (p.strip() for p in parts), strict=False)))
            if len(out) >= n:
                break
        return out


# -------------------------------------------------------------- astropy backend
def _pick_table(
    names: list[str], numbers: list[int], choice, file: str, kind: str, label: str
) -> tuple[int, str | None]:
    """Choose one of several tables by name or number; say which was read.

    ``numbers`` are what a user types for each table (the HDU number in a
    FITS file, the position in a VOTable), ``label`` what they are called.
    """
    listing = ", ".join(f"{label} {i} {n!r}" for i, n in zip(numbers, names, strict=True))
    if choice is None:
        picked = 0
    elif isinstance(choice, (int, np.integer)) and not isinstance(choice, bool):
        if int(choice) not in numbers:
            raise ReadError(f"no table {label} {choice}; the {kind} file has: {listing}", file=file)
        picked = numbers.index(int(choice))
    else:
        lowered = [str(n).lower() for n in names]
        if str(choice).lower() not in lowered:
            raise ReadError(f"no table {choice!r}; the {kind} file has: {listing}", file=file)
        picked = lowered.index(str(choice).lower())
    note = None
    if len(names) > 1 or choice is not None:
        hint = "" if choice is not None else " (choose another with table=NAME or NUMBER)"
        note = (
            f"{kind} file has {len(names)} tables: {listing}; read {label} {numbers[picked]} "
            f"{names[picked]!r}{hint}"
        )
    return picked, note


def _read_astropy(path: Path, fmt: str, table_choice):
    from astropy.table import Table

    file = str(path)
    note = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # astropy warns freely about odd headers and units
        try:
            if fmt == "ecsv":
                table = Table.read(path, format="ascii.ecsv")
            elif fmt == "fits":
                from astropy.io import fits

                with fits.open(path, memmap=False) as hdus:
                    found = [
                        (i, h.name or f"HDU {i}")
                        for i, h in enumerate(hdus)
                        if isinstance(h, (fits.BinTableHDU, fits.TableHDU))
                    ]
                if not found:
                    raise ReadError("the FITS file holds no table", file=file)
                numbers = [i for i, _ in found]
                picked, note = _pick_table(
                    [n for _, n in found], numbers, table_choice, file, "FITS", "HDU"
                )
                hdu = numbers[picked]
                table = Table.read(path, format="fits", hdu=hdu)
            else:
                from astropy.io import votable

                tables = list(votable.parse(str(path)).iter_tables())
                if not tables:
                    raise ReadError("the VOTable holds no table", file=file)
                names = [t.name or t.ID or f"table {i}" for i, t in enumerate(tables)]
                numbers = list(range(len(tables)))
                picked, note = _pick_table(names, numbers, table_choice, file, "VOTable", "table")
                table = tables[picked].to_table()
        except PhasewiseError:
            raise
        except Exception as exc:  # a third-party parser on untrusted bytes
            raise ReadError(
                f"cannot read as {fmt}: {type(exc).__name__}: {exc}", file=file
            ) from None
    return table, note


class _AstropyTable:
    """An ECSV/FITS/VOTable file read whole, grouped by star with numpy."""

    def __init__(self, path: Path, fmt: str, table_choice=None) -> None:
        self.path = path
        self.file = str(path)
        table, self.table_note = _read_astropy(path, fmt, table_choice)
        if len(table.colnames) == 0:
            raise ReadError("empty file: no columns", file=self.file)
        self.table = table
        self.columns = list(table.colnames)
        self.meta = {str(k).lower(): v for k, v in (table.meta or {}).items()}
        self._cache: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    def _column(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        if name not in self._cache:
            self._cache[name] = self._convert(name)
        return self._cache[name]

    def _convert(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        col = self.table[name]
        mask = np.zeros(len(col), dtype=bool)
        if hasattr(col, "jd") and hasattr(col, "scale"):  # an astropy Time column
            values = np.asarray(col.jd, dtype=float)
        else:
            if getattr(col, "mask", None) is not None:
                mask = np.asarray(col.mask, dtype=bool)
            values = np.asarray(col)
            if hasattr(col, "filled") and mask.any():
                values = np.asarray(col.filled(0 if values.dtype.kind in "iufb" else ""))
        if values.ndim != 1 or mask.shape != values.shape:
            raise ReadError(
                f"expected one value per row, found shape {values.shape}",
                file=self.file,
                column=name,
            )
        if values.dtype.kind == "S":
            values = np.char.decode(values, "utf-8", "replace")
        return values, mask

    def build_index(self, id_column: str | None, tally: _Tally, default_id: str) -> list[str]:
        n = len(self.table)
        if n == 0:
            raise ReadError("has columns but no data rows", file=self.file)
        tally.rows_read += n
        if id_column is None:
            self.groups = {default_id: np.arange(n)}
            return [default_id]
        values, mask = self._column(id_column)
        ids = np.char.strip(values.astype(str))
        empty = (ids == "") | mask
        for row in np.flatnonzero(empty):
            tally.skip(self.file, row + 1, "empty star id", "empty star id")
        keep = np.flatnonzero(~empty)
        if keep.size == 0:
            raise ReadError("no row has a star id", file=self.file, column=id_column)
        kept = ids[keep]
        order = np.argsort(kept, kind="stable")
        names, starts = np.unique(kept[order], return_index=True)
        pieces = np.split(keep[order], starts[1:])
        first_seen = np.argsort([p[0] for p in pieces], kind="stable")
        self.groups = {str(names[i]): pieces[i] for i in first_seen}
        return list(self.groups)

    def rows_for(self, star: str, needed: list[str], tally: _Tally) -> _Rows:
        index = self.groups[star]
        cells, masks = {}, {}
        for name in needed:
            values, mask = self._column(name)
            cells[name], masks[name] = values[index], mask[index]
        return _Rows(cells=cells, masks=masks, rows=index + 1)

    def column_text(self, name: str, limit: int = 200_000) -> list[str] | None:
        """The first ``limit`` cells of a column as text (for checks on whole columns)."""
        values, mask = self._column(name)
        if values.dtype.kind not in "USOiub":
            return None  # floats are measurements, not ids
        cells = values[:limit].astype(str)
        return ["" if m else str(v).strip() for v, m in zip(cells, mask[:limit], strict=True)]

    def preview(self, n: int) -> list[dict[str, str]]:
        return [
            {c: str(self.table[c][i]) for c in self.columns} for i in range(min(n, len(self.table)))
        ]


# ------------------------------------------------------------- cell conversion
def _to_float(values, mask) -> tuple[np.ndarray, np.ndarray, dict[int, str]]:
    """Float values, a mask of cells that could not be read, and why."""
    n = len(values)
    blank = np.zeros(n, dtype=bool) if mask is None else np.asarray(mask, dtype=bool)
    mask = blank.copy()
    try:
        out = np.asarray(values, dtype=np.float64)
        if out.shape != (n,):
            raise ValueError("shape")
    except (ValueError, TypeError, OverflowError):
        out = np.full(n, np.nan)
        for i, cell in enumerate(values):
            try:
                out[i] = float(cell)
            except (ValueError, TypeError, OverflowError):
                mask[i] = True
    reasons = {}
    for i in np.flatnonzero(mask):
        text = str(values[i]).strip()
        empty = blank[i] or text in ("", "--")
        if empty:
            reasons[int(i)] = "empty cell"
        elif _DECIMAL_COMMA.match(text):
            reasons[int(i)] = f"decimal comma: {text[:40]!r}"
        else:
            reasons[int(i)] = f"not a number: {text[:40]!r}"
    return out, mask, reasons


def _check_time_span(time, rows, column: str, file: str, star: str) -> None:
    """Refuse a star whose times cannot all be days of one scale (JD with MJD, seconds)."""
    finite = np.isfinite(time)
    if np.count_nonzero(finite) < 2:
        return
    t, r = time[finite], rows[finite]
    first, last = int(np.argmin(t)), int(np.argmax(t))
    span = float(t[last] - t[first])
    if span <= MAX_TIME_SPAN:
        return
    ordered = np.sort(t)
    cut = int(np.argmax(np.diff(ordered)))
    gap = float(ordered[cut + 1] - ordered[cut])
    low, high = np.median(ordered[: cut + 1]), np.median(ordered[cut + 1 :])
    if 2.3e6 < gap < 2.5e6 or 2.3e6 < high - low < 2.5e6:
        cause = (
            "Julian dates mixed with modified or reduced dates (they differ by about 2,400,000 d)"
        )
    elif low > 0 and 4.3e4 * low < high < 1.7e5 * low:  # a ratio, without overflow
        cause = "seconds mixed with days (values differ by about 86,400 times)"
    else:
        cause = "these cannot all be days of one time scale (seconds, or mixed scales?)"
    raise ReadError(
        f"star {star!r}: the times span {span:,.0f} days (row {int(r[first])}: {t[first]:.10g}, "
        f"row {int(r[last])}: {t[last]:.10g}): {cause}; one column must hold days of one "
        "time scale",
        file=file,
        column=column,
    )


def _to_bool(values) -> np.ndarray:
    array = np.asarray(values)
    if array.dtype.kind == "b":
        return array.astype(bool)
    if array.dtype.kind in "iuf":
        return np.nan_to_num(array.astype(float)) != 0
    text = np.char.lower(np.char.strip(array.astype(str)))
    return np.isin(text, ("true", "t", "1", "yes", "y"))


def _refuse_hidden_ids(part) -> None:
    """Stop when no id column was found but one looks like it (by name or values).

    Reading such a file as one star would merge many stars into one.
    """
    res, table = part.resolved, part.table
    used = set(res.roles.values()) | {res.scale_column, res.excluded_column}
    for name in table.columns:
        if name in used:
            continue
        values = table.column_text(name)
        if values is None or len(values) < 2:
            continue
        distinct = set(values)
        distinct.discard("")
        if len(distinct) < 2:
            continue
        looks = id_like(name)
        if not looks and _all_text(distinct) and np.median([len(v) for v in distinct]) >= 3:
            runs = 1 + sum(1 for a, b in zip(values, values[1:], strict=False) if a != b)
            looks = runs == len(distinct) and len(values) >= 3 * len(distinct)
        if looks:
            examples = ", ".join(repr(v) for v in sorted(distinct)[:3])
            raise ReadError(
                f"no star-id column was recognised, but column {name!r} looks like one "
                f"({len(distinct)} different values, e.g. {examples}); reading the file as "
                f"one star would merge them. Map it with id={name}, or give id=- if the "
                f"file really holds one star (names accepted for ids: "
                f"{', '.join(ACCEPTED_NAMES['star_id'])})",
                file=table.file,
                column=name,
            )


def _all_text(values) -> bool:
    for value in values:
        try:
            float(value)
            return False
        except ValueError:
            continue
    return True


# ---------------------------------------------------------------- the source
@dataclass
class _FilePart:
    table: Any
    resolved: ResolvedColumns
    stars: list[str]


class PhotometrySource:
    """Photometry opened from a long table or a folder of one-star files.

    Use :func:`open_photometry` to make one.  ``stars()`` reads star by star;
    the :attr:`report` is final once every star has been read (see
    ``ReadReport.complete``).
    """

    def __init__(self, path: Path, shape: str, fmt: str, parts: list[_FilePart], mapping):
        self.path = path
        self.shape = shape
        self.format = fmt
        self.mapping = mapping
        self._parts = parts
        self._tally = _Tally()
        self._done: set[str] = set()
        self._scale: str | None = None
        self.columns: tuple[str, ...] = tuple(parts[0].table.columns) if parts else ()
        self._where: dict[str, list[int]] = {}

    def _index(self) -> None:
        for i, part in enumerate(self._parts):
            if "star_id" not in part.resolved.roles and not part.resolved.one_star:
                _refuse_hidden_ids(part)
            default = part.table.path.stem.split(".")[0]
            part.stars = part.table.build_index(
                part.resolved.roles.get("star_id"), self._tally, default
            )
            for star in part.stars:
                self._where.setdefault(star, []).append(i)
            for note in part.resolved.notes:
                self._tally.note(note if self.shape != "folder" else f"{part.table.file}: {note}")
            if part.table.table_note and self.shape == "folder":
                self._tally.note(f"{part.table.file}: {part.table.table_note}")
        fixed = {}
        for part in self._parts:
            if part.resolved.scale_column is None and part.resolved.time_scale:
                fixed.setdefault(part.resolved.time_scale, part.table.path.name)
        if len(fixed) > 1 and not (self.mapping and self.mapping.time_scale):
            listing = ", ".join(f"{scale} (e.g. {name})" for scale, name in fixed.items())
            raise ReadError(
                f"mixed time scales: the files are in {listing}; read them separately or "
                "convert them to one scale",
                file=str(self.path),
            )
        if self.shape == "folder":
            merged = [s for s, where in self._where.items() if len(where) > 1]
            if merged:
                self._tally.note(
                    f"{len(merged)} star id(s) appear in several files and were joined, "
                    f"e.g. {merged[0]!r}"
                )

    def star_ids(self) -> tuple[str, ...]:
        """Star ids in the order they first appear."""
        return tuple(self._where)

    def __len__(self) -> int:
        return len(self._where)

    def stars(self) -> Iterator[LightCurve]:
        """Every star, read one at a time.

        Raises :class:`ReadError` at the end if no row at all was usable.
        """
        usable = 0
        for star in self._where:
            lc = self.star(star)
            usable += lc.n_points
            yield lc
        if not usable:
            counts = self._tally.counts
            why = "; ".join(f"{n} x {kind}" for kind, n in counts.most_common(5)) or "none read"
            raise ReadError(
                f"no usable row: every one of the {self._tally.rows_read} data rows was "
                f"skipped ({why})",
                file=str(self.path),
            )

    def star(self, star_id: str) -> LightCurve:
        """One star's light curve (all its files joined, all bands)."""
        if star_id not in self._where:
            raise ReadError(f"no star {star_id!r} in the source", file=str(self.path))
        pieces = [self._read_part(self._parts[i], star_id) for i in self._where[star_id]]
        self._done.add(star_id)
        time = np.concatenate([p["time"] for p in pieces])
        mag = np.concatenate([p["mag"] for p in pieces])
        has_errors = all(p["err"] is not None for p in pieces)
        err = np.concatenate([p["err"] for p in pieces]) if has_errors else None
        band = np.concatenate([p["band"] for p in pieces])
        excluded = np.concatenate([p["excluded"] for p in pieces])
        ra = next((p["ra"] for p in pieces if p["ra"] is not None), None)
        dec = next((p["dec"] for p in pieces if p["dec"] is not None), None)
        scales = {p["scale"] for p in pieces}
        if len(scales) > 1:
            raise ReadError(
                f"mixed time scales for star {star_id!r}: {', '.join(sorted(scales))}",
                file=str(self.path),
            )
        scale = scales.pop()
        if self._scale is None:
            self._scale = scale
        elif scale != self._scale:
            raise ReadError(
                f"mixed time scales: star {star_id!r} is in {scale}, earlier stars in "
                f"{self._scale}",
                file=str(self.path),
            )
        notes = tuple(n for p in pieces for n in p["notes"])
        meta = StarMeta(
            ra=ra,
            dec=dec,
            source_file=", ".join(p["file"] for p in pieces),
            columns=dict(pieces[0]["columns"]),
            notes=notes,
        )
        return LightCurve(
            star_id,
            time,
            mag,
            err,
            band=band,
            time_scale=scale,
            excluded=excluded,
            meta=meta,
            has_errors=has_errors,
        )

    def _read_part(self, part: _FilePart, star: str) -> dict[str, Any]:
        res, table, file = part.resolved, part.table, part.table.file
        roles = res.roles
        needed = [
            roles[r]
            for r in ("time", "mag", "err", "flux", "flux_err", "band", "ra", "dec")
            if r in roles
        ]
        for extra in (res.scale_column, res.excluded_column):
            if extra and extra not in needed:
                needed.append(extra)
        counted = star in self._done
        tally = _Tally() if counted else self._tally
        raw = table.rows_for(star, list(dict.fromkeys(needed)), tally)
        rows = raw.rows
        bad = np.zeros(len(rows), dtype=bool)
        value_roles = ["time", "flux" if res.uses_flux else "mag"]
        err_role = "flux_err" if res.uses_flux else "err"
        if err_role in roles:
            value_roles.append(err_role)
        values, why = {}, {}
        for role in value_roles:
            name = roles[role]
            values[role], fail, reasons = _to_float(raw.cells[name], raw.masks.get(name))
            for i, reason in reasons.items():
                why.setdefault(i, (name, reason))
            bad |= fail
        for i in sorted(why):  # one entry per skipped row, naming the first bad cell
            name, reason = why[i]
            if reason.startswith("decimal comma"):
                raise ReadError(
                    f"{reason}: numbers must use a decimal point; save the file with "
                    "decimal points (in a spreadsheet: the English number format)",
                    file=file,
                    row=int(rows[i]),
                    column=name,
                )
            kind = "empty cell" if reason == "empty cell" else "not a number"
            tally.skip(file, rows[i], f"column '{name}': {kind}", f"column '{name}': {reason}")
        keep = ~bad
        notes: list[str] = []
        if res.uses_flux:
            flux = values["flux"]
            nonpositive = keep & ~(flux > 0) & np.isfinite(flux)
            for i in np.flatnonzero(nonpositive):
                tally.skip(
                    file,
                    rows[i],
                    f"column '{roles['flux']}': flux <= 0",
                    f"column '{roles['flux']}': flux {flux[i]:g} <= 0 has no magnitude",
                )
            keep &= ~nonpositive
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                values["mag"] = res.zero_point - 2.5 * np.log10(flux)
                if "flux_err" in values:
                    values["err"] = POGSON_ERR * values["flux_err"] / flux
        keep &= self._in_range(values, keep, rows, part, tally)
        time = values["time"][keep] + res.time_offset
        _check_time_span(time, rows[keep], roles["time"], file, star)
        mag = values["mag"][keep]
        err = values["err"][keep] if "err" in values else None
        if "band" in roles:
            band = np.asarray(raw.cells[roles["band"]]).astype(str)[keep]
            band = np.char.strip(band)
            band = np.where(band == "", res.default_band, band)
        else:
            band = np.full(int(keep.sum()), res.default_band)
        excluded = np.zeros(int(keep.sum()), dtype=bool)
        if res.excluded_column:
            excluded = _to_bool(raw.cells[res.excluded_column])[keep]
        coords = {}
        for role in ("ra", "dec"):
            coords[role] = None
            if role in roles:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    try:
                        found = np.asarray(raw.cells[roles[role]], dtype=float)
                    except (ValueError, TypeError):
                        found = np.array([])
                found = found[np.isfinite(found)] if found.size else found
                coords[role] = float(found[0]) if found.size else None
        scale = self._scale_of(part, raw, keep, file)
        return {
            "time": time,
            "mag": mag,
            "err": err,
            "band": band.astype(object),
            "excluded": excluded,
            "ra": coords["ra"],
            "dec": coords["dec"],
            "scale": scale,
            "file": file,
            "columns": {r: c for r, c in roles.items()},
            "notes": notes,
        }

    @staticmethod
    def _in_range(values, keep, rows, part: _FilePart, tally: _Tally) -> np.ndarray:
        """Rows whose magnitude and error lie in physical ranges (others are skipped, counted)."""
        roles, file = part.resolved.roles, part.table.file
        mag_name = roles.get("mag") or f"{roles.get('flux')} (as magnitude)"
        err_name = roles.get("err") or f"{roles.get('flux_err')} (as magnitude error)"
        low, high = MAG_RANGE
        mag = values["mag"]
        with np.errstate(invalid="ignore"):
            bad_mag = keep & np.isfinite(mag) & ((mag < low) | (mag > high))
            bad_mag |= keep & np.isinf(mag)
            bad_err = np.zeros_like(keep)
            if "err" in values:
                err = values["err"]
                # zero and negative errors are left to the cleaning rules, which report them
                bad_err = keep & ~bad_mag & ((err > MAX_MAG_ERR) | np.isinf(err))
        for i in np.flatnonzero(bad_mag):
            tally.skip(
                file,
                rows[i],
                f"column '{mag_name}': outside {low:g} to {high:g} mag",
                f"column '{mag_name}': {mag[i]:g} is outside {low:g} to {high:g} mag",
            )
        for i in np.flatnonzero(bad_err):
            tally.skip(
                file,
                rows[i],
                f"column '{err_name}': above {MAX_MAG_ERR:g} mag",
                f"column '{err_name}': {values['err'][i]:g} is above {MAX_MAG_ERR:g} mag",
            )
        return ~(bad_mag | bad_err)

    def _scale_of(self, part: _FilePart, raw: _Rows, keep: np.ndarray, file: str) -> str:
        res = part.resolved
        scale = self.mapping.time_scale if self.mapping else None
        if scale:
            return scale
        if res.scale_column:
            found = set(np.char.strip(np.asarray(raw.cells[res.scale_column]).astype(str)[keep]))
            found.discard("")
            if len(found) > 1:
                raise ReadError(
                    f"mixed time scales: the column holds {', '.join(sorted(found))}; "
                    "split the file or convert to one scale",
                    file=file,
                    column=res.scale_column,
                )
            if found:
                from_column = normalise_scale(found.pop(), where=file, field_name=res.scale_column)
                if res.time_scale and res.time_scale != from_column:
                    raise ReadError(
                        f"mixed time scales: column {res.roles['time']!r} reads as "
                        f"{res.time_scale} but column {res.scale_column!r} says {from_column}; "
                        "give time_scale= in the mapping",
                        file=file,
                    )
                return from_column
        return res.time_scale

    def preview(self, n: int = 20) -> list[dict[str, str]]:
        """The first ``n`` rows of the first file, as text, for an import dialog."""
        return self._parts[0].table.preview(n) if self._parts else []

    @property
    def time_scale(self) -> str:
        return self._scale or (self._parts[0].resolved.time_scale if self._parts else "")

    @property
    def report(self) -> ReadReport:
        """What was read so far (final when ``complete`` is True)."""
        tally = self._tally
        first = self._parts[0].resolved.roles if self._parts else {}
        table_note = next((p.table.table_note for p in self._parts if p.table.table_note), None)
        return ReadReport(
            source=str(self.path),
            format=self.format,
            shape=self.shape,
            files=tuple(p.table.file for p in self._parts),
            columns_found=self.columns,
            columns_used=dict(first),
            time_scale=self.time_scale,
            table=table_note,
            n_stars=len(self._where),
            rows_read=tally.rows_read,
            rows_skipped=sum(tally.counts.values()),
            skipped=tuple(dict(s) for s in tally.skipped),
            skip_counts=dict(tally.counts),
            notes=tuple(tally.notes),
            complete=len(self._done) == len(self._where),
        )


def _check_regular(path: Path) -> None:
    """Refuse pipes, devices and sockets: reading one could wait forever."""
    try:
        mode = path.stat().st_mode
    except OSError as exc:
        raise ReadError(f"cannot open: {exc.strerror or exc}", file=str(path)) from None
    if not stat.S_ISREG(mode):
        raise ReadError(
            "not a regular file (a pipe, device or socket); save the data to a file first",
            file=str(path),
        )


def _check_inflated_size(path: Path) -> None:
    """Refuse a compressed file that would inflate beyond :data:`MAX_INFLATED_BYTES`."""
    with open(path, "rb") as handle:
        magic = handle.read(4)
    if magic[:2] == b"\x1f\x8b":
        opener, kind = gzip.open, "gzip"
    elif magic[:3] == b"BZh":
        opener, kind = bz2.open, "bzip2"
    elif magic == b"PK\x03\x04":
        try:
            with zipfile.ZipFile(path) as archive:
                size = sum(info.file_size for info in archive.infolist())
        except (zipfile.BadZipFile, OSError) as exc:
            raise ReadError(f"a damaged zip archive ({exc})", file=str(path)) from None
        if size > MAX_INFLATED_BYTES:
            _too_large(path, "zip", size)
        return
    else:
        return
    total = 0
    try:
        with opener(path, "rb") as stream:
            while block := stream.read(1 << 20):
                total += len(block)
                if total > MAX_INFLATED_BYTES:
                    _too_large(path, kind, total)
    except (OSError, EOFError, ValueError) as exc:
        raise ReadError(f"a damaged {kind} file ({exc})", file=str(path)) from None


def _too_large(path: Path, kind: str, size: int) -> None:
    raise ReadError(
        f"the {kind}-compressed file inflates to more than {MAX_INFLATED_BYTES // 2**20} MB "
        f"(at least {size // 2**20} MB); it is not read, to keep memory safe. If you trust "
        "it, decompress it yourself and read the plain file",
        file=str(path),
    )


def raw_preview(path: Path, n: int = 20) -> tuple[list[str], list[dict[str, str]]]:
    """Column names and the first ``n`` rows of a table, read with no column roles.

    For a file whose columns were not recognised: the person is shown them
    to say which column is which.
    """
    table, _fmt = _open_table(Path(path), None, None)
    return list(table.columns), table.preview(n)


def _open_table(path: Path, fmt: str | None, table):
    _check_regular(path)
    fmt = detect_format(path, fmt)
    if fmt in _DELIMITERS:
        try:
            with open(path, "rb") as handle:
                if handle.read(7) == b"# %ECSV":
                    fmt = "ecsv"
        except OSError as exc:
            raise ReadError(f"cannot open: {exc.strerror or exc}", file=str(path)) from None
    if fmt in _DELIMITERS:
        return _DelimitedTable(path, fmt), fmt
    if not path.is_file():
        raise ReadError("cannot open: no such file", file=str(path))
    if path.stat().st_size == 0:
        raise ReadError("empty file", file=str(path))
    _check_inflated_size(path)
    try:
        return _AstropyTable(path, fmt, table), fmt
    except ReadError as exc:
        if fmt != "ecsv":
            raise
        fallback = _ecsv_as_text(path, exc)
        if fallback is None:
            raise
        return fallback, fmt


def _ecsv_as_text(path: Path, failure: ReadError):
    """Read an ECSV file that astropy refuses (a bad cell) as text, row by row.

    ECSV data are delimited text under a commented header, so the text
    reader can check each row and skip the bad ones with their line numbers.
    The header's metadata is then not used (only the column names).
    """
    delimiter = None
    try:
        with open(path, "rb") as handle:
            head = handle.read(7)
            for raw in handle:
                if not raw.startswith(b"#"):
                    break
                if raw.strip() in (b"# delimiter: ','", b"# delimiter: ,"):
                    delimiter = ","
    except OSError:
        return None
    if head != b"# %ECSV":
        return None
    try:
        text_table = _DelimitedTable(path, "ascii")
    except ReadError:
        return None
    text_table.delimiter = delimiter
    if delimiter:
        text_table.columns = text_table._read_header()
    text_table.table_note = (
        f"astropy could not read the ECSV file ({failure.reason}); read its rows as text, "
        "checking each row (header metadata not used)"
    )
    return text_table


def _resolve(table, mapping, file: str) -> ResolvedColumns:
    res = resolve_columns(table.columns, mapping, file=file)
    declared = table.meta.get("time_scale") or table.meta.get("timescale")
    if declared and res.time_scale and not (mapping and mapping.time_scale):
        said = normalise_scale(declared, where=file, field_name="time_scale")
        if said != res.time_scale:
            raise ReadError(
                f"mixed time scales: column {res.roles['time']!r} reads as {res.time_scale} "
                f"but the table header says time_scale {said}; give time_scale= in the mapping",
                file=file,
            )
    if not res.time_scale and not res.scale_column:
        if declared:
            scale = normalise_scale(declared, where=file, field_name="time_scale")
            res = ResolvedColumns(**{**res.__dict__, "time_scale": scale})
        else:
            raise ReadError(
                f"the time column {res.roles['time']!r} does not say its time scale; name it "
                "jd, mjd, hjd or bjd_tdb, or give time_scale= (JD, MJD, HJD, BJD_TDB) in the "
                "mapping",
                file=file,
                column=res.roles["time"],
            )
    return res


def open_photometry(
    path: str | os.PathLike,
    mapping: ColumnMapping | None = None,
    *,
    format: str | None = None,
    table: str | int | None = None,
) -> PhotometrySource:
    """Open a long photometry table or a folder of one-star files.

    Parameters
    ----------
    path : path
        A file (CSV, TSV, text, ECSV, FITS, VOTable) or a folder of such files.
    mapping : ColumnMapping, optional
        Overrides column detection.
    format : str, optional
        One of :data:`FORMATS`; by default from the file name.
    table : str or int, optional
        For a FITS file or VOTable with several tables: the table name, or
        the HDU number (FITS) / table position (VOTable).  The report says
        which one was read.

    Raises
    ------
    ReadError
        If the file or folder cannot be read as photometry.
    """
    path = Path(path)
    if path.is_dir():
        files = sorted(
            p
            for p in path.iterdir()
            if p.is_file()
            and any(p.name.lower().endswith(e) for es in FORMATS.values() for e in es)
        )
        if not files:
            accepted = ", ".join(e for es in FORMATS.values() for e in es)
            raise ReadError(f"the folder holds no photometry files ({accepted})", file=str(path))
        parts, formats = [], set()
        for file in files:
            tab, fmt = _open_table(file, format, table)
            formats.add(fmt)
            parts.append(_FilePart(tab, _resolve(tab, mapping, str(file)), []))
        source = PhotometrySource(path, "folder", "+".join(sorted(formats)), parts, mapping)
    else:
        if not path.exists():
            raise ReadError("cannot open: no such file or folder", file=str(path))
        _check_regular(path)
        tab, fmt = _open_table(path, format, table)
        parts = [_FilePart(tab, _resolve(tab, mapping, str(path)), [])]
        source = PhotometrySource(path, "long table", fmt, parts, mapping)
    source._index()
    return source
