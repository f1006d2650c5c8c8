"""The light-curve model: one star's photometry, all bands, nothing deleted.

A :class:`LightCurve` holds every point it was given.  Points the user or a
cleaning rule excludes are marked in ``excluded``; they stay in the arrays so
that a decision can always be undone and shown later.

Times are days in the declared ``time_scale`` (one of :data:`TIME_SCALES`);
nothing here converts or guesses a scale (see :mod:`core.timescales`).
Magnitudes follow the usual convention (smaller is brighter).  A curve read
without errors has ``has_errors = False`` and unit errors, so that every
point weighs the same.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .errors import PhasewiseError
from .validation import as_float_array

__all__ = ["TIME_SCALES", "MIN_GOOD_POINTS", "StarMeta", "LightCurve"]

#: Time scales Phasewise records.  Values are days.
TIME_SCALES = ("JD", "MJD", "HJD", "BJD_TDB")

#: Fewer good points than this and a star is marked "too few points".
MIN_GOOD_POINTS = 10


@dataclass(frozen=True)
class StarMeta:
    """What is known about a star besides its photometry."""

    ra: float | None = None  # degrees, ICRS
    dec: float | None = None  # degrees, ICRS
    source_file: str | None = None
    columns: dict[str, str] = field(default_factory=dict)  # role -> original column name
    notes: tuple[str, ...] = ()  # what the reader or cleaner reported

    def to_dict(self) -> dict[str, Any]:
        return {
            "ra": self.ra,
            "dec": self.dec,
            "source_file": self.source_file,
            "columns": dict(self.columns),
            "notes": list(self.notes),
        }


def _readonly(array: np.ndarray) -> np.ndarray:
    array = np.array(array, copy=True)
    array.setflags(write=False)
    return array


#: Most distinct labels found by comparison before :func:`_distinct_labels`
#: sorts them instead.
_FEW_LABELS = 8


def _distinct_labels(band: np.ndarray) -> tuple[list[str], np.ndarray]:
    """Distinct labels of an object array of band labels and each point's index among them.

    A curve has a few bands and many points: when every label is a string,
    each distinct one is found by one vectorised comparison over the points
    left, with no conversion of every point to a fixed-width string (the
    cost of ``np.unique(band.astype(str))``, which is used otherwise).
    """
    n = band.size
    inverse = np.empty(n, dtype=np.intp)
    labels: list[str] = []
    left = np.arange(n)
    while left.size and len(labels) < _FEW_LABELS:
        label = band[left[0]]
        if type(label) is not str:
            break
        same = band[left] == label
        inverse[left[same]] = len(labels)
        labels.append(label)
        left = left[~same]
    if left.size == 0:
        return labels, inverse
    found, inverse = np.unique(band.astype(str), return_inverse=True)
    return [str(label) for label in found], inverse.reshape(n)


@dataclass(frozen=True, eq=False)
class LightCurve:
    """Photometry of one star.

    Parameters
    ----------
    star_id : str
        The star's identifier as given by the source.
    time : array of float
        Observation times in days, in ``time_scale``.
    mag : array of float
        Magnitudes.
    mag_err : array of float, optional
        One-sigma magnitude errors.  ``None`` means no errors were given:
        unit errors are stored and ``has_errors`` is False.
    band : array of str or str, optional
        Photometric band of each point (a single string applies to all).
    time_scale : str
        One of :data:`TIME_SCALES`.
    excluded : array of bool, optional
        True for points excluded from analysis (never deleted).
    meta : StarMeta, optional
    """

    star_id: str
    time: np.ndarray
    mag: np.ndarray
    mag_err: np.ndarray | None = None
    band: Any = "V"
    time_scale: str = "JD"
    excluded: np.ndarray | None = None
    meta: StarMeta = field(default_factory=StarMeta)
    has_errors: bool = True

    def __post_init__(self) -> None:
        where = self.meta.source_file
        if not str(self.star_id).strip():
            raise PhasewiseError("a star needs a non-empty id", file=where, field="star_id")
        time = as_float_array("time", self.time, error=PhasewiseError)
        n = time.size
        mag = as_float_array("mag", self.mag, length=n, error=PhasewiseError)
        has_errors = self.has_errors and self.mag_err is not None
        if self.mag_err is None:
            err = np.ones(n)
        else:
            err = as_float_array("mag_err", self.mag_err, length=n, error=PhasewiseError)
        if isinstance(self.band, str):
            band = np.full(n, self.band.strip(), dtype=object)
            band_names, band_index = [self.band.strip()], np.zeros(n, dtype=np.intp)
        else:
            band = np.asarray(self.band, dtype=object)
            if band.shape != (n,):
                raise PhasewiseError(
                    f"expected {n} band labels, got shape {band.shape}", file=where, field="band"
                )
            # strip each distinct label once (a curve has a few bands, many points)
            labels, inverse = _distinct_labels(band)
            stripped = [label.strip() for label in labels]
            band = np.array(stripped, dtype=object)[inverse]
            # two labels may strip to one name: index by the distinct stripped names
            band_names = sorted(set(stripped))
            position = {name: k for k, name in enumerate(band_names)}
            band_index = np.array([position[name] for name in stripped], dtype=np.intp)[inverse]
        if self.excluded is None:
            excluded = np.zeros(n, dtype=bool)
        else:
            excluded = np.asarray(self.excluded, dtype=bool)
            if excluded.shape != (n,):
                raise PhasewiseError(
                    f"expected {n} mask values, got shape {excluded.shape}",
                    file=where,
                    field="excluded",
                )
        if self.time_scale not in TIME_SCALES:
            raise PhasewiseError(
                f"unknown time scale {self.time_scale!r}; expected one of {', '.join(TIME_SCALES)}",
                file=where,
                field="time_scale",
            )
        set_ = object.__setattr__
        set_(self, "star_id", str(self.star_id).strip())
        set_(self, "time", _readonly(time))
        set_(self, "mag", _readonly(mag))
        set_(self, "mag_err", _readonly(err))
        set_(self, "band", _readonly(band))
        set_(self, "excluded", _readonly(excluded))
        set_(self, "has_errors", bool(has_errors))
        # The arrays are read-only, so what is derived from them is computed once
        # (bands, masks and band masks are asked for many times per analysis).
        good = ~excluded & np.isfinite(time) & np.isfinite(mag) & np.isfinite(err) & (err > 0)
        set_(self, "_good", _readonly(good))
        set_(self, "_band_names", tuple(band_names))
        set_(self, "_band_index", _readonly(np.asarray(band_index, dtype=np.intp).reshape(n)))
        counts = np.bincount(band_index[good], minlength=len(band_names)) if n else np.zeros(0)
        order = sorted(
            (k for k in range(len(band_names)) if counts[k] > 0),
            key=lambda k: (-counts[k], band_names[k]),
        )
        set_(self, "_bands", tuple(band_names[k] for k in order))

    # ------------------------------------------------------------------ views
    @property
    def n_points(self) -> int:
        """All points, excluded ones included."""
        return int(self.time.size)

    @property
    def good(self) -> np.ndarray:
        """Boolean array: points used for analysis (finite and not excluded)."""
        return self._good

    @property
    def n_good(self) -> int:
        return int(np.count_nonzero(self.good))

    @property
    def too_few_points(self) -> bool:
        return self.n_good < MIN_GOOD_POINTS

    @property
    def bands(self) -> tuple[str, ...]:
        """Bands present among the good points, most points first."""
        return self._bands

    @property
    def baseline(self) -> float:
        """Time span of the good points in days (0 for fewer than two)."""
        t = self.time[self.good]
        return float(t.max() - t.min()) if t.size > 1 else 0.0

    def band_mask(self, band: str) -> np.ndarray:
        """Good points of one band."""
        try:
            k = self._band_names.index(band)
        except ValueError:
            return np.zeros(self.n_points, dtype=bool)
        return self._good & (self._band_index == k)

    def arrays(self, band: str | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(time, mag, mag_err) of the good points, of one band if given."""
        sel = self.good if band is None else self.band_mask(band)
        return self.time[sel], self.mag[sel], self.mag_err[sel]

    # ---------------------------------------------------------------- changes
    def with_excluded(self, excluded: np.ndarray) -> LightCurve:
        """A copy with a new exclusion mask (the photometry is unchanged)."""
        return replace(self, excluded=np.asarray(excluded, dtype=bool), mag_err=self._err_arg())

    def exclude(self, indices: np.ndarray) -> LightCurve:
        """A copy with the given point indices also excluded."""
        mask = self.excluded.copy()
        mask[np.asarray(indices, dtype=int)] = True
        return self.with_excluded(mask)

    def restore(self, indices: np.ndarray) -> LightCurve:
        """A copy with the given point indices included again."""
        mask = self.excluded.copy()
        mask[np.asarray(indices, dtype=int)] = False
        return self.with_excluded(mask)

    def _err_arg(self) -> np.ndarray | None:
        return self.mag_err if self.has_errors else None

    def __repr__(self) -> str:
        return (
            f"LightCurve({self.star_id!r}, n_points={self.n_points}, n_good={self.n_good}, "
            f"bands={self.bands}, time_scale={self.time_scale!r})"
        )
