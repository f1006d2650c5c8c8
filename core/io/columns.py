"""Which column holds what: detection by the names people use, or a mapping.

A :class:`ColumnMapping` names, per role, the column to use.  Roles left
empty are detected from the column names (case-insensitive, see
:data:`ACCEPTED_NAMES`).  The same object serves the command line
(``--columns time=hjd,mag=V``) and the import dialog.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, fields
from typing import Any

from ..errors import PhasewiseError, ReadError
from ..lightcurve import TIME_SCALES

__all__ = [
    "ROLES",
    "ACCEPTED_NAMES",
    "ColumnMapping",
    "ResolvedColumns",
    "resolve_columns",
    "time_scale_of_name",
    "UNKNOWN_BAND",
    "ONE_STAR",
    "id_like",
]

#: Column roles a mapping may name (``id`` is accepted as a synonym of ``star_id``).
ROLES = ("star_id", "time", "mag", "err", "band", "flux", "flux_err", "ra", "dec")

#: Names recognised per role, lower case, in order of preference.
ACCEPTED_NAMES: dict[str, tuple[str, ...]] = {
    "star_id": (
        "star_id",
        "starid",
        "id",
        "star",
        "name",
        "object",
        "source_id",
        "sourceid",
        "obj_id",
        "objid",
        "object_id",
        "objectid",
        "oid",
        "target",
        "designation",
    ),
    "time": ("time", "t", "date", "jd", "mjd", "hjd", "bjd", "bjd_tdb", "hjd_utc"),
    "mag": ("mag", "magnitude", "mags"),
    "err": ("mag_err", "magerr", "err", "error", "e_mag", "emag", "sigma", "mag_error", "sig"),
    "band": ("band", "filter", "passband", "filt"),
    "flux": ("flux",),
    "flux_err": ("flux_err", "fluxerr", "e_flux", "flux_error", "sigma_flux"),
    "ra": ("ra", "raj2000", "ra_deg", "ra_icrs"),
    "dec": ("dec", "dej2000", "decj2000", "dec_deg", "de_icrs"),
}

#: A column holding the time scale per row (every row must agree).
SCALE_COLUMN_NAMES = ("time_scale", "timescale", "timesys")
#: A boolean column of excluded points (written by :func:`core.io.write_stars`).
EXCLUDED_COLUMN_NAMES = ("excluded",)

_SCALE_WORDS = {
    "jd": "JD",
    "jd_utc": "JD",
    "mjd": "MJD",
    "hjd": "HJD",
    "hjd_utc": "HJD",
    "bjd": "BJD_TDB",
    "bjd_tdb": "BJD_TDB",
    "bjdtdb": "BJD_TDB",
}
#: Mapping value of ``star_id`` saying the file holds one star (no id column).
ONE_STAR = "-"

#: Band label of points whose band neither a column nor the mapping gives: no
#: relation calibrated in a band applies to them.
UNKNOWN_BAND = "unknown"

# A magnitude column that names its band: "V", "Ks", "Vmag", "mag_I", "g_mag".
_BAND_NAME = re.compile(
    r"^(?:mag_?)?(u|b|v|r|i|j|h|k|ks|g|z|y|bp|rp|w1|w2)(?:_?mag)?$", re.IGNORECASE
)
# Names that suggest a star id although they are not among the accepted ones.
_ID_LIKE_NAME = re.compile(
    r"(^|[_\s])(id|name|obj|object|source|src|target|star)([_\s]|$)|(id|name)$"
)

# "hjd-2400000", "HJD - 2450000", "rjd" style names of reduced dates.
_OFFSET_NAME = re.compile(r"^(jd|mjd|hjd|bjd|bjd_tdb)\s*-\s*(24\d{5}(?:\.5)?)$")


def _norm(name: str) -> str:
    return str(name).strip().lower()


def time_scale_of_name(name: str) -> tuple[str | None, float]:
    """The time scale a column name declares, and the offset added to its values.

    ``"hjd"`` gives ``("HJD", 0.0)``; ``"HJD-2450000"`` gives
    ``("HJD", 2450000.0)``; a neutral name such as ``"time"`` gives
    ``(None, 0.0)``.  An ``"mjd - 2400000.5"`` style name is not produced.
    """
    key = _norm(name)
    if key in _SCALE_WORDS:
        return _SCALE_WORDS[key], 0.0
    match = _OFFSET_NAME.match(key)
    if match:
        scale = _SCALE_WORDS[match.group(1)]
        return scale, float(match.group(2))
    return None, 0.0


def normalise_scale(value: Any, *, where: str | None = None, field_name: str = "time_scale"):
    """Return a canonical time scale for a user-given value (case-insensitive)."""
    text = _norm(value).replace("-", "_")
    canon = {s.lower(): s for s in TIME_SCALES}
    canon.update({"bjd": "BJD_TDB", "utc": None})
    if canon.get(text):
        return canon[text]
    raise PhasewiseError(
        f"unknown time scale {value!r}; expected one of {', '.join(TIME_SCALES)}",
        file=where,
        field=field_name,
    )


@dataclass(frozen=True)
class ColumnMapping:
    """Which column plays which role; empty roles are detected by name.

    Parameters
    ----------
    star_id, time, mag, err, band, flux, flux_err, ra, dec : str, optional
        Column names (matched case-insensitively).
    zero_point : float, optional
        Magnitude zero point for flux columns: ``mag = zero_point - 2.5 log10(flux)``.
    time_scale : str, optional
        JD, MJD, HJD or BJD_TDB; overrides what the column name says.
    default_band : str, optional
        Band label for files without a band column.
    """

    star_id: str | None = None
    time: str | None = None
    mag: str | None = None
    err: str | None = None
    band: str | None = None
    flux: str | None = None
    flux_err: str | None = None
    zero_point: float | None = None
    time_scale: str | None = None
    ra: str | None = None
    dec: str | None = None
    default_band: str | None = None

    def __post_init__(self) -> None:
        if self.time_scale is not None:
            object.__setattr__(self, "time_scale", normalise_scale(self.time_scale))
        if self.zero_point is not None:
            try:
                zp = float(self.zero_point)
            except (TypeError, ValueError):
                raise PhasewiseError(
                    f"zero point must be a number, got {self.zero_point!r}", field="zero_point"
                ) from None
            object.__setattr__(self, "zero_point", zp)

    @classmethod
    def parse(cls, text: str) -> ColumnMapping:
        """Parse ``"time=hjd,mag=V,err=eV,band=filter,id=name"``.

        Keys are the field names of this class (``id`` means ``star_id``);
        ``zero_point``/``zp``, ``time_scale``/``scale`` and ``default_band``
        take values rather than column names.
        """
        aliases = {"id": "star_id", "zp": "zero_point", "scale": "time_scale", "error": "err"}
        known = [f.name for f in fields(cls)]
        values: dict[str, Any] = {}
        for part in str(text).split(","):
            if not part.strip():
                continue
            key, sep, value = part.partition("=")
            key = aliases.get(key.strip().lower(), key.strip().lower())
            if not sep or not value.strip():
                raise PhasewiseError(f"expected role=column, got {part.strip()!r}", field="columns")
            if key not in known:
                raise PhasewiseError(
                    f"unknown role {key!r}; known roles: {', '.join(['id', *known])}",
                    field="columns",
                )
            if key in values:
                raise PhasewiseError(f"role {key!r} given twice", field="columns")
            values[key] = value.strip()
        return cls(**values)

    def to_dict(self) -> dict[str, Any]:
        return {f.name: getattr(self, f.name) for f in fields(self)}


@dataclass(frozen=True)
class ResolvedColumns:
    """The columns one file uses, after detection and the mapping."""

    roles: dict[str, str] = field(default_factory=dict)  # role -> actual column name
    time_scale: str = "JD"
    time_offset: float = 0.0
    zero_point: float | None = None
    scale_column: str | None = None
    excluded_column: str | None = None
    default_band: str = UNKNOWN_BAND
    notes: tuple[str, ...] = ()
    one_star: bool = False  # the mapping says: no star-id column, the file is one star

    @property
    def uses_flux(self) -> bool:
        return "mag" not in self.roles and "flux" in self.roles


def _lookup(columns: list[str]) -> dict[str, str]:
    table: dict[str, str] = {}
    for name in columns:
        table.setdefault(_norm(name), name)
    return table


def _accepted(role: str) -> str:
    return ", ".join(ACCEPTED_NAMES[role])


def resolve_columns(
    columns: list[str], mapping: ColumnMapping | None, *, file: str | None = None
) -> ResolvedColumns:
    """Decide which column plays which role in a file.

    Raises
    ------
    ReadError
        When time or magnitude (or flux) is missing, a mapped column does
        not exist, several time columns disagree, or no time scale is known.
    """
    mapping = mapping or ColumnMapping()
    lookup = _lookup(columns)
    found = ", ".join(repr(c) for c in columns) or "none"
    roles: dict[str, str] = {}
    notes: list[str] = []
    one_star = mapping.star_id == ONE_STAR
    for role in ROLES:
        wanted = getattr(mapping, role)
        if role == "star_id" and one_star:
            continue
        if wanted is not None:
            actual = lookup.get(_norm(wanted))
            if actual is None:
                raise ReadError(
                    f"the mapping names column {wanted!r} for {role}, but it is not in the "
                    f"file; columns found: {found}",
                    file=file,
                    column=wanted,
                )
            roles[role] = actual
    time_scale = mapping.time_scale
    offset = 0.0
    if "time" not in roles:
        candidates = [lookup[n] for n in ACCEPTED_NAMES["time"] if n in lookup]
        candidates += [c for c in columns if _OFFSET_NAME.match(_norm(c)) and c not in candidates]
        declared = {c: time_scale_of_name(c)[0] for c in candidates}
        scaled = [c for c in candidates if declared[c]]
        if len(scaled) > 1 and len({declared[c] for c in scaled}) > 1 and time_scale is None:
            listing = ", ".join(f"{c!r} ({declared[c]})" for c in scaled)
            raise ReadError(
                f"mixed time scales: several time columns {listing}; choose one with "
                "the mapping (time=COLUMN)",
                file=file,
            )
        if candidates:
            roles["time"] = scaled[0] if scaled and time_scale is None else candidates[0]
    if "time" not in roles:
        raise ReadError(
            f"no time column; columns found: {found}; names accepted: {_accepted('time')}"
            " (or a name such as 'HJD-2450000'); or map one with time=COLUMN",
            file=file,
        )
    name_scale, offset = time_scale_of_name(roles["time"])
    if time_scale is None:
        time_scale = name_scale
    elif name_scale and name_scale != time_scale:
        notes.append(
            f"column {roles['time']!r} reads as {name_scale}, the mapping says {time_scale}; "
            "the mapping wins"
        )
    for role in ("star_id", "mag", "err", "band", "flux", "flux_err", "ra", "dec"):
        if role in roles or (role == "star_id" and one_star):
            continue
        for name in ACCEPTED_NAMES[role]:
            if name in lookup and lookup[name] not in roles.values():
                roles[role] = lookup[name]
                break
    if "mag" not in roles and "flux" not in roles:
        banded = [c for c in columns if _BAND_NAME.match(_norm(c)) and "mag" in _norm(c)]
        if len(banded) == 1:
            roles["mag"] = banded[0]  # "Vmag": the one magnitude column, and its band
        elif len(banded) > 1:
            raise ReadError(
                "several magnitude columns: "
                + ", ".join(repr(c) for c in banded)
                + "; choose one with mag=COLUMN (and band= or default_band=)",
                file=file,
            )
    if "mag" not in roles and "flux" not in roles:
        raise ReadError(
            f"no magnitude column; columns found: {found}; names accepted: {_accepted('mag')}"
            f" (or flux with a zero point: {_accepted('flux')}); or map one with mag=COLUMN",
            file=file,
        )
    if "mag" in roles:
        roles.pop("flux", None)
        roles.pop("flux_err", None)
    elif mapping.zero_point is None:
        raise ReadError(
            f"flux column {roles['flux']!r} found but no zero point; give zero_point= in the "
            "mapping to convert flux to magnitudes",
            file=file,
            column=roles["flux"],
        )
    scale_column = next((lookup[n] for n in SCALE_COLUMN_NAMES if n in lookup), None)
    excluded_column = next((lookup[n] for n in EXCLUDED_COLUMN_NAMES if n in lookup), None)
    band = mapping.default_band
    if band is None and "band" not in roles:
        match = _BAND_NAME.match(_norm(roles.get("mag", "")))
        if match and _norm(roles["mag"]) not in ACCEPTED_NAMES["mag"]:
            # a magnitude column named "V", "Ks" or "Imag" names its band
            band = _band_label(match.group(1))
        else:
            band = UNKNOWN_BAND
            notes.append(
                f"no band column and the mapping gives none: every point is labelled band "
                f"'{UNKNOWN_BAND}', so no relation calibrated in a band applies; give "
                "default_band= (e.g. V) in the mapping if you know it"
            )
    return ResolvedColumns(
        roles=roles,
        time_scale=time_scale or "",
        time_offset=offset,
        zero_point=mapping.zero_point,
        scale_column=scale_column,
        excluded_column=excluded_column,
        default_band=band or UNKNOWN_BAND,
        notes=tuple(notes),
        one_star=one_star,
    )


def _band_label(text: str) -> str:
    """The usual spelling of a band named in a column name ("ks" -> "Ks", "bp" -> "BP")."""
    key = text.lower()
    if key in ("u", "b", "v", "r", "i", "j", "h", "k"):
        return key.upper()
    return {"ks": "Ks", "bp": "BP", "rp": "RP", "w1": "W1", "w2": "W2"}.get(key, key)


def id_like(name: str) -> bool:
    """Whether a column name suggests a star id (``OBJID``, ``src_name``...)."""
    return bool(_ID_LIKE_NAME.search(_norm(name)))
