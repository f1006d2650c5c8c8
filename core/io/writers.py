"""Write light curves as one long table (ECSV, FITS, VOTable, CSV, TSV).

The table has one row per point: ``star_id``, the time in a column named by
its scale (``jd``, ``mjd``, ``hjd`` or ``bjd_tdb``, so a reader never has
to guess), ``mag``, ``mag_err`` (when errors are known), ``band``,
``excluded`` (the mask, so exclusions survive a round trip) and ``ra``/``dec``
when any star has coordinates.  The file is written to a temporary file made
with :mod:`tempfile` in the target folder (never a predictable name, never
through a planted symlink) and renamed, so a reader never sees half a file;
the temporary file is removed on any failure, and ones left by a killed
process are removed by the next write to the same target.
"""

from __future__ import annotations

import os
import tempfile
import time
import warnings
from collections.abc import Iterable
from pathlib import Path

import numpy as np

from ..errors import PhasewiseError
from ..lightcurve import LightCurve
from .readers import detect_format

__all__ = ["write_stars", "remove_abandoned_temps"]

#: Age after which a temporary file beside a target is taken as abandoned.
ABANDONED_AFTER = 600.0

_ASTROPY_FORMATS = {
    "csv": "ascii.csv",
    "tsv": "ascii.tab",
    "ascii": "ascii.basic",
    "ecsv": "ascii.ecsv",
    "fits": "fits",
    "votable": "votable",
}


def _time_column(scale: str) -> str:
    return scale.lower()


def write_stars(
    lightcurves: Iterable[LightCurve], path: str | os.PathLike, format: str | None = None
) -> Path:
    """Write light curves as one long table; returns the path written.

    Parameters
    ----------
    lightcurves : iterable of LightCurve
        All in one time scale.
    path : path
        The file to write (replaced if it exists).
    format : str, optional
        One of :data:`core.io.FORMATS`; by default from the file name.

    Raises
    ------
    PhasewiseError
        For no light curves, mixed time scales or an unknown format.
    """
    from astropy.table import Table

    path = Path(path)
    fmt = detect_format(path, format)
    curves = list(lightcurves)
    if not curves:
        raise PhasewiseError("nothing to write: no light curves", file=str(path))
    scales = sorted({lc.time_scale for lc in curves})
    if len(scales) > 1:
        raise PhasewiseError(
            f"mixed time scales ({', '.join(scales)}); convert to one scale before writing",
            file=str(path),
        )
    with_errors = any(lc.has_errors for lc in curves)
    with_coords = any(lc.meta.ra is not None or lc.meta.dec is not None for lc in curves)
    columns = {
        "star_id": np.concatenate([np.full(lc.n_points, lc.star_id) for lc in curves]).astype(str),
        _time_column(scales[0]): np.concatenate([lc.time for lc in curves]),
        "mag": np.concatenate([lc.mag for lc in curves]),
    }
    if with_errors:
        columns["mag_err"] = np.concatenate(
            [lc.mag_err if lc.has_errors else np.full(lc.n_points, np.nan) for lc in curves]
        )
    columns["band"] = np.concatenate([lc.band for lc in curves]).astype(str)
    columns["excluded"] = np.concatenate([lc.excluded for lc in curves])
    if with_coords:
        for role in ("ra", "dec"):
            columns[role] = np.concatenate(
                [
                    np.full(
                        lc.n_points,
                        np.nan if getattr(lc.meta, role) is None else getattr(lc.meta, role),
                    )
                    for lc in curves
                ]
            )
    table = Table(columns)
    table["mag"].unit = "mag"
    if with_errors:
        table["mag_err"].unit = "mag"
    table[_time_column(scales[0])].unit = "d"
    table.meta["time_scale"] = scales[0]
    if path.is_dir():
        raise PhasewiseError("is a folder; give a file name to write", file=str(path))
    remove_abandoned_temps(path, ".part")
    temporary = None
    try:
        handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
        os.close(handle)
        temporary = Path(name)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # FITS warns about the long meta key; it goes HIERARCH
            table.write(temporary, format=_ASTROPY_FORMATS[fmt], overwrite=True)
        os.replace(temporary, path)
        temporary = None
    except OSError as exc:
        raise PhasewiseError(f"cannot write: {exc.strerror or exc}", file=str(path)) from None
    finally:
        if temporary is not None:
            temporary.unlink(missing_ok=True)
    return path


def remove_abandoned_temps(
    path: str | os.PathLike, suffix: str, *, older_than: float = ABANDONED_AFTER
) -> int:
    """Remove ``.NAME.*SUFFIX`` files beside ``path`` left by killed writers; returns how many.

    Only files untouched for ``older_than`` seconds are removed, so a write
    in progress elsewhere keeps its file.
    """
    path = Path(path)
    removed = 0
    cutoff = time.time() - older_than
    for temp in path.parent.glob(f".{path.name}.*{suffix}"):
        try:
            if temp.is_file() and not temp.is_symlink() and temp.stat().st_mtime < cutoff:
                temp.unlink()
                removed += 1
        except OSError:
            continue
    return removed
