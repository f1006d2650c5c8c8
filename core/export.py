"""The vetted catalogue: one row per star, in open standard formats.

Every number in a row belongs to the class and the period in that row: the
row's numbers are the star's *final numbers* (:mod:`core.final`), stored with
the verdict when the person decided, or with the analysis result for the
top suggestion when nobody has yet.  The export reads them through the
result model (:mod:`core.results`) and never recomputes or guesses.

:func:`write_catalogue` writes ECSV, FITS, VOTable (with IVOA UCDs) or CSV.
Rows are streamed: a first pass writes each row to a temporary spool file
(one star's stored result in memory at a time) and learns the bands and text
widths; the second pass writes the rows in batches.  Provenance (program,
date, settings, relations cited, the ledger's checksum) goes in the headers
of ECSV, FITS and VOTable, and next to a CSV in a sidecar file
``NAME.csv.about.json`` (the CSV's first line is its header).  Files are
written under a temporary name in the target folder and renamed.

Texts: control characters are written as ``\\xNN`` in every format (so a
star id with one still gives well-formed XML and one CSV line per row); in
the CSV, a text cell that a spreadsheet would run as a formula (starting
with ``=``, ``+``, ``@``, a tab, a carriage return, or ``-`` followed by a
non-digit) is prefixed with ``'``.  FITS texts are transliterated to ASCII.

Missing numbers are NaN (empty cells in the CSV); missing texts are empty.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import marshal
import math
import os
import re
import struct
import subprocess
import sys
import tempfile
import warnings
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import astropy.units as u
import numpy as np
from astropy.table import Table

from . import __version__
from .errors import PhasewiseError
from .final import FinalNumbers, matches_verdict, result_key
from .ledger import VERDICT_STATUSES, Ledger
from .results import FourierTerms, PhysicsValue, StarResult, number

__all__ = [
    "FORMATS",
    "COLUMNS",
    "BAND_COLUMNS",
    "Column",
    "catalogue_rows",
    "catalogue_table",
    "provenance",
    "write_catalogue",
    "sidecar_path",
    "neutralise_formula",
    "escape_controls",
]

#: Export formats and the file extensions that imply them.
FORMATS = {
    "ecsv": (".ecsv",),
    "fits": (".fits", ".fit", ".fts"),
    "votable": (".vot", ".votable", ".xml"),
    "csv": (".csv",),
}

#: Verdict states exported by default.
DEFAULT_STATUSES = ("confirmed", "relabelled")


@dataclass(frozen=True)
class Column:
    """One catalogue column: name, unit, UCD, description and kind (float, int, text)."""

    name: str
    unit: u.UnitBase | None
    ucd: str
    description: str
    kind: str = "float"

    @property
    def text(self) -> bool:
        return self.kind == "text"


def _c(name, unit, ucd, description, kind="float"):
    return Column(name, unit, ucd, description, kind)


def _t(name, ucd, description):
    return Column(name, None, ucd, description, "text")


# Fixed columns; per-band columns come after "baseline".
_HEAD = (
    _t("star_id", "meta.id;meta.main", "star identifier"),
    _c("ra", u.deg, "pos.eq.ra;meta.main", "right ascension (ICRS)"),
    _c("dec", u.deg, "pos.eq.dec;meta.main", "declination (ICRS)"),
    _t("status", "meta.code.status", "verdict status"),
    _t("class", "src.class", "class the row's numbers belong to (verdict, else top suggestion)"),
    _t("verdict_class", "src.class", "class of the person's verdict (empty: none)"),
    _t("suggested_class", "src.class", "class of the top suggestion"),
    _c("suggested_score", None, "stat.likelihood", "score of the top suggestion (0 to 1)"),
    _c("period", u.d, "time.period", "period (none for a class without one)"),
    _c("period_err", u.d, "stat.error;time.period", "period error"),
    _t("period_source", "meta.code", "where the period came from: analysis, suggestion, person"),
    _c("epoch", u.d, "time.epoch", "epoch of phase 0 (see epoch_kind)"),
    _c("epoch_err", u.d, "stat.error;time.epoch", "error of the epoch"),
    _t("epoch_kind", "meta.code", "phase 0 at: maximum light or primary minimum"),
    _t("time_scale", "time.scale", "time scale of the epoch"),
    _c("baseline", u.d, "time.duration", "time span of the points used"),
)
_TAIL = (
    _t("fourier_band", "instr.bandpass", "band of the Fourier parameters"),
    _t("fourier_form", "meta.code", "Fourier series form (sine or cosine)"),
    _c(
        "fourier_order",
        None,
        "meta.number;stat.fit.param",
        "order of the Fourier series (-1: no fit)",
        "int",
    ),
    _c("A1", u.mag, "src.var.amplitude;stat.fit.param", "first Fourier amplitude"),
    _c("A1_err", u.mag, "stat.error;stat.fit.param", "error of A1"),
    _c("R21", None, "stat.fit.param;arith.ratio", "Fourier amplitude ratio A2/A1"),
    _c("R21_err", None, "stat.error;stat.fit.param", "error of R21"),
    _c("R31", None, "stat.fit.param;arith.ratio", "Fourier amplitude ratio A3/A1"),
    _c("R31_err", None, "stat.error;stat.fit.param", "error of R31"),
    _c("phi21", u.rad, "stat.fit.param", "Fourier phase difference phi2 - 2 phi1"),
    _c("phi21_err", u.rad, "stat.error;stat.fit.param", "error of phi21"),
    _c("phi31", u.rad, "stat.fit.param", "Fourier phase difference phi3 - 3 phi1"),
    _c("phi31_err", u.rad, "stat.error;stat.fit.param", "error of phi31"),
    _c("fap", None, "stat.probability", "false-alarm probability of the analysed period"),
    _c("period2", u.d, "time.period", "secondary period (an independent further frequency)"),
    _c("period2_snr", None, "stat.snr", "signal-to-noise ratio of the secondary period"),
    _c(
        "period_ratio",
        None,
        "time.period;arith.ratio",
        "shorter over longer of period and period2 (period2/period or its inverse)",
    ),
    # [Fe/H] is a logarithmic ratio ("dex"), which neither FITS nor VOUnit knows
    _c("feh_jk", None, "phys.abund.Fe", "photometric [Fe/H] in dex, Jurcsik-Kovacs scale"),
    _c("feh_jk_err", None, "stat.error;phys.abund.Fe", "error of feh_jk in dex"),
    _c("feh_zw", None, "phys.abund.Fe", "photometric [Fe/H] in dex, Zinn-West scale"),
    _c("feh_zw_err", None, "stat.error;phys.abund.Fe", "error of feh_zw in dex"),
    _c("feh_c09", None, "phys.abund.Fe", "photometric [Fe/H] in dex, Carretta et al. 2009 scale"),
    _c("feh_c09_err", None, "stat.error;phys.abund.Fe", "error of feh_c09 in dex"),
    _t("feh_relation", "meta.ref", "relations used for [Fe/H] (with their citations)"),
    _c("ebv", u.mag, "phot.color.excess", "E(B-V) used for the extinction"),
    _c("ebv_err", u.mag, "stat.error;phot.color.excess", "error of E(B-V)"),
    _c("extinction_v", u.mag, "phys.absorption;em.opt.V", "extinction A_V used"),
    _c("extinction_v_err", u.mag, "stat.error;phys.absorption;em.opt.V", "error of A_V"),
    _c("abs_mag", u.mag, "phys.magAbs", "absolute magnitude"),
    _c("abs_mag_err", u.mag, "stat.error;phys.magAbs", "error of the absolute magnitude"),
    _t("abs_mag_band", "instr.bandpass", "band of the absolute magnitude"),
    _t("abs_mag_relation", "meta.ref", "relation used for the absolute magnitude"),
    _c("dist_mod", u.mag, "phot.mag.distMod", "distance modulus (extinction removed)"),
    _c("dist_mod_err", u.mag, "stat.error;phot.mag.distMod", "error of the distance modulus"),
    _c("distance", u.pc, "pos.distance", "distance"),
    _c("distance_err", u.pc, "stat.error;pos.distance", "error of the distance"),
    _t("distance_relation", "meta.ref", "relations used for the distance"),
    _t("flags", "meta.code.qual", "flags (semicolon separated)"),
    _t("note", "meta.note", "note of the verdict"),
    _t("verdict_time", "time.creation", "when the verdict was made (UTC, ISO 8601)"),
)

#: Names of the fixed columns, in order (per-band columns come after ``baseline``).
COLUMNS = tuple(c.name for c in _HEAD + _TAIL)
_TEXT_NAMES = tuple(c.name for c in _HEAD + _TAIL if c.text)
#: Key of a row's list of bands while it is built (not a column).
_BANDS_KEY = "__bands__"
#: Per-band columns, ``{band}`` replaced by the band's name.
BAND_COLUMNS = (
    "n_points_{band}",
    "mean_mag_{band}",
    "mean_mag_{band}_err",
    "intensity_mean_mag_{band}",
    "intensity_mean_mag_{band}_err",
    "amplitude_{band}",
    "amplitude_{band}_err",
    "depth2_{band}",
    "depth2_{band}_err",
)

_BAND_UCD = {
    "U": "em.opt.U",
    "B": "em.opt.B",
    "V": "em.opt.V",
    "R": "em.opt.R",
    "I": "em.opt.I",
    "J": "em.IR.J",
    "H": "em.IR.H",
    "K": "em.IR.K",
    "Ks": "em.IR.K",
}


def _safe(band: str) -> str:
    return "".join(ch if ch.isalnum() else "_" for ch in band)


def _band_columns(band: str) -> tuple[Column, ...]:
    em = f";{_BAND_UCD[band]}" if band in _BAND_UCD else ""
    s = _safe(band)
    return (
        _c(f"n_points_{s}", None, f"meta.number{em}", f"points used in {band}", "int"),
        _c(f"mean_mag_{s}", u.mag, f"phot.mag;stat.mean{em}", f"magnitude mean in {band}"),
        _c(f"mean_mag_{s}_err", u.mag, f"stat.error;phot.mag{em}", f"error of mean_mag_{s}"),
        _c(
            f"intensity_mean_mag_{s}",
            u.mag,
            f"phot.mag;stat.mean{em}",
            f"intensity-mean magnitude in {band}",
        ),
        _c(
            f"intensity_mean_mag_{s}_err",
            u.mag,
            f"stat.error;phot.mag{em}",
            f"error of intensity_mean_mag_{s}",
        ),
        _c(
            f"amplitude_{s}",
            u.mag,
            f"src.var.amplitude{em}",
            f"peak-to-peak amplitude in {band} (eclipsing: primary depth of the folded curve)",
        ),
        _c(f"amplitude_{s}_err", u.mag, f"stat.error;src.var.amplitude{em}", "amplitude error"),
        _c(
            f"depth2_{s}",
            u.mag,
            f"src.var.amplitude{em}",
            f"secondary eclipse depth in {band} (eclipsing only)",
        ),
        _c(f"depth2_{s}_err", u.mag, f"stat.error;src.var.amplitude{em}", "error of depth2"),
    )


# ------------------------------------------------------------------ texts
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")
_FORMULA = re.compile(r"^(?:[=+@\t\r]|-(?![0-9]))")


def escape_controls(text: str) -> str:
    """``text`` with control characters written as ``\\xNN`` (XML and line safe)."""
    return _CONTROL.sub(lambda m: f"\\x{ord(m.group()):02x}", text)


def neutralise_formula(text: str) -> str:
    """A CSV cell a spreadsheet will show as text: ``'`` before a formula-like start."""
    return "'" + text if _FORMULA.match(text) else text


# ------------------------------------------------------------------ rows
def _physics_pick(items: Iterable[PhysicsValue], prefix: str) -> PhysicsValue | None:
    for item in items:
        if str(item.quantity or "").startswith(prefix):
            return item
    return None


def _relation(item: PhysicsValue | None) -> str:
    if item is None:
        return ""
    name, citation = str(item.relation or ""), str(item.citation or "")
    if name and citation and citation not in name:
        return f"{name} ({citation})"
    return name or citation


_TO_PC: dict[str, float] = {}


def _distance_pc(item: PhysicsValue | None, value: Any) -> float:
    value = number(value)
    if item is None or value is None:
        return math.nan
    if item.unit:
        if item.unit not in _TO_PC:  # astropy's conversion, worked out once per unit
            _TO_PC[item.unit] = float(u.Unit(item.unit).to(u.pc))
        value *= _TO_PC[item.unit]
    return value


def _n(value: Any) -> float:
    out = number(value)
    return math.nan if out is None else out


def _final_of(verdict, result: StarResult | None) -> tuple[FinalNumbers | None, list[str]]:
    """The final numbers a row shows, and flags about where they come from.

    A decided verdict (confirmed, relabelled, rejected) shows the numbers
    stored with it; an undecided one the top suggestion's, stored with the
    analysis result.  A confirmation stored without numbers shows the
    suggestion's when they are the ones it asks for.  Nothing is recomputed.
    """
    flags: list[str] = []
    decided = verdict.status in _DECIDED
    stored = verdict.final if decided else None
    final = FinalNumbers.from_dict(stored) if stored else None
    if final is None and result is not None and isinstance(result.final, Mapping):
        if "error" in result.final:
            flags.append(str(result.final["error"]))
        else:
            suggested = FinalNumbers.from_dict(result.final)
            if not decided or matches_verdict(
                suggested, verdict.status, verdict.class_code, verdict.period
            ):
                final = suggested
    if decided and final is None and verdict.status != "rejected":
        flags.append("final numbers of this verdict not stored; run 'phasewise finalise'")
    if final is not None and result is not None and final.result_key != result_key(result):
        flags.append("final numbers from an earlier analysis; run 'phasewise finalise'")
    return final, flags


def catalogue_row(verdict, info: Mapping[str, Any], summary, stored=None) -> dict[str, Any]:
    """One catalogue row (a dict keyed by column name) of one star.

    The row also lists its bands under ``"__bands__"`` (taken out when the
    row is written).

    ``summary`` is the ledger's ``StarRow`` (the suggestion, FAP, flags and
    freshness, read without the full result); ``stored`` its ``StoredResult``,
    read only when the row needs numbers stored with the result (an
    undecided star, or a decision stored without its numbers).
    """
    result = None
    if stored is not None and stored.result and not stored.failed:
        result = StarResult.from_dict(stored.result)
    final, flags = _final_of(verdict, result)
    flags = [*summary.flags, *flags]
    if summary.stale:
        flags.append("stale_analysis")
    if stored is not None and stored.damaged:
        flags.append("the stored result is damaged; see 'phasewise ledger check'")
    elif summary.failed:
        flags.append("analysis failed")
    if final is not None:
        flags.extend(final.flags)
    suggested = summary.suggested_class or ""
    if verdict.status == "rejected":
        row_class = verdict.class_code or ""
    elif final is not None:
        row_class = final.class_code
    else:
        row_class = verdict.class_code or suggested
    row: dict[str, Any] = {
        "star_id": str(verdict.star_id),
        "ra": _n(info.get("ra")),
        "dec": _n(info.get("dec")),
        "status": verdict.status,
        "class": row_class,
        "verdict_class": verdict.class_code or "",
        "suggested_class": suggested,
        "suggested_score": _n(summary.suggested_score),
        "time_scale": (final.time_scale if final else None) or info.get("time_scale") or "",
        "fap": _n(summary.fap),
        "note": verdict.note or "",
        "verdict_time": verdict.decided_at or "",
        "fourier_order": -1,
    }
    _final_columns(row, final, flags)
    row["flags"] = ";".join(dict.fromkeys(f for f in flags if f))
    return row


def _final_columns(row: dict[str, Any], final: FinalNumbers | None, flags: list[str]) -> None:
    f = final
    row.update(
        period=_n(f.period) if f else math.nan,
        period_err=_n(f.period_err) if f else math.nan,
        period_source=(f.period_source or "") if f else "",
        epoch=_n(f.epoch) if f else math.nan,
        epoch_err=_n(f.epoch_err) if f else math.nan,
        epoch_kind=(f.epoch_kind or "") if f else "",
        baseline=_n(f.baseline) if f else math.nan,
        period2=_n(f.period2) if f else math.nan,
        period2_snr=_n(f.period2_snr) if f else math.nan,
        period_ratio=_n(f.period_ratio) if f else math.nan,
    )
    fourier = (f.fourier if f else None) or {}
    terms = FourierTerms.from_dict(fourier)
    row["fourier_band"] = (f.fourier_band or "") if f and fourier else ""
    row["fourier_form"] = str(terms.form or "")
    row["fourier_order"] = int(terms.order) if terms.order is not None else -1
    row["A1"], row["A1_err"] = _n(terms.amplitude(1)), _n(terms.amplitude_err(1))
    for name in ("R21", "R31", "phi21", "phi31"):
        row[name] = _n(terms.value(name))
        row[f"{name}_err"] = _n(terms.value(f"{name}_err"))
    row[_BANDS_KEY] = [_safe(band) for band in (f.bands if f else ())]
    for band, numbers in (f.bands if f else {}).items():
        s = _safe(band)
        row[f"n_points_{s}"] = int(numbers.n_points)
        row[f"mean_mag_{s}"] = _n(numbers.mean_mag)
        row[f"mean_mag_{s}_err"] = _n(numbers.mean_mag_err)
        row[f"intensity_mean_mag_{s}"] = _n(numbers.intensity_mean_mag)
        row[f"intensity_mean_mag_{s}_err"] = _n(numbers.intensity_mean_mag_err)
        row[f"amplitude_{s}"] = _n(numbers.amplitude)
        row[f"amplitude_{s}_err"] = _n(numbers.amplitude_err)
        row[f"depth2_{s}"] = _n(numbers.depth_secondary)
        row[f"depth2_{s}_err"] = _n(numbers.depth_secondary_err)
    physics = [PhysicsValue.from_dict(p) for p in (f.physics if f else ())]
    scales = {"feh_jk": "[Fe/H]_JK", "feh_zw": "[Fe/H]_ZW", "feh_c09": "[Fe/H]_C09"}
    feh_relations = []
    for column, quantity in scales.items():
        item = next((p for p in physics if p.quantity == quantity), None)
        row[column] = _n(item.value) if item else math.nan
        row[f"{column}_err"] = _n(item.err) if item else math.nan
        if item is not None:
            feh_relations.append(_relation(item))
    row["feh_relation"] = " + ".join(feh_relations)
    absolute = _physics_pick(physics, "M_")
    extinction = _physics_pick(physics, "A_V")
    modulus = distance = None
    if absolute is not None:  # the distance that follows this absolute magnitude
        for item in physics[physics.index(absolute) + 1 :]:
            if item.quantity == "mu0" and modulus is None:
                modulus = item
            elif item.quantity == "distance" and distance is None:
                distance = item
            elif str(item.quantity).startswith("M_"):
                break
    row.update(
        abs_mag=_n(absolute.value) if absolute else math.nan,
        abs_mag_err=_n(absolute.err) if absolute else math.nan,
        abs_mag_band=str(absolute.quantity)[2:] if absolute else "",
        abs_mag_relation=_relation(absolute),
        dist_mod=_n(modulus.value) if modulus else math.nan,
        dist_mod_err=_n(modulus.err) if modulus else math.nan,
        distance=_distance_pc(distance, distance.value) if distance else math.nan,
        distance_err=_distance_pc(distance, distance.err) if distance else math.nan,
        distance_relation=_relation(distance) or _relation(modulus),
        extinction_v=_n(extinction.value) if extinction else math.nan,
        extinction_v_err=_n(extinction.err) if extinction else math.nan,
        ebv=_n(f.ebv) if f and physics else math.nan,
        ebv_err=_n(f.ebv_err) if f and physics else math.nan,
    )
    for item in physics:
        if item in (absolute, modulus, distance, extinction) or item.quantity in scales.values():
            flags.extend(str(x) for x in item.flags or ())


def _check_statuses(statuses: Iterable[str]) -> tuple[str, ...]:
    statuses = tuple(statuses)
    for status in statuses:
        if status not in VERDICT_STATUSES:
            raise PhasewiseError(
                f"unknown verdict status {status!r}; expected one of {', '.join(VERDICT_STATUSES)}",
                field="status",
            )
    return statuses


def catalogue_rows(
    ledger: Ledger,
    statuses: Iterable[str] = DEFAULT_STATUSES,
    *,
    start: int = 0,
    stop: int | None = None,
) -> Iterator[dict[str, Any]]:
    """The catalogue's rows, in import order, read from the ledger a chunk at a time.

    The stars are chosen from the ledger's narrow summary lines; a decided
    star's row comes from its verdict (with the final numbers stored with
    it) and its summary line; the full analysis result is read only for
    undecided stars and decisions stored without numbers, one query per
    chunk.  At most one chunk of stars' records is in memory.  ``start`` and
    ``stop`` select the stars at those import positions (as a slice does).
    """
    statuses = _check_statuses(statuses)
    summaries = iter(ledger.star_rows(start, stop))
    for chunk in ledger.verdict_chunks(_READ_CHUNK, start=start, stop=stop):
        rows = []
        for verdict, info in chunk:
            # both come in import order, from the verdicts table
            summary = next(summaries)
            if summary.star_id != verdict.star_id:  # pragma: no cover - a ledger invariant
                raise PhasewiseError(
                    f"star {verdict.star_id!r}: the summary and verdict tables disagree; "
                    "run 'phasewise ledger check'",
                    file=str(ledger.path),
                )
            if summary.status in statuses:
                rows.append((verdict, info, summary))
        needs_result = [v.star_id for v, _, _ in rows if not (v.status in _DECIDED and v.final)]
        stored = ledger.results_of(needs_result) if needs_result else {}
        for verdict, info, summary in rows:
            yield catalogue_row(verdict, info, summary, stored.get(verdict.star_id))
        del rows, stored


#: Stars read from the ledger per query in the export (a chunk's final numbers in memory).
_READ_CHUNK = 2000


#: Verdict states whose row shows the numbers stored with the verdict.
_DECIDED = ("confirmed", "relabelled", "rejected")


# ------------------------------------------------------------------ the spool
#: Length prefix of a spooled row.
_LENGTH = struct.Struct("<I")


class _Spool:
    """Rows written once to temporary files, with what the writers need.

    Rows are spooled with :meth:`add`; :meth:`absorb` takes over the file of
    a part spooled by another process (:func:`_spool_part`).  ``batches``
    reads the parts back in the order they were added.
    """

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.parts: list[tuple[Any, int]] = []  # (open binary file, rows in it)
        self.n = 0
        self.band_count: dict[str, int] = {}
        self.widths: dict[str, int] = {}
        self.relations: set[str] = set()
        self.time_scales: set[str] = set()
        self.leftovers: list[str] = []

    @classmethod
    def of(cls, rows: Iterable[dict[str, Any]], folder: Path) -> _Spool:
        spool = cls(folder)
        try:
            spool.add(rows)
        except BaseException:
            spool.close()
            raise
        return spool

    def add(self, rows: Iterable[dict[str, Any]], file=None) -> None:
        """Spool ``rows`` as one part (into ``file`` if given, else a temporary file)."""
        # our own temporary files, written and read by Phasewise only: marshal
        # keeps them fast (the rows are plain dicts of str, float and int)
        if file is None:
            file = tempfile.TemporaryFile("w+b", dir=self.folder, suffix=".rows")
        n = 0
        self.parts.append((file, 0))
        widths = self.widths
        write = file.write
        for row in rows:
            for band in row.pop(_BANDS_KEY):
                self.band_count[band] = self.band_count.get(band, 0) + 1
            for key in _TEXT_NAMES:
                value = row[key]
                if _CONTROL.search(value):
                    value = row[key] = escape_controls(value)
                # FITS transliterates to ASCII: at most three characters for one
                width = len(value) if value.isascii() else 3 * len(value)
                if width > widths.get(key, 1):
                    widths[key] = width
            for key in ("feh_relation", "abs_mag_relation", "distance_relation"):
                if row[key]:
                    self.relations.update(r for r in row[key].split(" + ") if r)
            if row["time_scale"]:
                self.time_scales.add(row["time_scale"])
            record = marshal.dumps(row)
            write(_LENGTH.pack(len(record)))
            write(record)
            n += 1
        file.flush()
        self.parts[-1] = (file, n)
        self.n += n

    def summary(self) -> dict[str, Any]:
        """What the writers need besides the rows (plain values, for another process)."""
        return {
            "n": self.n,
            "band_count": self.band_count,
            "widths": self.widths,
            "relations": sorted(self.relations),
            "time_scales": sorted(self.time_scales),
        }

    def absorb(self, path: str, summary: Mapping[str, Any]) -> None:
        """Take over a part spooled by another process into the file ``path``."""
        file = open(path, "rb")  # noqa: SIM115 - kept open until close()
        try:
            os.unlink(path)  # the open file stays readable; nothing is left behind
        except OSError:  # a system that keeps open files: removed at close()
            self.leftovers.append(path)
        self.parts.append((file, int(summary["n"])))
        self.n += int(summary["n"])
        for band, count in summary["band_count"].items():
            self.band_count[band] = self.band_count.get(band, 0) + int(count)
        for key, width in summary["widths"].items():
            self.widths[key] = max(self.widths.get(key, 1), int(width))
        self.relations.update(summary["relations"])
        self.time_scales.update(summary["time_scales"])

    @property
    def bands(self) -> list[str]:
        return sorted(self.band_count, key=lambda b: (-self.band_count[b], b))

    def columns(self) -> list[Column]:
        # band names in rows are already "safe"; the UCD needs the name as given
        return list(_HEAD) + [c for b in self.bands for c in _band_columns(b)] + list(_TAIL)

    def batches(self, size: int) -> Iterator[list[dict[str, Any]]]:
        for file, n in self.parts:
            file.seek(0)
            read = file.read
            left = n
            while left:
                batch = []
                for _ in range(min(size, left)):
                    (length,) = _LENGTH.unpack(read(_LENGTH.size))
                    batch.append(marshal.loads(read(length)))
                left -= len(batch)
                yield batch

    def close(self) -> None:
        for file, _ in self.parts:
            file.close()
        self.parts = []
        for path in self.leftovers:
            Path(path).unlink(missing_ok=True)


def _spool_part(
    ledger_path: str, statuses: list[str], start: int, stop: int, file: str
) -> dict[str, Any]:
    """Spool the rows of import positions ``start:stop`` into ``file`` (made by the caller).

    Runs in a process of its own (:func:`_parallel_spool`); returns the part's
    :meth:`_Spool.summary`.
    """
    spool = _Spool(Path(file).parent)
    with Ledger.open(ledger_path, readonly=True) as ledger, open(file, "w+b") as out:
        spool.add(catalogue_rows(ledger, tuple(statuses), start=start, stop=stop), out)
        spool.parts = []  # the file is the caller's
    return spool.summary()


def _part_main() -> None:
    """``python -m phasewise.core.export`` with one JSON request on stdin (our own use)."""
    request = json.loads(sys.stdin.read())
    try:
        reply = _spool_part(**request)
    except PhasewiseError as exc:
        reply = {"error": str(exc)}
    print(json.dumps(reply), flush=True)


#: Stars per process from which an export builds its rows in several
#: processes (below it, starting a process costs more than it saves).
_STARS_PER_PROCESS = 10_000
#: At most this many processes build rows (memory: about 200 MB each).
_MAX_PROCESSES = 4


def _processes(n_stars: int) -> int:
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    return max(1, min(cores or 1, _MAX_PROCESSES, n_stars // _STARS_PER_PROCESS))


def _spool_catalogue(ledger: Ledger, statuses: tuple[str, ...], folder: Path) -> tuple[_Spool, str]:
    """Every row of the catalogue, spooled; built in several processes for large ledgers.

    Each process reads its own slice of the stars in import order (read-only
    connections to the same file) and the parts are read back in order, so
    the rows are those of :func:`catalogue_rows`.  The ledger's checksum is
    compared before and after: a ledger written meanwhile (a verdict recorded
    during a long export) is read again, so the rows come from one state,
    whose checksum is returned with the spool (for the provenance).
    """
    for _attempt in range(3):
        before = ledger.checksum()
        n_stars = ledger.n_stars
        processes = _processes(n_stars)
        if processes == 1:
            spool = _Spool.of(catalogue_rows(ledger, statuses), folder)
        else:
            spool = _parallel_spool(ledger, statuses, folder, n_stars, processes)
        if ledger.checksum() == before:
            return spool, before
        spool.close()
    raise PhasewiseError(
        "the ledger kept changing while the catalogue was written; write it again "
        "when no analysis or other program is writing to it",
        file=str(ledger.path),
    )


def _parallel_spool(
    ledger: Ledger, statuses: tuple[str, ...], folder: Path, n_stars: int, processes: int
) -> _Spool:
    """Rows of slices of the stars spooled by other processes, the first by this one.

    The others are fresh interpreters (``python -m phasewise.core.export``)
    that import only core, whatever program calls the export (a window, a
    script without a main guard).
    """
    edges = [round(i * n_stars / processes) for i in range(processes + 1)]
    children = []
    files = []  # made here, so that they are removed whatever a child does
    try:
        for start, stop in zip(edges[1:-1], edges[2:], strict=True):
            handle, name = tempfile.mkstemp(dir=folder, suffix=".rows")
            os.close(handle)
            files.append(name)
            request = {
                "ledger_path": str(ledger.path),
                "statuses": list(statuses),
                "start": start,
                "stop": stop,
                "file": name,
            }
            # what a child says on stderr goes to a file: a full pipe would stall it
            errors = tempfile.TemporaryFile("w+", dir=folder, suffix=".log")
            try:
                child = subprocess.Popen(
                    [sys.executable, "-m", "phasewise.core.export"],
                    stdin=subprocess.PIPE,
                    stdout=subprocess.PIPE,
                    stderr=errors,
                    text=True,
                )
            except OSError as exc:
                errors.close()
                raise PhasewiseError(
                    f"could not start a process to build catalogue rows: {exc}",
                    file=str(ledger.path),
                ) from None
            children.append((child, errors))
            try:
                child.stdin.write(json.dumps(request))
                child.stdin.close()
            except BrokenPipeError:
                # it ended before reading its request: its exit code is reported below
                with contextlib.suppress(BrokenPipeError):
                    child.stdin.close()
    except BaseException:  # a child could not be started: none is left behind
        for child, errors in children:
            child.kill()
            child.wait()
            errors.close()
        for name in files:
            Path(name).unlink(missing_ok=True)
        raise
    spool = _Spool(folder)
    replies: list[dict] = []
    try:
        try:  # this process builds the first slice meanwhile
            spool.add(catalogue_rows(ledger, statuses, start=0, stop=edges[1]))
        except BaseException:
            for child, _ in children:
                child.kill()
            raise
        finally:  # every child is waited for; its file is taken over or removed
            for child, errors in children:
                out = child.stdout.read()
                child.wait()
                child.stdout.close()
                errors.seek(0)
                said = errors.read().strip()[-2000:]
                errors.close()
                try:
                    reply = json.loads(out.strip().splitlines()[-1])
                except (ValueError, IndexError):
                    reply = {
                        "error": f"a process building catalogue rows ended with exit code "
                        f"{child.returncode}: {said}"
                    }
                replies.append(reply)
        for reply in replies:
            if "error" in reply:
                raise PhasewiseError(reply["error"], file=str(ledger.path))
        for name, reply in zip(files, replies, strict=True):
            spool.absorb(name, reply)
    except BaseException:
        spool.close()
        for name in files:
            Path(name).unlink(missing_ok=True)
        raise
    return spool


def _missing(column: Column) -> Any:
    return "" if column.text else (-1 if column.kind == "int" else math.nan)


def _table(spool: _Spool, columns: list[Column], meta: Mapping[str, Any]) -> Table:
    """The spool as an astropy Table (column arrays; no row objects kept)."""
    arrays = {}
    for c in columns:
        if c.text:
            arrays[c.name] = np.zeros(spool.n, dtype=f"U{spool.widths.get(c.name, 1)}")
        elif c.kind == "int":
            arrays[c.name] = np.full(spool.n, -1, dtype=np.int32)
        else:
            arrays[c.name] = np.full(spool.n, np.nan)
    start = 0
    for batch in spool.batches(5000):
        for c in columns:
            arrays[c.name][start : start + len(batch)] = [
                row.get(c.name, _missing(c)) for row in batch
            ]
        start += len(batch)
    table = Table()
    for c in columns:
        table[c.name] = arrays[c.name]
        table[c.name].unit = c.unit
        table[c.name].description = c.description
        table[c.name].meta["ucd"] = c.ucd
    table.meta.update(meta)
    return table


def catalogue_table(ledger: Ledger, statuses: Iterable[str] = DEFAULT_STATUSES) -> Table:
    """The vetted catalogue as an astropy Table (units, UCDs in ``col.meta``), in memory."""
    spool, checksum = _spool_catalogue(
        ledger, _check_statuses(statuses), Path(tempfile.gettempdir())
    )
    try:
        meta = provenance(ledger, sorted(spool.relations), checksum)
        return _table(spool, spool.columns(), meta)
    finally:
        spool.close()


def provenance(
    ledger: Ledger, relations: Iterable[str] = (), checksum: str | None = None
) -> dict[str, Any]:
    """The provenance header: program, date, settings, relations cited, ledger checksum.

    ``checksum`` is the ledger's checksum when the rows were read (default: now).
    """
    settings = ledger.analysis_settings()
    return {
        "program": f"phasewise {__version__}",
        "date": datetime.now(UTC).isoformat(timespec="seconds"),
        "ledger": Path(ledger.path).name,
        "ledger_checksum": f"sha256:{checksum or ledger.checksum()}",
        "settings_hash": None if settings is None else settings[1],
        "analysis_settings": None if settings is None else settings[0],
        "relations": sorted(relations),
        "caution": (
            "Classes are suggestions checked by a person; [Fe/H], absolute magnitudes and "
            "distances come from published empirical relations with known scatter and "
            "calibration ranges."
        ),
    }


# ------------------------------------------------------------------ writers
def _format_for(path: Path, format: str | None) -> str:
    if format is not None:
        if format not in FORMATS:
            raise PhasewiseError(
                f"unknown format {format!r}; expected one of {', '.join(FORMATS)}",
                file=path,
                field="format",
            )
        return format
    suffix = path.suffix.lower()
    for name, suffixes in FORMATS.items():
        if suffix in suffixes:
            return name
    raise PhasewiseError(
        f"cannot tell the format from the extension {suffix!r}; give one of {', '.join(FORMATS)}",
        file=path,
        field="format",
    )


def _cell_writers(columns: list[Column], text, missing_number: str):
    """One function per column turning a spooled row into the cell's text."""

    def writer(c: Column):
        name = c.name
        if c.text:
            return lambda row: text(row.get(name, ""))
        if c.kind == "int":
            return lambda row: str(int(row.get(name, -1)))

        def number_cell(row, isfinite=math.isfinite):
            value = row.get(name)
            if value is None or not isfinite(value):
                return missing_number
            return repr(float(value))

        return number_cell

    return [writer(c) for c in columns]


def _ecsv_text(value: str) -> str:
    return '"' + value.replace('"', '""') + '"'


def _write_ecsv(spool: _Spool, columns: list[Column], meta: Mapping[str, Any], path: Path) -> None:
    """ECSV: the header from astropy (an empty table), then the rows in batches."""
    empty = Table()
    for c in columns:
        dtype = str if c.text else (np.int32 if c.kind == "int" else np.float64)
        empty[c.name] = np.zeros(0, dtype=dtype)
        empty[c.name].unit = c.unit
        empty[c.name].description = c.description
        empty[c.name].meta["ucd"] = c.ucd
    empty.meta.update(meta)
    header = io.StringIO()
    empty.write(header, format="ascii.ecsv")
    cells = _cell_writers(columns, _ecsv_text, "nan")
    with open(path, "w", encoding="utf-8", newline="") as out:
        out.write(header.getvalue())
        for batch in spool.batches(2000):
            out.write("".join(" ".join([cell(row) for cell in cells]) + "\n" for row in batch))


def sidecar_path(path: str | os.PathLike) -> Path:
    """Where the provenance of a CSV catalogue is written: ``NAME.csv.about.json``."""
    path = Path(path)
    return path.with_name(path.name + ".about.json")


def _write_csv(spool: _Spool, columns: list[Column], meta: Mapping[str, Any], path: Path) -> None:
    """CSV: the header line, then the rows in batches; NaN as an empty cell."""
    cells = _cell_writers(columns, neutralise_formula, "")
    with open(path, "w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow([c.name for c in columns])
        for batch in spool.batches(2000):
            writer.writerows([[cell(row) for cell in cells] for row in batch])


def _sidecar(columns: list[Column], meta: Mapping[str, Any], catalogue: Path) -> str:
    about = {
        "catalogue": catalogue.name,
        **meta,
        "columns": [
            {
                "name": c.name,
                "unit": "" if c.unit is None else c.unit.to_string(),
                "ucd": c.ucd,
                "description": c.description,
            }
            for c in columns
        ],
        "missing_values": "empty cell",
        "texts": "control characters as \\xNN; a leading ' marks a cell that began like a "
        "spreadsheet formula",
    }
    return json.dumps(about, indent=1, ensure_ascii=False) + "\n"


#: Typographic characters our texts use, as FITS (ASCII only) writes them.
_ASCII_FOR = str.maketrans(
    {"–": "-", "—": "-", "−": "-", "‘": "'", "’": "'", "“": '"', "”": '"', "±": "+/-", "×": "x"}
)


def _ascii(text: str) -> str:
    """``text`` in ASCII: typographic marks replaced, accents dropped, anything else '?'."""
    import unicodedata

    decomposed = unicodedata.normalize("NFKD", str(text).translate(_ASCII_FOR))
    bare = "".join(c for c in decomposed if not unicodedata.combining(c))
    return bare.encode("ascii", "replace").decode("ascii")


def _fits_dtype(columns: list[Column], widths: Mapping[str, int]) -> np.dtype:
    return np.dtype(
        [
            (
                c.name,
                f"S{widths.get(c.name, 1)}" if c.text else (">i4" if c.kind == "int" else ">f8"),
            )
            for c in columns
        ]
    )


def _write_fits(spool: _Spool, columns: list[Column], meta: Mapping[str, Any], path: Path) -> None:
    """FITS: the header from astropy, then the rows as binary records in batches.

    FITS tables and headers hold ASCII only: texts are transliterated (the
    ECSV, VOTable and CSV catalogues keep them as they are).
    """
    from astropy.io import fits

    dtype = _fits_dtype(columns, spool.widths)
    hdu = fits.BinTableHDU(np.zeros(0, dtype=dtype))
    header = hdu.header
    header["NAXIS2"] = spool.n
    header["EXTNAME"] = "VETTED"
    header["PROGRAM"] = _ascii(meta["program"])
    header["DATE"] = meta["date"]
    header["LEDGER"] = _ascii(meta["ledger"])
    header["LEDGSUM"] = meta["ledger_checksum"]
    header["SETHASH"] = meta["settings_hash"] or ""
    header["SETTINGS"] = json.dumps(meta["analysis_settings"], sort_keys=True)  # ASCII-escaped
    for index, c in enumerate(columns, start=1):
        if c.unit is not None:
            header[f"TUNIT{index}"] = c.unit.to_string(format="fits")
        header[f"TUCD{index}"] = c.ucd
        header[f"TCOMM{index}"] = _ascii(c.description)[:68]
    for relation in meta["relations"]:
        header.add_history(_ascii(f"relation cited: {relation}"))
    header.add_comment(_ascii(meta["caution"]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fits.verify.VerifyWarning)
        primary = fits.PrimaryHDU().header.tostring()
        table_header = header.tostring()
    written = 0
    with open(path, "wb") as out:
        out.write(primary.encode("ascii"))
        out.write(table_header.encode("ascii"))
        for batch in spool.batches(5000):
            records = np.zeros(len(batch), dtype=dtype)
            for c in columns:
                name = c.name
                if c.text:
                    records[name] = [_ascii(row.get(name, "")).encode("ascii") for row in batch]
                else:
                    missing = -1 if c.kind == "int" else math.nan
                    records[name] = [row.get(name, missing) for row in batch]
            out.write(records.tobytes())
            written += records.nbytes
        out.write(b"\0" * (-written % 2880))  # FITS blocks are 2880 bytes


def _write_votable(
    spool: _Spool, columns: list[Column], meta: Mapping[str, Any], path: Path
) -> None:
    """VOTable: the document from astropy around one dummy row, whose place the
    rows take, written in batches as TABLEDATA."""
    from xml.sax.saxutils import escape

    from astropy.io.votable import from_table, writeto
    from astropy.io.votable.tree import Info

    dummy = Table()
    for c in columns:
        if c.text:
            dummy[c.name] = np.array([""], dtype=f"U{spool.widths.get(c.name, 1)}")
        else:
            dummy[c.name] = np.zeros(1, dtype=np.int32 if c.kind == "int" else np.float64)
    votable = from_table(dummy)
    votable.version = "1.4"  # TIMESYS needs 1.4
    resource = votable.resources[0]
    vtable = resource.tables[0]
    vtable.name = "vetted_catalogue"
    vtable.description = "Vetted catalogue of variable stars written by Phasewise."
    for field, c in zip(vtable.fields, columns, strict=True):
        field.ucd = c.ucd
        field.description = c.description
        field.unit = c.unit
    _add_time_system(votable, vtable, spool.time_scales)
    for key in ("program", "date", "ledger", "ledger_checksum", "settings_hash"):
        resource.infos.append(Info(name=key, value=escape_controls(str(meta[key] or ""))))
    resource.infos.append(
        Info(name="analysis_settings", value=json.dumps(meta["analysis_settings"], sort_keys=True))
    )
    for relation in meta["relations"]:
        resource.infos.append(Info(name="relation", value=escape_controls(relation)))
    resource.infos.append(Info(name="caution", value=meta["caution"]))
    document = io.BytesIO()
    writeto(votable, document)
    text = document.getvalue().decode("utf-8")
    start = text.index("<TABLEDATA>") + len("<TABLEDATA>")
    end = text.index("</TABLEDATA>")
    cells = _cell_writers(columns, escape, "NaN")
    with open(path, "w", encoding="utf-8") as out:
        out.write(text[:start] + "\n")
        for batch in spool.batches(2000):
            out.write(
                "".join(
                    "<TR>" + "".join(["<TD>" + cell(row) + "</TD>" for cell in cells]) + "</TR>\n"
                    for row in batch
                )
            )
        out.write("    " + text[end:])


# VOTable 1.4 TIMESYS for each Phasewise time scale: (time scale, reference position,
# origin).  HJD and JD record no time scale of their own (IVOA allows "UNKNOWN").
_TIMESYS = {
    "JD": ("UNKNOWN", "TOPOCENTER", "JD-origin"),
    "MJD": ("UNKNOWN", "TOPOCENTER", "MJD-origin"),
    "HJD": ("UNKNOWN", "HELIOCENTER", "JD-origin"),
    "BJD_TDB": ("TDB", "BARYCENTER", "JD-origin"),
}


def _add_time_system(votable, vtable, scales: set[str]) -> None:
    """Tie the epoch to a TIMESYS element when every row has the same time scale."""
    from astropy.io.votable.tree import TimeSys

    if len(scales) != 1 or next(iter(scales)) not in _TIMESYS:
        return
    timescale, refposition, origin = _TIMESYS[next(iter(scales))]
    votable.time_systems.append(
        TimeSys(
            ID="epoch_system",
            timeorigin=origin,
            timescale=timescale,
            refposition=refposition,
            config={"version": "1.4", "version_1_4_or_later": True},
        )
    )
    for field in vtable.fields:
        if field.name == "epoch":
            field.ref = "epoch_system"


_WRITERS = {"ecsv": _write_ecsv, "csv": _write_csv, "fits": _write_fits, "votable": _write_votable}


def _replace_atomically(path: Path, write) -> None:
    """Write with ``write(temp_path)`` beside ``path``, then rename over it."""
    handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".partial", dir=path.parent)
    os.close(handle)
    temp = Path(name)
    try:
        temp.unlink()  # astropy's FITS writer refuses an existing file
        write(temp)
        os.replace(temp, path)
    except BaseException:
        temp.unlink(missing_ok=True)
        raise


def write_catalogue(
    ledger: Ledger,
    path: str | os.PathLike,
    format: str | None = None,
    statuses: Iterable[str] = DEFAULT_STATUSES,
) -> int:
    """Write the vetted catalogue; returns the number of stars written.

    Parameters
    ----------
    ledger : Ledger
    path : path
        Target file; replaced atomically if it exists.  A CSV gets its
        provenance and column descriptions in :func:`sidecar_path`.
    format : {"ecsv", "fits", "votable", "csv"}, optional
        Default: from the extension.
    statuses : iterable of str
        Verdict states to include (default confirmed and relabelled).
    """
    path = Path(path)
    format = _format_for(path, format)
    statuses = _check_statuses(statuses)
    if not path.parent.is_dir():
        raise PhasewiseError("the folder does not exist", file=path.parent)
    if path.is_dir():
        raise PhasewiseError("is a folder; give a file name for the catalogue", file=path)
    spool, checksum = _spool_catalogue(ledger, statuses, path.parent)
    try:
        columns = spool.columns()
        meta = provenance(ledger, spool.relations, checksum)
        _replace_atomically(path, lambda temp: _WRITERS[format](spool, columns, meta, temp))
        if format == "csv":
            text = _sidecar(columns, meta, path)
            _replace_atomically(
                sidecar_path(path), lambda temp: temp.write_text(text, encoding="utf-8")
            )
    finally:
        spool.close()
    return spool.n


if __name__ == "__main__":
    _part_main()
