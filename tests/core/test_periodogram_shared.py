"""Shared-epoch batched periodograms equal the star-by-star ones on the good points."""

from __future__ import annotations

import numpy as np
import pytest

from phasewise.core.errors import PhasewiseError
from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import (
    KERNELS,
    PeriodogramSettings,
    compute_periodogram,
    grid_parameters,
    shared_epoch_periodograms,
)


@pytest.fixture(scope="module")
def field():
    """12 stars on 150 shared epochs, with missing points (NaN) scattered in."""
    rng = np.random.default_rng(99)
    t = 2460200.0 + np.sort(rng.uniform(0, 70, 150))
    periods = rng.uniform(0.3, 3.0, 12)
    mag = 14 + 0.2 * np.sin(2 * np.pi * t[None, :] / periods[:, None])
    err = rng.uniform(0.01, 0.05, mag.shape)
    mag = mag + rng.normal(0, err)
    missing = rng.random(mag.shape) < 0.1
    mag[missing] = np.nan
    err[rng.random(mag.shape) < 0.02] = np.nan  # a missing error also drops the point
    return t, mag, err, periods


def _single(t, mag_row, err_row, settings, with_errors=True):
    good = np.isfinite(mag_row) & np.isfinite(err_row)
    lc = LightCurve(
        "S", t[good], mag_row[good], err_row[good] if with_errors else None, has_errors=with_errors
    )
    return compute_periodogram(lc, settings, frequency=_grid(t, settings))


def _grid(t, settings):
    from phasewise.core.periodogram import frequency_grid

    return frequency_grid(t, settings)


@pytest.mark.parametrize("method", ["gls", "mhgls"])
def test_batched_equals_star_by_star(field, method):
    t, mag, err, periods = field
    settings = PeriodogramSettings(method=method, nterms=2, fmax=4.0)
    batch = shared_epoch_periodograms(t, mag, err, settings)
    grid = grid_parameters(t, settings)
    assert len(batch) == mag.shape[0]
    t0 = 0.5 * (t.min() + t.max())  # the batch's time origin
    kernel = KERNELS[method]
    for i, pg in enumerate(batch):
        good = np.isfinite(mag[i]) & np.isfinite(err[i])
        # zero weight is exact: the same kernel on the good points alone, same origin
        alone, _ = kernel.function(
            t[good] - t0, mag[i][good], err[i][good], pg.frequency, settings, grid=grid
        )
        np.testing.assert_allclose(pg.power, alone, rtol=1e-8, atol=1e-13)
        # and the front on the star's own light curve agrees to the transform's precision
        single = _single(t, mag[i], err[i], settings)
        np.testing.assert_allclose(pg.power, single.power, rtol=1e-6, atol=1e-9)
        assert pg.n_points == single.n_points
        assert pg.baseline == pytest.approx(single.baseline)
    assert batch[0].frequency is batch[-1].frequency  # one shared grid, no copies
    best = np.array([pg.best_frequency for pg in batch])
    # a 2-term fit of a sinusoid is as good at f/2 (its 2nd harmonic is f)
    off = np.abs(best - 1 / periods)
    if method == "mhgls":
        off = np.minimum(off, np.abs(best - 0.5 / periods))
    assert np.mean(off < 0.02) > 0.8


def test_batched_without_errors_equals_unweighted(field):
    t, mag, err, _ = field
    settings = PeriodogramSettings(fmax=4.0)
    mag = np.where(np.isfinite(err), mag, np.nan)
    batch = shared_epoch_periodograms(t, mag, None, settings)
    for i in (0, 5, 11):
        good = np.isfinite(mag[i])
        lc = LightCurve("S", t[good], mag[i][good])
        single = compute_periodogram(lc, settings, frequency=_grid(t, settings))
        np.testing.assert_allclose(batch[i].power, single.power, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("method", ["pdm", "ce"])
def test_non_transform_methods_drop_missing_points(field, method):
    t, mag, err, _ = field
    settings = PeriodogramSettings(method=method, fmax=2.0)
    batch = shared_epoch_periodograms(t, mag[:3], err[:3], settings)
    for i, pg in enumerate(batch):
        single = _single(t, mag[i], err[i], settings)
        np.testing.assert_allclose(pg.power, single.power, rtol=1e-10)
        assert pg.statistic is not None


def test_shape_and_point_errors_name_the_problem(field):
    t, mag, err, _ = field
    with pytest.raises(
        PhasewiseError, match=r"field 'mag'.*shape \(n_stars, 149\), got \(12, 150\)"
    ):
        shared_epoch_periodograms(t[:-1], mag, err)
    sparse = mag[:2].copy()
    sparse[1, 4:] = np.nan
    with pytest.raises(PhasewiseError, match="row 1.*4 good points"):
        shared_epoch_periodograms(t, sparse, err[:2])


def test_batch_size_does_not_change_the_result(field):
    t, mag, err, _ = field
    settings = PeriodogramSettings(fmax=3.0)
    whole = shared_epoch_periodograms(t, mag, err, settings, batch_size=100)
    pieces = shared_epoch_periodograms(t, mag, err, settings, batch_size=5)
    for a, b in zip(whole, pieces, strict=True):
        np.testing.assert_allclose(a.power, b.power, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("method", ["gls", "pdm", "ce"])
def test_a_constant_star_in_a_batch_gets_zero_power(field, method):
    t, mag, err, _ = field
    mag = mag[:3].copy()
    mag[1] = np.where(np.isfinite(mag[1]), 13.0, np.nan)
    batch = shared_epoch_periodograms(t, mag, err[:3], PeriodogramSettings(method=method, fmax=2))
    assert np.all(batch[1].power == 0.0)
    assert np.all(np.isfinite(batch[0].power)) and batch[0].power.max() > 0.3
