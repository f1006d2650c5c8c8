"""The period choice's shortcuts give what the plain formulas give.

Each check compares a cached or shared computation of ``core.period_choice``
with the quantity written out from its definition.
"""

from __future__ import annotations

import numpy as np
import pytest

from phasewise.core.analysis import AnalysisSettings
from phasewise.core.fourier import choose_order, fit_fourier
from phasewise.core.lightcurve import LightCurve
from phasewise.core.period_choice import _fourier_bic, _harmonic_columns


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
