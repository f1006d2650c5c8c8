"""Periodograms of many stars observed at the same epochs, in one batched call.

Stars of one field and camera share their epochs; their least-squares
periodograms then share the non-uniform transform setup and run as one
batch.  A missing point (NaN magnitude or error, or a non-positive error)
gets zero weight: its magnitude is replaced by the star's weighted mean and
its error by infinity, which leaves every weighted sum, hence the power,
exactly as if the point were absent.
"""

from __future__ import annotations

import numpy as np

from ..errors import PhasewiseError
from .compute import MIN_POINTS, flat_power
from .grid import grid_parameters, regular_grid_of
from .kernels import KERNELS, METHOD_KERNELS
from .result import Periodogram
from .settings import PeriodogramSettings

__all__ = ["shared_epoch_periodograms"]


def shared_epoch_periodograms(
    time,
    mag,
    err=None,
    settings: PeriodogramSettings | None = None,
    *,
    frequency=None,
    n_threads: int = 1,
    batch_size: int = 16,
) -> tuple[Periodogram, ...]:
    """One periodogram per star for stars sharing the epochs ``time``.

    Parameters
    ----------
    time : array of float, shape (n_epochs,)
        Shared epochs, days.
    mag : array of float, shape (n_stars, n_epochs)
        Magnitudes; NaN where a star has no point.
    err : array of float, shape (n_stars, n_epochs) or (n_epochs,), optional
        One-sigma errors (NaN, 0 or inf: no point); None weighs all points the same.
    settings : PeriodogramSettings, optional
        ``gls`` and ``mhgls`` run batched; ``pdm`` and ``ce`` star by star.
    frequency : array of float, optional
        Shared grid; by default :func:`frequency_grid` of all epochs.
    n_threads : int
        Threads of the transform.
    batch_size : int
        Stars per transform call: as fast as one call for all stars, and it
        bounds the transform's work memory (3 complex arrays per star and
        frequency).

    Returns
    -------
    tuple of Periodogram
        In the order of the rows of ``mag``; they share one frequency array.
    """
    settings = PeriodogramSettings() if settings is None else settings
    t = np.asarray(time, dtype=float)
    y = np.array(mag, dtype=float, ndmin=2)
    if y.ndim != 2 or y.shape[1] != t.size:
        raise PhasewiseError(
            f"expected magnitudes of shape (n_stars, {t.size}), got {np.shape(mag)}", field="mag"
        )
    if err is None:
        dy = np.ones_like(y)
    else:
        dy = np.array(np.broadcast_to(np.asarray(err, dtype=float), y.shape))
    good = np.isfinite(y) & np.isfinite(dy) & (dy > 0) & np.isfinite(t)[None, :]
    n_good = good.sum(axis=1)
    if np.any(n_good < MIN_POINTS):
        row = int(np.argmin(n_good))
        raise PhasewiseError(
            f"this star has {n_good[row]} good points; a periodogram needs at least {MIN_POINTS}",
            row=row,
            field="mag",
        )
    t_ok = t[np.isfinite(t)]
    if frequency is None:
        grid = grid_parameters(t_ok, settings)
        frequency = grid.frequencies()
    else:
        frequency = np.array(frequency, dtype=float)  # a copy: it is made read-only below
        grid = regular_grid_of(frequency)
    weight = np.where(good, 1.0 / np.where(good, dy, 1.0) ** 2, 0.0)
    mean = (weight * np.where(good, y, 0.0)).sum(axis=1) / weight.sum(axis=1)
    y_good = np.where(good, y, np.nan)
    constant = np.nanmax(y_good, axis=1) == np.nanmin(y_good, axis=1)  # power 0, not 0/0
    y = np.where(good, y, mean[:, None])
    dy = np.where(good, dy, np.inf)
    t_filled = np.where(np.isfinite(t), t, np.nanmean(t))
    t0 = 0.5 * (t_ok.min() + t_ok.max())
    kernel = KERNELS[METHOD_KERNELS[settings.method]]
    if kernel.statistic is None:
        weights_given = not (err is None and good.all())
        power = np.empty((y.shape[0], frequency.size))
        for start in range(0, y.shape[0], max(1, batch_size)):
            rows = slice(start, start + max(1, batch_size))
            power[rows], _ = kernel.function(
                t_filled - t0,
                y[rows],
                dy[rows] if weights_given else None,
                frequency,
                settings,
                grid=grid,
                n_threads=n_threads,
            )
        statistics = [None] * y.shape[0]
    else:  # PDM and CE are not transforms: drop the missing points star by star
        power = np.empty((y.shape[0], frequency.size))
        statistics = [None] * y.shape[0]
        for i in np.flatnonzero(~constant):
            g = good[i]
            power[i], statistics[i] = kernel.function(
                t_filled[g] - t0, y[i][g], None if err is None else dy[i][g], frequency, settings
            )
    for i in np.flatnonzero(constant):
        power[i], statistics[i] = flat_power(frequency, kernel, settings)
    frequency.flags.writeable = False
    out = []
    for i in range(y.shape[0]):
        t_star = t_filled[good[i]]
        out.append(
            Periodogram(
                frequency=frequency,
                power=power[i],
                method=settings.method,
                settings=settings,
                n_points=int(n_good[i]),
                baseline=float(t_star.max() - t_star.min()),
                bands=(),
                statistic=statistics[i],
                statistic_name=kernel.statistic,
                kernel=kernel.name,
            )
        )
    return tuple(out)
