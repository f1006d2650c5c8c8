"""The front of the period search: light curve + settings -> :class:`Periodogram`.

Multi-band power (one frequency shared by all bands, each band b with its
own mean and its own harmonic amplitudes) is the total chi-square reduction
over the total chi-square of constant band means, each band's chi-square
taken in units of its own scatter (its errors rescaled so that the reduced
chi-square about its mean is 1, s2_b = chi2_0,b / (N_b - 1))::

    P(f) = sum_b [chi2_0,b - chi2_b(f)] / s2_b / sum_b chi2_0,b / s2_b
         = sum_b (N_b - 1) p_b(f) / sum_b (N_b - 1)

with p_b the single-band (GLS or multi-harmonic) power.  P is in [0, 1] and
equals the GLS for one band.  Without the rescaling a band with few points
and underestimated errors (zero points, outliers) would dominate the sum,
and the F test of the false-alarm probability would credit its chance
peaks with the points of every band.  PDM and conditional entropy have no
chi-square: there each band is standardised (own weighted mean removed,
divided by its own weighted scatter) and the bands are searched together.
"""

from __future__ import annotations

import numpy as np

from ..errors import PhasewiseError
from .grid import RegularGrid, grid_parameters, regular_grid_of
from .kernels import KERNELS, METHOD_KERNELS
from .result import Periodogram
from .settings import PeriodogramSettings

__all__ = ["compute_periodogram", "search_bands", "MIN_POINTS"]

#: Fewest points a periodogram is computed from (a sinusoid and a mean need 3).
MIN_POINTS = 5


def search_bands(lc, settings: PeriodogramSettings) -> tuple[str, ...]:
    """Bands a search combines: all with ``multiband`` (else the one with most points)."""
    bands = lc.bands
    if not bands:
        return ()
    return bands if settings.multiband else bands[:1]


def _prepare_frequency(frequency, settings, t) -> tuple[np.ndarray, RegularGrid | None]:
    if frequency is None:
        grid = grid_parameters(t, settings)
        return grid.frequencies(), grid
    frequency = np.array(frequency, dtype=float)  # a copy: the result makes it read-only
    if frequency.ndim != 1 or frequency.size == 0 or not np.all(frequency > 0):
        raise PhasewiseError(
            "expected a 1-D array of positive frequencies (cycles/day)", field="frequency"
        )
    return frequency, regular_grid_of(frequency)


def _band_arrays(lc, band, use_errors):
    t, y, dy = lc.arrays(band)
    return t, y, (dy if use_errors else None)


def compute_periodogram(
    lc, settings: PeriodogramSettings | None = None, frequency=None, *, n_threads: int = 1
) -> Periodogram:
    """Periodogram of a light curve's good points.

    Parameters
    ----------
    lc : LightCurve
    settings : PeriodogramSettings, optional
    frequency : array of float, optional
        Frequencies (c/d) to use instead of :func:`frequency_grid`; a
        non-uniform array is computed by the slow exact kernel.
    n_threads : int
        Threads of the transform (1 plays well with process pools).

    Raises
    ------
    PhasewiseError
        Fewer than :data:`MIN_POINTS` good points, or a zero baseline.
    GridTooLargeError
        The grid exceeds ``settings.max_frequencies``.
    """
    settings = PeriodogramSettings() if settings is None else settings
    bands = search_bands(lc, settings)
    use_errors = bool(lc.has_errors)
    if len(bands) <= 1:
        t, y, dy = _band_arrays(lc, bands[0] if bands else None, use_errors)
        _require_points(t.size, lc.star_id)
        frequency, grid = _prepare_frequency(frequency, settings, t)
        kernel = KERNELS[METHOD_KERNELS[settings.method]]
        t0 = 0.5 * (t[0] + t[-1])  # a small time origin keeps the transform's phases exact
        if y.max() == y.min():
            power, statistic = flat_power(frequency, kernel, settings)
        else:
            power, statistic = kernel.function(
                t - t0, y, dy, frequency, settings, grid=grid, n_threads=n_threads
            )
    else:
        per_band = [_band_arrays(lc, b, use_errors) for b in bands]
        t_all = np.concatenate([p[0] for p in per_band])
        _require_points(t_all.size, lc.star_id)
        frequency, grid = _prepare_frequency(frequency, settings, t_all)
        kernel = KERNELS[METHOD_KERNELS[settings.method]]
        if all(p[1].max() == p[1].min() for p in per_band):
            power, statistic = flat_power(frequency, kernel, settings)
        else:
            power, statistic = _multiband(
                per_band, t_all, frequency, grid, settings, kernel, n_threads
            )
        t = t_all
    return Periodogram(
        frequency=frequency,
        power=power,
        method=settings.method,
        settings=settings,
        n_points=int(t.size),
        baseline=float(t.max() - t.min()),
        bands=tuple(bands),
        statistic=statistic,
        statistic_name=kernel.statistic,
        kernel=kernel.name,
    )


def flat_power(frequency, kernel, settings):
    """Power of a constant curve: 0 everywhere (nothing to explain), never NaN.

    The raw statistic takes its no-signal value: theta = 1 for PDM and
    H = H(m) = 0 for conditional entropy (one magnitude bin holds all).
    """
    power = np.zeros(frequency.size)
    if kernel.statistic == "theta":
        return power, np.ones(frequency.size)
    if kernel.statistic == "entropy":
        return power, np.zeros(frequency.size)
    return power, None


def _require_points(n: int, star_id: str) -> None:
    if n < MIN_POINTS:
        raise PhasewiseError(
            f"star {star_id!r} has {n} good points; a periodogram needs at least {MIN_POINTS}",
            field="time",
        )


def _chi2_about_mean(y, dy):
    w = np.ones_like(y) if dy is None else 1.0 / dy**2
    mean = np.dot(w, y) / w.sum()
    return float(np.dot(w, (y - mean) ** 2)), mean, w


def _multiband(per_band, t_all, frequency, grid, settings, kernel, n_threads):
    t0 = 0.5 * (t_all.min() + t_all.max())
    if kernel.statistic is None:  # least squares: combine chi-square reductions
        total = np.zeros(frequency.size)
        chi2_sum = 0.0
        n_par = 2 * (settings.nterms if settings.method == "mhgls" else 1) + 1
        for t, y, dy in per_band:
            chi2_0, _, _ = _chi2_about_mean(y, dy)
            if chi2_0 <= 0 or t.size <= n_par:
                continue  # a constant band adds nothing to either sum
            power, _ = kernel.function(
                t - t0, y, dy, frequency, settings, grid=grid, n_threads=n_threads
            )
            # each band's chi-square in units of its own scatter (module notes)
            total += (t.size - 1) * power
            chi2_sum += t.size - 1
        if chi2_sum <= 0:
            return np.zeros(frequency.size), None
        return total / chi2_sum, None
    ys, dys = [], []
    for _t, y, dy in per_band:
        chi2_0, mean, w = _chi2_about_mean(y, dy)
        scale = np.sqrt(chi2_0 / w.sum()) if chi2_0 > 0 else 1.0
        ys.append((y - mean) / scale)
        dys.append(None if dy is None else dy / scale)
    y_all = np.concatenate(ys)
    dy_all = None if dys[0] is None else np.concatenate(dys)
    return kernel.function(t_all - t0, y_all, dy_all, frequency, settings, grid=grid)
