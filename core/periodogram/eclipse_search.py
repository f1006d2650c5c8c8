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
operations as a plain numpy version would.  It costs about 2 ns per point
per trial frequency, so on a curve of many points the coarse first pass
(every frequency of the range) is replaced by a *harmonic screen*
(:func:`harmonic_screen`): the power of the first harmonics of the fold,
as many as the coarse pass has bins, each weighted by what a phase bin of
that width keeps of it, all from one non-uniform FFT.  For well-filled bins this is the
between-bin sum of squares of the binned fold written in Fourier terms; it
only chooses the seeds, and every reported statistic and probability is
the exact binned one.

Significance (see :func:`eclipse_search` for the checks on each peak):
for Gaussian noise F follows the F distribution with
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
    marks: tuple[tuple[str, ...], ...] = ()
    mark_details: tuple[tuple[str, ...], ...] = ()
    tail_inflation: float = 1.0

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
            "marks": [list(m) for m in self.marks],
            "mark_details": [list(d) for d in self.mark_details],
            "tail_inflation": float(self.tail_inflation),
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


#: The harmonic screen replaces the exact coarse pass from this many points
#: (our choice: 25 per fine bin, so the bins are well filled and the binned
#: fold is close to its Fourier form) ...
SCREEN_MIN_POINTS = 500
#: ... and from this much work of the exact pass (points x coarse
#: frequencies; about 10 ms of the compiled loop, below which the screen
#: gains nothing).
SCREEN_MIN_WORK = 5_000_000

#: Share of the exact coarse pass's frequencies whose distinct peaks the
#: fine pass refines when that is more than ``n_seeds`` (our choice: a
#: narrow eclipse seen in ten points of a sparse survey ranked ~90th of
#: ~20,000 coarse frequencies; after the harmonic screen ``n_seeds`` stay).
SEED_SHARE = 0.01

#: Coarse frequencies at which the exact statistic is sampled for the
#: robust S/N's centre and spread when the screen chose the seeds (a median
#: and a MAD from 1,000 values are within a few per cent of the whole grid's).
SNR_SAMPLES = 1_000


def harmonic_screen(t, y, w, df, k_first, k_last, n_harmonics):
    """Weighted harmonic power of the fold on the grid ``k df``, k = k_first .. k_last.

    Parameters
    ----------
    t, y, w : ndarray
        Times (days), magnitudes of zero weighted mean and weights.
    df : float
        Grid step (cycles/day).
    k_first, k_last : int
        First and last grid index (``k_first >= 1``).
    n_harmonics : int
        Harmonics summed; harmonic ``h`` is weighted by
        ``sinc(h / n_harmonics)**2``, the share of its power a phase bin of
        width ``1 / n_harmonics`` keeps.

    Returns
    -------
    ndarray
        ``sum_h sinc(h/H)^2 |sum_i w_i y_i exp(2 pi i h k df t_i)|^2`` per
        grid frequency; for noise its expectation does not depend on the
        frequency.

    Notes
    -----
    The sums at ``h k df`` for every ``h`` and ``k`` lie on the one grid
    ``m df``, m = 0 .. ``n_harmonics k_last``: one type-1 non-uniform FFT
    (:func:`core.periodogram.kernels.nufft.trig_sums`) gives them all.
    """
    from .kernels.nufft import trig_sums

    sums = trig_sums(t - np.mean(t), w * y, 0.0, df, n_harmonics * k_last + 1)
    k = np.arange(k_first, k_last + 1)
    power = np.zeros(k.size)
    for h in range(1, n_harmonics + 1):
        power += np.sinc(h / n_harmonics) ** 2 * np.abs(sums[h * k]) ** 2
    return power


#: Phase drift, in bins, that the time cells of :func:`_aov_in_cells` allow
#: at the highest frequency (our choice: a tenth of a bin moves only the
#: points that close to a bin edge).
CELL_SMEAR = 0.1


def _aov_in_cells(t, y, w, frequency, n_bins) -> np.ndarray:
    """The statistic with one bin offset, the points merged into short time cells.

    For the robust S/N's centre and spread only (a summary of many noise
    values, not a reported statistic).  Points within
    ``CELL_SMEAR / (n_bins f_max)`` days of each other share a cell whose
    weights and weighted magnitudes are summed, at the cell's mean time:
    the bins' sums are those of the points but for points within a tenth
    of a bin of an edge.  ``F`` keeps the points' degrees of freedom.  On
    dense noise the median and MAD over many frequencies stay within a few
    per cent of the plain statistic's (the scatter between two partitions).
    """
    from ._aov_loop import aov_binned_loop

    width = CELL_SMEAR / (n_bins * float(np.max(frequency)))
    origin = float(np.min(t))
    cell = np.floor((t - origin) / width).astype(np.int64)
    _, inverse = np.unique(cell, return_inverse=True)
    n_cells = int(inverse.max()) + 1
    if n_cells > 0.8 * t.size:  # hardly any merged: the plain statistic
        return aov_binned(t, y, w, frequency, n_bins, shifts=(0.0,))[0]
    sum_w = np.bincount(inverse, weights=w)
    sum_wy = np.bincount(inverse, weights=w * y)
    times = np.bincount(inverse, weights=w * (t - origin)) / sum_w
    value, filled = aov_binned_loop(
        times,
        sum_w,
        sum_wy,
        float(np.dot(w * y, y)),
        np.ascontiguousarray(frequency, dtype=float),
        int(n_bins),
        np.zeros(1),
    )
    # the loop counts cells as points: give F the points' degrees of freedom
    dof = np.maximum(t.size - filled, 1) / np.maximum(n_cells - filled, 1)
    return np.where(value > 0, value * dof, 0.0)


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


#: Sidereal day in solar days (common practice, no source): ground-based
#: sampling repeats every sidereal day, so a false period settles near it.
SIDEREAL_DAY = 0.99727

#: Frequencies (c/d) of the day-length aliases penalised: periods of 1 d,
#: 1/2 d and the sidereal day (and its half).
DAY_ALIASES = (1.0, 2.0, 1.0 / SIDEREAL_DAY, 2.0 / SIDEREAL_DAY)

#: Factor on the false-alarm probability of a peak at a day-length alias
#: or a window peak (our choice: such a peak must be 100 times stronger to
#: count the same).
ALIAS_PENALTY = 100.0

#: The subharmonic check takes 2f (half the period) when its single-trial
#: probability is this many times smaller than at f (our choice: clearly
#: better, not just as good; an eclipsing binary with two similar eclipses
#: is as significant at both, and P against 2P is the eclipse test's).
SUBHARMONIC_FACTOR = 1e-3

#: Points in the deepest bin whose median must confirm a dip (the median
#: ignores a few co-phased outliers that would move the mean).
MIN_DIP_POINTS = 3

#: Robust S/N the median of the deepest bin must reach below the median of
#: the rest (our choice).
MIN_DIP_SNR = 4.0

#: Quantile of the permuted residuals' statistics at which the F tail is
#: compared with the star's own null (see :func:`_tail_inflation`).
CALIBRATION_QUANTILE = 0.999


def _limits(t, settings, periodogram) -> tuple[float, float]:
    """Frequency range: the periodogram's limits within the search's own."""
    from .grid import default_fmax

    baseline = float(t.max() - t.min())
    fmin = 1.0 / (settings.max_period_fraction * baseline) if baseline > 0 else np.inf
    fmax = 1.0 / settings.min_period
    if periodogram is not None:
        if periodogram.fmin is not None:
            fmin = max(fmin, float(periodogram.fmin))
        fmax = min(fmax, float(periodogram.fmax or default_fmax(t)))
    return fmin, fmax


#: Steps either side of a fine-grid peak at which :func:`_peak_top` looks.
PEAK_TOP_STEPS = 8


def _peak_top(t, y, w, f, fine_df, n_bins) -> tuple[float, float, int]:
    """Frequency, statistic and filled bins at the top of a fine-grid peak.

    The fine grid lets the phase drift by up to half a bin over the
    baseline, which moves the points of a narrow eclipse out of its core
    (in a sparse survey the statistic of a true eclipse fell from 7.1 to
    6.2, its probability by 100 times): the statistic is taken at its
    largest within one fine step either side, :data:`PEAK_TOP_STEPS` steps
    a side.  That is no new trial: the count of trials already has a trial
    per fine step.
    """
    grid = f + fine_df * np.linspace(-1.0, 1.0, 2 * PEAK_TOP_STEPS + 1)
    grid = grid[grid > 0]
    values, filled = aov_binned(t, y, w, grid, n_bins)
    k = int(np.argmax(values))
    return float(grid[k]), float(values[k]), int(filled[k])


def _alias_marks(f: float, baseline: float, windows) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """Marks of a peak at a day-length alias or a window peak (or their halves)."""
    tol = max(1.0 / baseline, 0.002 * f)
    details = []
    for a in DAY_ALIASES:
        if abs(f - a) <= tol:
            details.append(f"near the day-length alias {1 / a:.5g} d")
    for w in windows:
        for k in (1.0, 2.0, 0.5):
            if abs(f - k * w.frequency) <= tol:
                details.append(f"at {k:g} x the window peak {w.frequency:.5g} c/d")
    return (("alias",) if details else ()), tuple(details)


def _dip_confirmed(t, y, w, f, n_bins) -> bool:
    """Whether the median of the deepest phase bin confirms a dip.

    The mean of a bin moves with three co-phased outliers, its median does
    not: the dip counts when the deepest bin (by median, faint = larger
    magnitude) holds at least :data:`MIN_DIP_POINTS` points and its median
    lies :data:`MIN_DIP_SNR` robust standard errors beyond the median of
    the rest.
    """
    n = y.size
    order = np.argsort(y, kind="stable")
    ys = y[order]  # every selection from ys below comes out sorted
    phase = ((f * (t - t.min())) % 1.0)[order]
    bins = []
    for shift in (0.0, 0.5):
        index = np.floor(phase * n_bins + shift).astype(int) % n_bins
        counts = np.bincount(index, minlength=n_bins)
        for b in range(n_bins):
            k = int(counts[b])
            if k < MIN_DIP_POINTS or k == n:
                continue
            inside = index == b
            bins.append((_sorted_median(ys[inside]), k, inside))
    # the faintest bins first: the answer is the same whichever bin reaches
    # the threshold, and a real dip reaches it in the first bin tried
    bins.sort(key=lambda item: -item[0])
    for median_inside, k, inside in bins:
        m = n - k
        # the j-th smallest of the rest is at least the j-th smallest of all:
        # a bin whose median is not above that bound on the rest's median fails
        if median_inside <= 0.5 * (ys[(m - 1) // 2] + ys[m // 2]):
            continue
        rest = ys[~inside]
        centre = _sorted_median(rest)
        sigma = MAD_TO_SIGMA * _sorted_mad(rest, centre)
        if not sigma > 0:
            continue
        # standard error of a median: 1.2533 sigma / sqrt(k) (common practice, no source)
        if (median_inside - centre) / (1.2533 * sigma / np.sqrt(k)) >= MIN_DIP_SNR:
            return True
    return False


def _sorted_mad(values: np.ndarray, centre: float) -> float:
    """``np.median(np.abs(values - centre))`` of a sorted array, by bisection.

    The distances below ``centre`` (read backwards) and above it are two
    sorted sequences; their middle elements are found without forming them.
    """
    m = values.size
    split = int(np.searchsorted(values, centre))
    below, above = split, m - split

    def dist_below(i):  # i-th smallest distance of the points below centre
        return centre - values[split - 1 - i]

    def dist_above(j):
        return values[split + j] - centre

    def kth(k):  # k-th smallest (from 0) of both sequences together
        lo, hi = max(0, k + 1 - above), min(k + 1, below)
        while lo < hi:  # fewest taken from below with the next one not smaller
            i = (lo + hi) // 2
            if dist_below(i) < dist_above(k - i):
                lo = i + 1
            else:
                hi = i
        j = k + 1 - lo
        return max(
            dist_below(lo - 1) if lo > 0 else -np.inf, dist_above(j - 1) if j > 0 else -np.inf
        )

    return float(0.5 * (kth((m - 1) // 2) + kth(m // 2)))


def _sorted_median(values: np.ndarray) -> float:
    """The median of a sorted array (as ``np.median`` gives it)."""
    m = values.size
    return float(0.5 * (values[(m - 1) // 2] + values[m // 2]))


def _tail_inflation(t, y, w, frequency, n_bins, rng) -> float:
    """How much heavier the star's own null tail is than the F distribution's.

    The magnitudes are shifted circularly along the time-ordered points,
    twice (the star's own residual distribution, outliers, nightly zero
    points and drifts all kept, any periodicity destroyed) and the
    statistic computed on the coarse grid.  At the
    :data:`CALIBRATION_QUANTILE` of those null values, the ratio of the
    exceedance seen to the F distribution's survival function is the
    factor (at least 1) by which single-frequency probabilities are raised.
    """
    from scipy import special

    order = np.argsort(t, kind="stable")
    values, filled = [], []
    for _ in range(2):
        # a circular shift of the magnitudes along the time-ordered points
        # keeps neighbours together (nightly zero points, drifts) while it
        # destroys any periodicity
        shift = int(rng.integers(t.size // 10, t.size - t.size // 10))
        shifted_y, shifted_w = np.empty_like(y), np.empty_like(w)
        shifted_y[order] = np.roll(y[order], shift)
        shifted_w[order] = np.roll(w[order], shift)
        f_value, r = aov_binned(t, shifted_y, shifted_w, frequency, n_bins, shifts=(0.0,))
        values.append(f_value)
        filled.append(r)
    values = np.concatenate(values)
    filled = np.concatenate(filled)
    if values.size < 100:
        return 1.0
    k = int(CALIBRATION_QUANTILE * values.size)
    order = np.argsort(values)
    q_index = order[min(k, values.size - 1)]
    expected = float(special.fdtrc(filled[q_index] - 1, t.size - filled[q_index], values[q_index]))
    seen = 1.0 - k / values.size
    return max(1.0, seen / expected) if expected > 0 else 1.0


def eclipse_search(
    lc,
    settings: EclipseSearchSettings | None = None,
    *,
    periodogram=None,
) -> EclipseSearch | None:
    """Search a light curve's good points for narrow eclipses.

    Parameters
    ----------
    lc : LightCurve
    settings : EclipseSearchSettings, optional
    periodogram : PeriodogramSettings, optional
        The periodogram's settings: the search keeps within its frequency
        limits (``fmin``, and ``fmax`` or the default from the sampling).

    Notes
    -----
    Beyond the phase-binned statistic (module notes), each reported peak
    goes through four checks, in this order:

    * **subharmonic check**: if the statistic at 2f is clearly more
      significant than at f (:data:`SUBHARMONIC_FACTOR`), the plainer
      answer 2f (half the period) is taken; as significant, it is noted;
    * **dip confirmed by medians** (:func:`_dip_confirmed`); a peak that
      fails gets FAP 1 (co-phased outliers, not an eclipse);
    * **calibrated false-alarm probability**: the F distribution's tail is
      scaled by :func:`_tail_inflation` (permutations of the star's own
      magnitudes) before the trials are counted;
    * **aliases**: peaks near 1 d, 1/2 d, the sidereal day or a window
      peak are marked ``alias`` and their FAP multiplied by
      :data:`ALIAS_PENALTY`.

    Returns None when the data cannot support the search (too few points
    for the bins, or a baseline too short for the range).
    """
    from scipy import special  # imported here: scipy.special is slow to import

    from .window import window_peaks

    settings = settings or EclipseSearchSettings()
    t, y, w = _prepare(lc, settings.clip)
    n = t.size
    if n < 3 * settings.n_bins or not np.any(y):
        return None
    baseline = float(t.max() - t.min())
    fmin, fmax = _limits(t, settings, periodogram)
    if not fmin < fmax:
        return None
    # stage 1: coarse bins on a coarse grid (a coarse bin tolerates the phase
    # drift between grid points), or on many points the harmonic screen on
    # a grid of the same step; stage 2: the full statistic on a fine grid
    # around the best coarse peaks
    df = 1.0 / (settings.oversampling * baseline)
    coarse = np.arange(fmin, fmax, df)
    if coarse.size < 3:
        return None
    coarse_bins = max(4, settings.n_bins // 2)
    screened = n >= SCREEN_MIN_POINTS and n * coarse.size >= SCREEN_MIN_WORK
    if screened:
        # the seeds from the harmonic screen on the grid k df (module notes)
        k_first = max(1, int(np.ceil(fmin / df)))
        k_last = max(k_first, int(np.floor(fmax / df)))
        seed_grid = df * np.arange(k_first, k_last + 1)
        seed_values = harmonic_screen(t, y, w, df, k_first, k_last, coarse_bins)
        coarse_f = None
    else:
        seed_grid = coarse
        seed_values = coarse_f = aov_binned(t, y, w, coarse, coarse_bins, shifts=(0.0,))[0]
    fine_df = 1.0 / (2.0 * settings.n_bins * baseline)  # phase drift under half a bin
    # a narrow eclipse keeps little of its statistic in the coarse bins (the
    # phase drifts by up to a coarse bin between grid points): after the
    # exact coarse pass, refine its top SEED_SHARE, at least n_seeds peaks
    # (the fine pass then costs about a sixth of the coarse one)
    n_seeds = settings.n_seeds if screened else max(settings.n_seeds, int(SEED_SHARE * coarse.size))
    seeds = _distinct_peaks(seed_grid, seed_values, n_seeds, 1.5 / baseline)
    offsets = np.arange(-df, df + 0.5 * fine_df, fine_df)
    frequency = np.unique(np.concatenate([seed_grid[i] + offsets for i in seeds]))
    frequency = frequency[(frequency >= fmin) & (frequency <= fmax)]
    f_value, r = aov_binned(t, y, w, frequency, settings.n_bins)
    chosen = _distinct_peaks(frequency, f_value, settings.n_peaks, 1.5 / baseline)
    n_trials = 2.0 * settings.n_bins * (fmax - fmin) * baseline

    def single_p(value, filled):
        return special.fdtrc(filled - 1, n - filled, value)

    peaks = []
    for i in chosen:
        f, value, filled = _peak_top(t, y, w, float(frequency[i]), fine_df, settings.n_bins)
        p = float(single_p(value, filled))
        note = ()
        if 2.0 * f <= fmax:  # subharmonic check: is 2f as good?
            v2, r2 = aov_binned(t, y, w, np.array([2.0 * f]), settings.n_bins)
            p2 = float(single_p(v2[0], r2[0]))
            if p2 < SUBHARMONIC_FACTOR * p:
                f, value, filled, p = 2.0 * f, float(v2[0]), int(r2[0]), p2
            elif p2 <= p:
                note = (f"subharmonic check: {1 / (2 * f):.6g} d is as significant",)
        peaks.append([f, value, filled, p, note])
    inflation = 1.0
    gaussian = [-np.expm1(n_trials * np.log1p(-min(p, 1 - 1e-16))) for *_, p, _ in peaks]
    if min(gaussian) < 0.05:  # calibrate only where it could matter
        rng = np.random.default_rng(n)  # seeded by the data size: reproducible
        # after the screen, the null on one frequency per peak width 1/T: the
        # coarse grid's neighbours are nearly the same fold, so the values
        # left out add little to the tail's count and cost the most
        null_grid = coarse[:: max(1, int(settings.oversampling))] if screened else coarse
        inflation = _tail_inflation(t, y, w, null_grid, settings.n_bins, rng)
    windows = window_peaks(t)
    faps, marks, details = [], [], []
    for f, _value, _filled, p, note in peaks:
        p_cal = min(1.0, inflation * p)
        with np.errstate(divide="ignore"):
            fap = float(np.clip(-np.expm1(n_trials * np.log1p(-min(p_cal, 1 - 1e-16))), 0, 1))
        m, d = _alias_marks(f, baseline, windows)
        d = (*d, *note)
        if m:
            fap = min(1.0, ALIAS_PENALTY * fap)
        if fap < 1.0 and not _dip_confirmed(t, y, w, f, settings.n_bins):
            fap = 1.0
            d = (*d, "the median of the deepest bin does not confirm a dip")
        faps.append(fap)
        marks.append(m)
        details.append(d)
    # robust z-score of each peak in the coarse pass (as the candidates' local
    # S/N does for periodogram peaks), the coarse value being the largest
    # within one coarse step of the peak; after the screen, the exact coarse
    # statistic at evenly spread samples of the grid and near each peak
    if coarse_f is None:
        sample = coarse[:: max(1, coarse.size // SNR_SAMPLES)]
        sample_f = _aov_in_cells(t, y, w, sample, coarse_bins)
    else:
        sample_f = coarse_f
    centre = float(np.median(sample_f))
    spread = MAD_TO_SIGMA * float(np.median(np.abs(sample_f - centre)))
    snr = []
    for f, *_ in peaks:
        near = np.abs(coarse - f) <= 1.01 * df
        if not near.any():
            top = centre
        elif coarse_f is None:
            top = float(aov_binned(t, y, w, coarse[near], coarse_bins, shifts=(0.0,))[0].max())
        else:
            top = float(coarse_f[near].max())
        snr.append((top - centre) / spread if spread > 0 else float("inf"))
    # strongest first after the checks
    order = sorted(range(len(peaks)), key=lambda k: (faps[k], -peaks[k][1]))
    return EclipseSearch(
        snrs=tuple(snr[k] for k in order),
        n_searched=int(coarse.size + frequency.size),
        frequencies=tuple(peaks[k][0] for k in order),
        f_values=tuple(peaks[k][1] for k in order),
        faps=tuple(faps[k] for k in order),
        n_trials=n_trials,
        n_bins=settings.n_bins,
        n_points=n,
        marks=tuple(marks[k] for k in order),
        mark_details=tuple(details[k] for k in order),
        tail_inflation=inflation,
    )
