"""The period choice's shortcuts give what the plain formulas give.

Each check compares a cached or shared computation of ``core.period_choice``
with the quantity written out from its definition.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import linalg

from phasewise.core.analysis import AnalysisSettings
from phasewise.core.fourier import choose_order, fit_fourier
from phasewise.core.lightcurve import LightCurve
from phasewise.core.period_choice import (
    _fourier_bic,
    _harmonic_columns,
    _models_chi2,
    _SharedColumns,
    _trend_options,
)


def _star(seed: int = 51) -> LightCurve:
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 400, 600))
    band = np.where(rng.random(t.size) < 0.3, "V", "I").astype(object)
    mag = 0.25 * np.sin(2 * np.pi * t / 0.63) ** 3 + rng.normal(0, 0.02, t.size)
    return LightCurve("s", t, mag, np.full(t.size, 0.02), band=band)


@pytest.mark.parametrize("order", [1, 3, 7])
def test_harmonic_columns_are_the_cosines_and_sines_of_each_harmonic(order):
    # definition: cos(2 pi k f (t - mean t)) and sin(...) for k = 1..order
    t = np.sort(np.random.default_rng(3).uniform(2461000.0, 2461900.0, 300))
    f = 1 / 0.63
    arg = 2 * np.pi * f * np.multiply.outer(t - t.mean(), np.arange(1, order + 1))
    got = _harmonic_columns(t, f, order)
    assert got.shape == (t.size, 2 * order)
    np.testing.assert_allclose(got[:, 0::2], np.cos(arg), atol=1e-9)
    np.testing.assert_allclose(got[:, 1::2], np.sin(arg), atol=1e-9)
    assert _harmonic_columns(t.copy(), f, order) is got  # kept for equal times


@pytest.mark.parametrize("frequency", [1 / 0.63, 2 / 0.63, 1.234])
def test_candidate_bic_equals_the_sum_over_bands_of_fitted_chi_square(frequency):
    # definition: per band, chi2 of the chosen-order fit + (2 order + 1) ln N
    lc = _star()
    settings = AnalysisSettings()
    want = 0.0
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        order = choose_order(t, m, e, frequency, settings.fourier).order
        fit = fit_fourier(t, m, e, frequency, order, form=settings.fourier.form)
        want += float(np.sum(((m - fit.model(t)) / e) ** 2)) + (2 * order + 1) * np.log(t.size)
    assert _fourier_bic(lc, frequency, settings) == pytest.approx(want, rel=1e-10)


def _lstsq_chi2(columns, m, e):
    # reference: scipy's SVD least squares on the weighted design [1, columns]
    design = np.concatenate([np.ones((m.size, 1)), columns], axis=1) / e[:, None]
    coef, *_ = linalg.lstsq(design, m / e, lapack_driver="gelsd")
    return float(np.sum((m / e - design @ coef) ** 2)), coef


def test_shared_normal_equations_give_the_least_squares_fit_of_each_subset():
    rng = np.random.default_rng(12)
    t = np.sort(rng.uniform(0.0, 900.0, 3000))
    e = rng.uniform(0.01, 0.05, t.size)
    x = (t - 450.0) / 450.0
    harmonics = _harmonic_columns(t, 1 / 0.57, 4)
    columns = np.concatenate([harmonics, np.stack([x, x**2, x**3], axis=1)], axis=1)
    m = 15.0 + 0.3 * harmonics[:, 0] + 0.02 * x**2 + rng.normal(0.0, e)
    shared = _SharedColumns(columns, m, e)
    for subset in ([], list(range(8)), list(range(9)), list(range(11)), [8, 10]):
        want, want_coef = _lstsq_chi2(columns[:, subset], m, e)
        got, coef = shared.fit(np.array(subset, dtype=int))
        assert got == pytest.approx(want, rel=1e-10)
        np.testing.assert_allclose(coef, want_coef, rtol=1e-7, atol=1e-9)


def test_dependent_columns_fall_back_to_the_factorisation():
    # a column repeated: the normal matrix is singular; the QR route gives
    # the least-squares chi-square all the same
    rng = np.random.default_rng(2)
    t = np.sort(rng.uniform(0.0, 100.0, 400))
    e = np.full(t.size, 0.02)
    x = (t - 50.0) / 50.0
    columns = np.stack([x, x, x**2], axis=1)
    m = 12.0 + 0.1 * x + rng.normal(0.0, e)
    got, _ = _SharedColumns(columns, m, e).fit(np.arange(3))
    assert got == pytest.approx(_lstsq_chi2(columns, m, e)[0], rel=1e-10)


def test_trend_options_chi_square_equals_each_model_fitted_alone():
    # definition: per band, the weighted least squares of [1, harmonics, trend columns]
    from phasewise.core.period_choice import _ramp_starts, _trend_columns

    lc = _star()
    f, orders = 1 / 0.63, {"V": 3, "I": 4}
    t_all = lc.time[lc.good]
    t_ref, t_scale = float(t_all.mean()), float(np.ptp(t_all) / 2)
    options = [None, *_trend_options(lc)]
    got = _models_chi2(lc, options, f, orders, t_ref, t_scale)
    for option in options:
        chi2 = 0.0
        for band in lc.bands:
            t, m, e = lc.arrays(band)
            cols = [_harmonic_columns(t, f, orders[band])]
            if option is not None:
                cols.append(_trend_columns(*option, t, t_ref, t_scale, _ramp_starts(t_all)))
            chi2 += _lstsq_chi2(np.concatenate(cols, axis=1), m, e)[0]
        assert got[option][0] == pytest.approx(chi2, rel=1e-10)


@pytest.mark.parametrize("k", [1, 2, 9, 10])
def test_row_medians_equal_numpy_median(k):
    from phasewise.core.period_choice import _row_medians

    values = np.random.default_rng(k).normal(size=(500, k))
    values[::7, 0] = values[::7, -1]  # ties
    np.testing.assert_array_equal(_row_medians(values), np.median(values, axis=1))
