"""Conversions between the time scales Phasewise records (JD, MJD, HJD, BJD_TDB).

Conventions (common practice, no source):

* ``JD`` and ``MJD`` are Julian dates in UTC, as observatories log them;
  ``MJD = JD - 2400000.5`` exactly.
* ``HJD`` is JD(UTC) plus the light travel time to the Sun's centre (the
  traditional heliocentric date, left in UTC).
* ``BJD_TDB`` is JD(TDB) plus the light travel time to the solar-system
  barycentre.

Both corrections come from :meth:`astropy.time.Time.light_travel_time` with
the star's ICRS coordinates, an observatory :class:`EarthLocation` and the
builtin ephemeris.  HJD/BJD back to JD is solved by fixed-point iteration (the
correction changes by well under a microsecond per second of time, so two or
three steps converge to float precision).

No network: IERS tables are not downloaded.  Dates past the bundled IERS
table use predicted/mean Earth-orientation values; this moves the observatory
by at most a few hundred metres in the calculation, i.e. about a microsecond
of light travel time, far below photometric timing needs.
"""

from __future__ import annotations

import warnings

import astropy.units as u
import numpy as np
from astropy.coordinates import EarthLocation, SkyCoord
from astropy.time import Time
from astropy.utils import iers

from .errors import PhasewiseError
from .lightcurve import TIME_SCALES

__all__ = ["DEMO_OBSERVATORY", "MJD_OFFSET", "convert_times", "to_time_scale"]

#: JD - MJD, exact by definition.
MJD_OFFSET = 2400000.5

#: The observatory of the demo survey.  FICTIONAL: "Cerro Alto Vigil
#: Observatory" and its coordinates are invented for the demo data.
DEMO_OBSERVATORY = EarthLocation.from_geodetic(
    lon=-70.7 * u.deg, lat=-29.5 * u.deg, height=2300.0 * u.m
)

_BARY = ("HJD", "BJD_TDB")
_ITERATIONS = 4


def _check_scale(name: str, scale: str) -> str:
    if scale not in TIME_SCALES:
        raise PhasewiseError(
            f"unknown time scale {scale!r}; expected one of {', '.join(TIME_SCALES)}", field=name
        )
    return scale


def _light_travel(jd_utc: np.ndarray, kind: str, star: SkyCoord, location: EarthLocation):
    """Light travel time in days (and TDB-UTC for barycentric) at JD(UTC)."""
    # Never fetch IERS-A (many machines have no network); scoped, so other
    # astropy users in the process keep their own configuration.
    with (
        warnings.catch_warnings(),
        iers.conf.set_temp("auto_download", False),
        iers.conf.set_temp("auto_max_age", None),
    ):
        # Past the bundled IERS table astropy warns and uses mean polar motion;
        # the effect is ~1 microsecond (see module docstring).
        warnings.simplefilter("ignore")
        with iers.conf.set_temp("iers_degraded_accuracy", "ignore"):
            t = Time(jd_utc, format="jd", scale="utc", location=location)
            ltt = t.light_travel_time(star, kind=kind, ephemeris="builtin").to_value(u.day)
            if kind == "barycentric":
                tdb = t.tdb
                tdb_minus_utc = (tdb.jd1 - t.jd1) + (tdb.jd2 - t.jd2)
                return ltt + tdb_minus_utc
    return ltt


def _to_jd(time, scale, star, location) -> np.ndarray:
    if scale == "JD":
        return time
    if scale == "MJD":
        return time + MJD_OFFSET
    kind = "heliocentric" if scale == "HJD" else "barycentric"
    jd = time.copy()
    for _ in range(_ITERATIONS):
        jd = time - _light_travel(jd, kind, star, location)
    return jd


def _from_jd(jd, scale, star, location) -> np.ndarray:
    if scale == "JD":
        return jd
    if scale == "MJD":
        return jd - MJD_OFFSET
    kind = "heliocentric" if scale == "HJD" else "barycentric"
    return jd + _light_travel(jd, kind, star, location)


def convert_times(
    time,
    from_scale: str,
    to_scale: str,
    *,
    ra: float | None = None,
    dec: float | None = None,
    location: EarthLocation | None = None,
) -> np.ndarray:
    """Convert times in days from one recorded time scale to another.

    Parameters
    ----------
    time : array of float
        Times in days in ``from_scale``.
    from_scale, to_scale : {"JD", "MJD", "HJD", "BJD_TDB"}
    ra, dec : float, optional
        The star's ICRS position in degrees; needed when either scale is HJD
        or BJD_TDB.
    location : EarthLocation, optional
        The observatory; needed when either scale is HJD or BJD_TDB (for
        the demo data use :data:`DEMO_OBSERVATORY`).

    Returns
    -------
    ndarray of float
        Times in days in ``to_scale``.

    Raises
    ------
    PhasewiseError
        For an unknown scale, or a heliocentric/barycentric conversion
        without the star's coordinates or the observatory location.
    """
    _check_scale("from_scale", from_scale)
    _check_scale("to_scale", to_scale)
    values = np.array(time, dtype=np.float64, ndmin=1)
    scalar = np.ndim(time) == 0
    if from_scale == to_scale:
        return values[0] if scalar else values
    star = None
    if from_scale in _BARY or to_scale in _BARY:
        needed = f"{from_scale} -> {to_scale}"
        if ra is None or dec is None:
            raise PhasewiseError(
                f"converting {needed} needs the star's coordinates (ra, dec in degrees)",
                field="ra/dec",
            )
        if location is None:
            raise PhasewiseError(
                f"converting {needed} needs the observatory location (an EarthLocation)",
                field="location",
            )
        if not (np.isfinite(ra) and np.isfinite(dec) and -90.0 <= dec <= 90.0):
            raise PhasewiseError(f"bad coordinates ra={ra!r}, dec={dec!r}", field="ra/dec")
        star = SkyCoord(ra=float(ra) * u.deg, dec=float(dec) * u.deg, frame="icrs")
    finite = np.isfinite(values)
    result = np.full_like(values, np.nan)
    if finite.any():
        jd = _to_jd(values[finite], from_scale, star, location)
        result[finite] = _from_jd(jd, to_scale, star, location)
    return result[0] if scalar else result


def to_time_scale(lc, to_scale: str, *, location: EarthLocation | None = None):
    """A copy of a light curve with its times converted to ``to_scale``.

    The star's coordinates come from ``lc.meta`` (``ra``, ``dec``); a
    heliocentric or barycentric conversion also needs ``location``.
    """
    from dataclasses import replace

    times = convert_times(
        lc.time, lc.time_scale, to_scale, ra=lc.meta.ra, dec=lc.meta.dec, location=location
    )
    note = f"times converted {lc.time_scale} -> {to_scale} with astropy.time"
    meta = replace(lc.meta, notes=(*lc.meta.notes, note))
    return replace(
        lc,
        time=times,
        time_scale=to_scale,
        mag_err=lc.mag_err if lc.has_errors else None,
        meta=meta,
    )
