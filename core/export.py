"""The vetted catalogue: one row per decided star, in open standard formats.

:func:`catalogue_table` builds an astropy :class:`~astropy.table.Table` from a
ledger (verdicts override the machine's suggestion); :func:`write_catalogue`
writes it as ECSV, FITS, VOTable (with IVOA UCDs) or CSV, each with a
provenance header: program version, date, analysis settings, the relations
cited, and the ledger's checksum.  Files are written under a temporary name
in the target folder and renamed, so an interrupted export never leaves half
a file.

Missing numbers are NaN; missing text is the empty string.
"""

from __future__ import annotations

import json
import math
import os
import uuid
import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import astropy.units as u
import numpy as np
from astropy.table import Column as TableColumn
from astropy.table import MaskedColumn, Table

from . import __version__
from .errors import PhasewiseError
from .ledger import VERDICT_STATUSES, Ledger

__all__ = ["FORMATS", "COLUMNS", "catalogue_table", "provenance", "write_catalogue"]

#: Export formats and the file extensions that imply them.
FORMATS = {
    "ecsv": (".ecsv",),
    "fits": (".fits", ".fit", ".fts"),
    "votable": (".vot", ".votable", ".xml"),
    "csv": (".csv",),
}


@dataclass(frozen=True)
class Column:
    """One catalogue column: name, unit, UCD and description."""

    name: str
    unit: u.UnitBase | None
    ucd: str
    description: str
    text: bool = False


def _c(name, unit, ucd, description, text=False):
    return Column(name, unit, ucd, description, text)


# Fixed columns; per-band columns are inserted after "time_scale".
_HEAD = (
    _c("star_id", None, "meta.id;meta.main", "star identifier", True),
    _c("ra", u.deg, "pos.eq.ra;meta.main", "right ascension (ICRS)"),
    _c("dec", u.deg, "pos.eq.dec;meta.main", "declination (ICRS)"),
    _c("class", None, "src.class", "class (verdict, else top suggestion)", True),
    _c("status", None, "meta.code.status", "verdict status", True),
    _c("period", u.d, "time.period", "period"),
    _c("period_err", u.d, "stat.error;time.period", "period error"),
    _c("epoch_max", u.d, "time.epoch;stat.max", "epoch of maximum light"),
    _c("time_scale", None, "time.scale", "time scale of epoch_max", True),
)
_TAIL = (
    _c(
        "fourier_order",
        None,
        "meta.number;stat.fit.param",
        "order of the Fourier series (-1: no fit)",
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
    _c("fourier_form", None, "meta.code", "Fourier series form (sine or cosine)", True),
    _c("fap", None, "stat.probability", "false-alarm probability of the period"),
    _c("period2", u.d, "time.period", "secondary period"),
    _c("period_ratio", None, "time.period;arith.ratio", "period ratio"),
    # [Fe/H] is a logarithmic ratio ("dex"), which neither FITS nor VOUnit knows
    _c("feh", None, "phys.abund.Z", "photometric metallicity [Fe/H] in dex"),
    _c("feh_err", None, "stat.error;phys.abund.Z", "error of [Fe/H] in dex"),
    _c("feh_relation", None, "meta.ref", "relation used for [Fe/H]", True),
    _c("abs_mag", u.mag, "phys.magAbs", "absolute magnitude"),
    _c("abs_mag_err", u.mag, "stat.error;phys.magAbs", "error of the absolute magnitude"),
    _c("abs_mag_band", None, "meta.code", "band of the absolute magnitude", True),
    _c("abs_mag_relation", None, "meta.ref", "relation used for the absolute magnitude", True),
    _c("dist_mod", u.mag, "phot.mag.distMod", "distance modulus"),
    _c("dist_mod_err", u.mag, "stat.error;phot.mag.distMod", "error of the distance modulus"),
    _c("distance", u.pc, "pos.distance", "distance"),
    _c("distance_err", u.pc, "stat.error;pos.distance", "error of the distance"),
    _c("distance_relation", None, "meta.ref", "relations used for the distance", True),
    _c("flags", None, "meta.code.qual", "flags (semicolon separated)", True),
    _c("note", None, "meta.note", "note of the verdict", True),
    _c("verdict_time", None, "time.creation", "when the verdict was made (UTC, ISO 8601)", True),
)

#: Names of the fixed columns, in order (per-band columns come after ``time_scale``).
COLUMNS = tuple(c.name for c in _HEAD + _TAIL)

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


def _band_columns(band: str) -> tuple[Column, Column]:
    suffix = f";{_BAND_UCD[band]}" if band in _BAND_UCD else ""
    safe = "".join(ch if ch.isalnum() else "_" for ch in band)
    return (
        _c(f"mean_mag_{safe}", u.mag, f"phot.mag{suffix}", f"mean magnitude in {band}"),
        _c(
            f"amplitude_{safe}",
            u.mag,
            f"src.var.amplitude{suffix}",
            f"peak-to-peak amplitude in {band}",
        ),
    )


def _number(value: Any) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return math.nan
    return number if math.isfinite(number) else math.nan


def _first(sequence: Any, index: int = 0) -> Any:
    if isinstance(sequence, Sequence) and not isinstance(sequence, str) and len(sequence) > index:
        return sequence[index]
    return None


def _physics(result: Mapping[str, Any], prefix: str) -> dict[str, Any]:
    for item in result.get("physics") or []:
        quantity = str(item.get("quantity", ""))
        if quantity == prefix or quantity.startswith(prefix):
            return dict(item)
    return {}


def _relation(item: Mapping[str, Any]) -> str:
    name = item.get("relation") or ""
    citation = item.get("citation") or ""
    if name and citation and citation not in name:
        return f"{name} ({citation})"
    return str(name or citation)


def _distance_pc(item: Mapping[str, Any], key: str) -> float:
    value = _number(item.get(key))
    unit = item.get("unit")
    if unit and math.isfinite(value):
        value = (value * u.Unit(unit)).to_value(u.pc)
    return value


def _row(star: str, info, verdict, stored, bands) -> dict[str, Any]:
    result = (stored.result if stored is not None and stored.result else None) or {}
    suggestions = result.get("suggestions") or []
    top = suggestions[0] if suggestions else {}
    flags = [str(f) for f in (result.get("flags") or [])]
    period = _number(result.get("period"))
    period_err = _number(result.get("period_err"))
    if verdict.period is not None:
        if not (math.isfinite(period) and math.isclose(verdict.period, period, rel_tol=1e-9)):
            period_err = math.nan  # the analysis error belongs to another period
            flags.append("period_from_verdict")
        period = verdict.period
    if stored is not None and stored.stale:
        flags.append("stale_analysis")
    fourier = result.get("fourier") or {}
    feh = _physics(result, "feh")
    absolute = _physics(result, "M_")
    modulus = _physics(result, "mu")
    distance = _physics(result, "distance")
    secondary = _first(result.get("secondary_periods"))
    row = {
        "star_id": star,
        "ra": _number(info["ra"]),
        "dec": _number(info["dec"]),
        "class": verdict.class_code or top.get("class") or top.get("class_code") or "",
        "status": verdict.status,
        "period": period,
        "period_err": period_err,
        "epoch_max": _number(result.get("epoch_max")),
        "time_scale": result.get("time_scale") or info["time_scale"] or "",
        "fourier_order": int(fourier["order"]) if fourier.get("order") is not None else -1,
        "A1": _number(_first(fourier.get("amplitudes"))),
        "A1_err": _number(_first(fourier.get("amplitudes_err"))),
        "fourier_form": fourier.get("form") or "",
        "fap": _number(result.get("fap")),
        "period2": _number(secondary.get("period") if isinstance(secondary, dict) else secondary),
        "period_ratio": _number(result.get("period_ratio")),
        "feh": _number(feh.get("value")),
        "feh_err": _number(feh.get("err")),
        "feh_relation": _relation(feh),
        "abs_mag": _number(absolute.get("value")),
        "abs_mag_err": _number(absolute.get("err")),
        "abs_mag_band": str(absolute.get("quantity", ""))[2:],
        "abs_mag_relation": _relation(absolute),
        "dist_mod": _number(modulus.get("value")),
        "dist_mod_err": _number(modulus.get("err")),
        "distance": _distance_pc(distance, "value"),
        "distance_err": _distance_pc(distance, "err"),
        "distance_relation": _relation(distance) or _relation(modulus),
        "note": verdict.note or "",
        "verdict_time": verdict.decided_at or "",
    }
    for name in ("R21", "R31", "phi21", "phi31"):
        row[name] = _number(fourier.get(name))
        row[f"{name}_err"] = _number(fourier.get(f"{name}_err"))
    for item in (feh, absolute, modulus, distance):
        flags.extend(str(f) for f in (item.get("flags") or []))
    row["flags"] = ";".join(dict.fromkeys(flags))
    means = result.get("mean_mag_by_band") or {}
    amplitudes = result.get("amplitude_by_band") or {}
    for band in bands:
        mean_column, amplitude_column = _band_columns(band)
        row[mean_column.name] = _number(means.get(band))
        row[amplitude_column.name] = _number(amplitudes.get(band))
    return row


def _check_statuses(statuses: Iterable[str]) -> tuple[str, ...]:
    statuses = tuple(statuses)
    for status in statuses:
        if status not in VERDICT_STATUSES:
            raise PhasewiseError(
                f"unknown verdict status {status!r}; expected one of {', '.join(VERDICT_STATUSES)}",
                field="status",
            )
    return statuses


def catalogue_table(ledger: Ledger, statuses: Iterable[str] = ("confirmed", "relabelled")) -> Table:
    """The vetted catalogue as an astropy Table (units, UCDs in ``col.meta``)."""
    statuses = _check_statuses(statuses)
    chosen = [v for v in ledger.verdicts() if v.status in statuses]
    stored = {v.star_id: ledger.result(v.star_id) for v in chosen}
    band_count: dict[str, int] = {}
    for item in stored.values():
        if item is not None and item.result:
            for band in item.result.get("mean_mag_by_band") or {}:
                band_count[band] = band_count.get(band, 0) + 1
    bands = sorted(band_count, key=lambda b: (-band_count[b], b))
    columns = list(_HEAD) + [c for b in bands for c in _band_columns(b)] + list(_TAIL)
    rows = [
        _row(v.star_id, ledger.star_info(v.star_id), v, stored[v.star_id], bands) for v in chosen
    ]
    table = Table()
    for column in columns:
        values = [row[column.name] for row in rows]
        if column.text:
            data = np.array([str(v) for v in values], dtype=str) if values else np.array([], "U1")
        elif column.name == "fourier_order":
            data = np.array(values, dtype=np.int32)
        else:
            data = np.array(values, dtype=np.float64)
        table[column.name] = data
        table[column.name].unit = column.unit
        table[column.name].description = column.description
        table[column.name].meta["ucd"] = column.ucd
    table.meta.update(provenance(ledger, rows_relations=rows))
    return table


def provenance(ledger: Ledger, rows_relations: list[dict[str, Any]] | None = None) -> dict:
    """The provenance header: program, date, settings, relations cited, ledger checksum."""
    settings = ledger.analysis_settings()
    relations = sorted(
        {
            row[key]
            for row in rows_relations or []
            for key in ("feh_relation", "abs_mag_relation", "distance_relation")
            if row[key]
        }
    )
    return {
        "program": f"phasewise {__version__}",
        "date": datetime.now(UTC).isoformat(timespec="seconds"),
        "ledger": Path(ledger.path).name,
        "ledger_checksum": f"sha256:{ledger.checksum()}",
        "settings_hash": None if settings is None else settings[1],
        "analysis_settings": None if settings is None else settings[0],
        "relations": relations,
        "caution": (
            "Classes are suggestions checked by a person; [Fe/H], absolute magnitudes and "
            "distances come from published empirical relations with known scatter and "
            "calibration ranges."
        ),
    }


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


def _write_ecsv(table: Table, path: Path) -> None:
    table.write(path, format="ascii.ecsv")


def _write_csv(table: Table, path: Path) -> None:
    out = table.copy(copy_data=False)
    lines = [f"{key}: {json.dumps(value)}" for key, value in table.meta.items()]
    lines += [
        f"column {c}: unit={out[c].unit or ''}; ucd={out[c].meta['ucd']}; {out[c].description}"
        for c in out.colnames
    ]
    out.meta = {"comments": lines}
    out.write(path, format="ascii.csv", comment="# ")


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


def _write_fits(table: Table, path: Path) -> None:
    """FITS tables and headers hold ASCII only: texts are transliterated (the
    ECSV, VOTable and CSV catalogues keep them as they are)."""
    from astropy.io import fits

    out = table.copy(copy_data=False)
    meta = table.meta
    out.meta = {}
    for name in out.colnames:
        column = out[name]
        if column.dtype.kind != "U":
            continue
        mask = np.ma.getmaskarray(column)
        texts = [_ascii(v) for v in np.ma.filled(column, "")]
        out[name] = MaskedColumn(texts, mask=mask) if mask.any() else TableColumn(texts)
    hdu = fits.table_to_hdu(out)
    header = hdu.header
    header["EXTNAME"] = "VETTED"
    header["PROGRAM"] = _ascii(meta["program"])
    header["DATE"] = meta["date"]
    header["LEDGER"] = _ascii(meta["ledger"])
    header["LEDGSUM"] = meta["ledger_checksum"]
    header["SETHASH"] = meta["settings_hash"] or ""
    header["SETTINGS"] = json.dumps(meta["analysis_settings"], sort_keys=True)  # ASCII-escaped
    for index, name in enumerate(out.colnames, start=1):
        column = table[name]
        header[f"TUCD{index}"] = column.meta["ucd"]
        header[f"TCOMM{index}"] = _ascii(column.description)[:68]
    for relation in meta["relations"]:
        header.add_history(_ascii(f"relation cited: {relation}"))
    header.add_comment(_ascii(meta["caution"]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fits.verify.VerifyWarning)
        fits.HDUList([fits.PrimaryHDU(), hdu]).writeto(path)


def _write_votable(table: Table, path: Path) -> None:
    from astropy.io.votable import from_table, writeto
    from astropy.io.votable.tree import Info

    out = table.copy(copy_data=False)
    meta = table.meta
    out.meta = {}
    votable = from_table(out)
    votable.version = "1.4"  # TIMESYS needs 1.4
    resource = votable.resources[0]
    vtable = resource.tables[0]
    vtable.name = "vetted_catalogue"
    vtable.description = "Vetted catalogue of variable stars written by Phasewise."
    for field in vtable.fields:
        field.ucd = table[field.name].meta["ucd"]
        field.description = table[field.name].description
    _add_time_system(votable, vtable, table)
    for key in ("program", "date", "ledger", "ledger_checksum", "settings_hash"):
        resource.infos.append(Info(name=key, value=str(meta[key] or "")))
    resource.infos.append(
        Info(name="analysis_settings", value=json.dumps(meta["analysis_settings"], sort_keys=True))
    )
    for relation in meta["relations"]:
        resource.infos.append(Info(name="relation", value=relation))
    resource.infos.append(Info(name="caution", value=meta["caution"]))
    writeto(votable, str(path))


# VOTable 1.4 TIMESYS for each Phasewise time scale: (time scale, reference position,
# origin).  HJD and JD record no time scale of their own (IVOA allows "UNKNOWN").
_TIMESYS = {
    "JD": ("UNKNOWN", "TOPOCENTER", "JD-origin"),
    "MJD": ("UNKNOWN", "TOPOCENTER", "MJD-origin"),
    "HJD": ("UNKNOWN", "HELIOCENTER", "JD-origin"),
    "BJD_TDB": ("TDB", "BARYCENTER", "JD-origin"),
}


def _add_time_system(votable, vtable, table: Table) -> None:
    """Tie epoch_max to a TIMESYS element when every row has the same time scale."""
    from astropy.io.votable.tree import TimeSys

    scales = set(table["time_scale"]) - {""}
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
        if field.name == "epoch_max":
            field.ref = "epoch_system"


_WRITERS = {"ecsv": _write_ecsv, "csv": _write_csv, "fits": _write_fits, "votable": _write_votable}


def write_catalogue(
    ledger: Ledger,
    path: str | os.PathLike,
    format: str | None = None,
    statuses: Iterable[str] = ("confirmed", "relabelled"),
) -> int:
    """Write the vetted catalogue; returns the number of stars written.

    Parameters
    ----------
    ledger : Ledger
    path : path
        Target file; replaced atomically if it exists.
    format : {"ecsv", "fits", "votable", "csv"}, optional
        Default: from the extension.
    statuses : iterable of str
        Verdict states to include.
    """
    path = Path(path)
    format = _format_for(path, format)
    if not path.parent.is_dir():
        raise PhasewiseError("the folder does not exist", file=path.parent)
    table = catalogue_table(ledger, statuses)
    temp = path.with_name(f".{path.name}.{uuid.uuid4().hex[:8]}.partial")
    try:
        _WRITERS[format](table, temp)
        os.replace(temp, path)
    except BaseException:
        temp.unlink(missing_ok=True)
        raise
    return len(table)
