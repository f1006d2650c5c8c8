"""A period search suited to narrow eclipses: phase-binned analysis of variance.

A detached binary (EA) is constant most of the time and dips for a few per
cent of its orbit.  A sinusoid (Lomb–Scargle) fits such a curve badly, so
with ~100–200 sparse points its peak is often lost in the noise.  Here the
phases are cut into ``n_bins`` equal bins (twice: the second set shifted by
half a bin, so an eclipse is never split) and the analysis-of-variance
statistic of Schwarzenberg-Czerny (1989)

    F = [S_between / (r - 1)] / [S_within / (N - r)]

is computed at every trial frequency (S weighted sums of squares, r the bins
that hold points, N the points).  A few points deep in one bin give a large
``S_between`` and a small ``S_within``; a single outlier raises both and
gives ``F`` near 1, so lone outliers do not make false eclipses.

Magnitudes are first pulled in to ``clip`` robust sigmas of their band's
median (for the search only; see :class:`EclipseSearchSettings`).  Each
band has its own weighted mean removed (the bands share the phase
bins; eclipse depths in V and I are alike).  ``F`` does not depend on a
common scale of the errors.

The loop over trial frequencies and points is compiled with numba
(``_aov_loop.py``); it bins the phases with the same floating-point
operations as a plain numpy version would.

Significance: for Gaussian noise F follows the F distribution with
(r - 1, N - r) degrees of freedom at one frequency (Schwarzenberg-Czerny
1989).  Over the grid the false-alarm probability is bounded by
``1 - (1 - p)^M`` with ``M = 2 n_bins (f_max - f_min) T`` trials: ``n_bins``
independent phases per peak width 1/T for a statistic that resolves
``n_bins`` phase bins, times the two bin offsets.  This is a conservative
count (our choice, no source); ``tests/core/test_eclipse_search.py`` checks on
noise-only simulations that the false-alarm probability is not too small.

References
----------
Schwarzenberg-Czerny, A. 1989, MNRAS 241, 153.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import SettingsError
from ..validation import require_int, require_positive, require_range

__all__ = ["EclipseSearchSettings", "EclipseSearch", "eclipse_search"]

#: Median absolute deviation to Gaussian sigma (common practice, no source).
MAD_TO_SIGMA = 1.4826


@dataclass(frozen=True)
class EclipseSearchSettings:
    """Settings of :func:`eclipse_search`.

    Parameters
    ----------
    n_bins : int
        Phase bins (bin width 1/n_bins of the period; 20 keeps eclipses of a
        few per cent of the orbit in one or two bins).
    min_period : float
        Shortest period searched in days (detached binaries; from memory).
    max_period_fraction : float
        Longest period as a fraction of the baseline.
    oversampling : float
        Grid points per peak width 1/T.
    n_peaks : int
        Distinct peaks returned.
    n_seeds : int
        Peaks of the coarse first pass refined in the second.
    clip : float
        Magnitudes further than this many robust sigmas (MAD about the
        band's median) are pulled in to that distance for the search only:
        a lone outlier alone in a phase bin then cannot look like an
        eclipse, while several eclipse points in one bin still stand out.
    """

    n_bins: int = 20
    min_period: float = 0.2
    max_period_fraction: float = 0.5
    oversampling: float = 5.0
    n_peaks: int = 3
    n_seeds: int = 20
    clip: float = 5.0

    def __post_init__(self) -> None:
        require_int("n_bins", self.n_bins, 4, 200)
        require_positive("min_period", self.min_period)
        require_range("max_period_fraction", self.max_period_fraction, 0.0, 1.0)
        require_range("oversampling", self.oversampling, 1, 20)
        require_int("n_peaks", self.n_peaks, 1, 20)
        require_int("n_seeds", self.n_seeds, 1, 200)
        require_positive("clip", self.clip)


@dataclass(frozen=True)
class EclipseSearch:
    """Best peaks of the phase-binned search (strongest first)."""

    frequencies: tuple[float, ...]
    f_values: tuple[float, ...]
    faps: tuple[float, ...]
    snrs: tuple[float, ...]
    n_trials: float
    n_bins: int
    n_points: int
    n_searched: int

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": "aov_binned",
            "frequencies": [float(f) for f in self.frequencies],
            "periods": [1.0 / f for f in self.frequencies],
            "f_values": [float(v) for v in self.f_values],
            "faps": [float(p) for p in self.faps],
            "snrs": [float(x) for x in self.snrs],
            "n_trials": float(self.n_trials),
            "n_bins": int(self.n_bins),
            "n_points": int(self.n_points),
            "n_searched": int(self.n_searched),
        }


def _prepare(lc, clip: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    ts, ys, ws = [], [], []
    for band in lc.bands:
        t, y, e = lc.arrays(band)
        w = 1.0 / e**2 if lc.has_errors else np.ones_like(y)
        median = np.median(y)
        sigma = MAD_TO_SIGMA * np.median(np.abs(y - median))
        if sigma > 0:
            y = np.clip(y, median - clip * sigma, median + clip * sigma)
        ts.append(t)
        ys.append(y - np.dot(w, y) / w.sum())
        ws.append(w)
    return np.concatenate(ts), np.concatenate(ys), np.concatenate(ws)


def aov_binned(t, y, w, frequency, n_bins, shifts=(0.0, 0.5)):
    """Largest F over the bin offsets, and its filled-bin count, per frequency.

    Parameters
    ----------
    t, y, w : array_like
        Times (days), magnitudes of zero weighted mean and weights.
    frequency : array_like
        Trial frequencies (cycles/day).
    n_bins : int
        Phase bins.
    shifts : sequence of float
        Offsets of the bin edges, each in [0, 1) of a bin width.

    Returns
    -------
    f_value : ndarray
        The largest F over ``shifts`` (0 where fewer than two bins hold points).
    filled : ndarray of int
        Bins holding points at that offset (2 where ``f_value`` is 0).
    """
    from ._aov_loop import aov_binned_loop  # imported here: numba is slow to import

    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.asarray(w, dtype=float)
    frequency = np.ascontiguousarray(frequency, dtype=float)
    shifts = np.asarray(shifts, dtype=float)
    # the compiled loop does not check bounds: bad input must not get there
    if t.ndim != 1 or y.shape != t.shape or w.shape != t.shape:
        raise SettingsError(f"expected 1-d t, y, w of one length, got {y.shape}", field="t")
    if frequency.ndim != 1 or not np.all(np.isfinite(frequency)):
        raise SettingsError("expected a 1-d array of finite numbers", field="frequency")
    if not np.all(np.isfinite(t)):
        raise SettingsError("expected finite times", field="t")
    n_bins = require_int("n_bins", n_bins, 1, None)
    if shifts.ndim != 1 or not np.all((shifts >= 0.0) & (shifts < 1.0)):
        raise SettingsError(f"got {shifts}; expected numbers in [0, 1)", field="shifts")
    wy = w * y
    return aov_binned_loop(
        np.ascontiguousarray(t - np.min(t)),
        np.ascontiguousarray(w),
        np.ascontiguousarray(wy),
        float(np.dot(wy, y)),
        frequency,
        n_bins,
        shifts,
    )


def _distinct_peaks(frequency, value, k, separation) -> list[int]:
    """Indices of the k highest values at least ``separation`` apart."""
    inner = np.flatnonzero((value[1:-1] >= value[:-2]) & (value[1:-1] >= value[2:])) + 1
    pool = inner if inner.size else np.arange(value.size)
    order = pool[np.argsort(value[pool])[::-1]]
    chosen: list[int] = []
    for i in order[: 50 * k]:
        if all(abs(frequency[i] - frequency[j]) > separation for j in chosen):
            chosen.append(int(i))
            if len(chosen) == k:
                break
    return chosen


def eclipse_search(lc, settings: EclipseSearchSettings | None = None) -> EclipseSearch | None:
    """Search a light curve's good points for narrow eclipses.

    Returns None when the data cannot support the search (too few points
    for the bins, or a baseline too short for ``min_period``).
    """
    from scipy import special  # imported here: scipy.special is slow to import

    settings = settings or EclipseSearchSettings()
    t, y, w = _prepare(lc, settings.clip)
    n = t.size
    if n < 3 * settings.n_bins or not np.any(y):
        return None
    baseline = float(t.max() - t.min())
    fmin = 1.0 / (settings.max_period_fraction * baseline) if baseline > 0 else np.inf
    fmax = 1.0 / settings.min_period
    if not fmin < fmax:
        return None
    # stage 1: coarse bins on a coarse grid (a coarse bin tolerates the phase
    # drift between grid points); stage 2: the full statistic on a fine grid
    # around the best coarse peaks
    df = 1.0 / (settings.oversampling * baseline)
    coarse = np.arange(fmin, fmax, df)
    coarse_f, _ = aov_binned(t, y, w, coarse, max(4, settings.n_bins // 2), shifts=(0.0,))
    fine_df = 1.0 / (2.0 * settings.n_bins * baseline)  # phase drift under half a bin
    seeds = _distinct_peaks(coarse, coarse_f, settings.n_seeds, 1.5 / baseline)
    offsets = np.arange(-df, df + 0.5 * fine_df, fine_df)
    frequency = np.unique(np.concatenate([coarse[i] + offsets for i in seeds]))
    frequency = frequency[(frequency >= fmin) & (frequency <= fmax)]
    f_value, r = aov_binned(t, y, w, frequency, settings.n_bins)
    chosen = _distinct_peaks(frequency, f_value, settings.n_peaks, 1.5 / baseline)
    n_trials = 2.0 * settings.n_bins * (fmax - fmin) * baseline
    idx = np.array(chosen)
    single = special.fdtrc(r[idx] - 1, n - r[idx], f_value[idx])
    with np.errstate(divide="ignore"):
        fap = np.clip(-np.expm1(n_trials * np.log1p(-single)), 0.0, 1.0)
    # robust z-score of each peak in the coarse pass (as the candidates' local
    # S/N does for periodogram peaks), the coarse value being the largest
    # within one coarse step of the peak
    centre = float(np.median(coarse_f))
    spread = MAD_TO_SIGMA * float(np.median(np.abs(coarse_f - centre)))
    snr = []
    for i in idx:
        near = np.abs(coarse - frequency[i]) <= 1.01 * df
        top = float(coarse_f[near].max()) if near.any() else centre
        snr.append((top - centre) / spread if spread > 0 else float("inf"))
    return EclipseSearch(
        snrs=tuple(snr),
        n_searched=int(coarse.size + frequency.size),
        frequencies=tuple(float(frequency[i]) for i in idx),
        f_values=tuple(float(v) for v in f_value[idx]),
        faps=tuple(float(p) for p in fap),
        n_trials=n_trials,
        n_bins=settings.n_bins,
        n_points=n,
    )
