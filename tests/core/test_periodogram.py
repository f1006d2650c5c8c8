"""Grid, periodogram kernels and the front, checked against astropy and direct sums."""

from __future__ import annotations

import numpy as np
import pytest
from astropy.timeseries import LombScargle
from hypothesis import given
from hypothesis import settings as hyp_settings
from hypothesis import strategies as st

from phasewise.core.errors import GridTooLargeError, PhasewiseError, SettingsError
from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import (
    KERNELS,
    REFERENCE_KERNELS,
    Periodogram,
    PeriodogramSettings,
    compute_periodogram,
    frequency_grid,
    grid_parameters,
    grid_size,
    sampling_of,
)

TRUE_PERIOD = 0.61  # days, injected


@pytest.fixture(scope="module")
def sample():
    """Irregular sampling over ~120 d with a 0.61 d sinusoid and heteroscedastic noise."""
    rng = np.random.default_rng(20261201)
    t = 2460000.0 + np.sort(rng.uniform(0, 120, 150))
    dy = rng.uniform(0.02, 0.08, t.size)
    y = 14.0 + 0.25 * np.sin(2 * np.pi * t / TRUE_PERIOD) + rng.normal(0, dy)
    return t, y, dy


def _small_grid(t, n=4000, fmax=4.0):
    return np.linspace(0.05, fmax, n)


# ------------------------------------------------------------------ settings & grid
def test_settings_reject_bad_values_naming_the_field():
    with pytest.raises(SettingsError, match="field 'method'"):
        PeriodogramSettings(method="bls")
    with pytest.raises(SettingsError, match=r"field 'oversampling'.*\[1, 20\]"):
        PeriodogramSettings(oversampling=25)
    with pytest.raises(SettingsError, match="field 'nterms'"):
        PeriodogramSettings(nterms=7)
    with pytest.raises(SettingsError, match="fmin must be below fmax"):
        PeriodogramSettings(fmin=5.0, fmax=2.0)


def test_grid_follows_the_baseline():
    t = np.array([0.0, 3.0, 10.0, 100.0])
    grid = grid_parameters(t, PeriodogramSettings(oversampling=5))
    assert grid.fmin == pytest.approx(1 / 100.0)
    assert grid.df == pytest.approx(1 / (5 * 100.0))
    assert grid.fmax <= 50.0 < grid.fmax + grid.df
    f = frequency_grid(t, PeriodogramSettings(oversampling=5))
    assert f.size == grid.n == int((50.0 - 0.01) / 0.002) + 1
    assert np.allclose(np.diff(f), grid.df)
    custom = grid_parameters(t, PeriodogramSettings(fmin=0.5, fmax=2.0, oversampling=10))
    assert custom.fmin == 0.5 and custom.df == pytest.approx(1e-3) and custom.n == 1501


def test_grid_over_the_limit_names_size_and_limit():
    t = np.linspace(0, 1000, 50)
    # an explicit range is never coarsened (the default range would stop at
    # the sampling's pseudo-Nyquist frequency)
    settings = PeriodogramSettings(fmax=50.0, max_frequencies=100_000)
    with pytest.raises(GridTooLargeError, match=r"249,996 frequencies.*limit of 100,000") as info:
        grid_parameters(t, settings)
    assert (info.value.n_frequencies, info.value.limit) == (249_996, 100_000)
    assert grid_size(t, settings) == 249_996  # the size to ask about, without raising
    with pytest.raises(GridTooLargeError, match="field 'max_frequencies'"):
        compute_periodogram(LightCurve("G1", t, np.sin(t)), settings)


def test_grid_needs_a_baseline():
    with pytest.raises(PhasewiseError, match="baseline is 0"):
        frequency_grid(np.array([5.0, 5.0]), PeriodogramSettings())


# ------------------------------------------------------------ GLS against astropy
@pytest.mark.parametrize("with_errors", [True, False])
def test_gls_equals_astropy_slow(sample, with_errors):
    # Reference: astropy LombScargle(..., method="slow"), standard normalisation,
    # floating mean (Zechmeister & Kürster 2009).
    t, y, dy = sample
    lc = LightCurve("V1", t, y, dy if with_errors else None)
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=5.0))
    reference = LombScargle(t, y, dy if with_errors else None).power(pg.frequency, method="slow")
    assert np.max(np.abs(pg.power - reference)) < 1e-6
    assert pg.kernel == "gls"
    assert abs(pg.period - TRUE_PERIOD) < 0.61**2 / pg.baseline  # within a peak width


@pytest.mark.parametrize("nterms", [2, 3, 5])
def test_multiharmonic_equals_astropy_chi2(sample, nterms):
    # Reference: astropy LombScargle(nterms=k).power(method="chi2") (Schwarzenberg-Czerny 1996).
    t, y, dy = sample
    lc = LightCurve("V1", t, y, dy)
    pg = compute_periodogram(lc, PeriodogramSettings(method="mhgls", nterms=nterms, fmax=3.0))
    reference = LombScargle(t, y, dy, nterms=nterms).power(pg.frequency, method="chi2")
    assert np.max(np.abs(pg.power - reference)) < 1e-6


# ----------------------------------------- contract test over the kernel registry
@pytest.mark.parametrize("name", sorted(KERNELS))
@pytest.mark.parametrize("with_errors", [True, False])
def test_every_kernel_matches_its_slow_reference(sample, name, with_errors):
    t, y, dy = sample
    t = t - t.mean()
    dy = dy if with_errors else None
    kernel = KERNELS[name]
    settings = PeriodogramSettings(method=kernel.method)
    from phasewise.core.periodogram import regular_grid_of

    frequency = _small_grid(t)
    power, statistic = kernel.function(
        t, y, dy, frequency, settings, grid=regular_grid_of(frequency)
    )
    ref_power, _ = KERNELS[REFERENCE_KERNELS[name]].function(t, y, dy, frequency, settings)
    assert power.shape == frequency.shape
    assert np.all(np.isfinite(power))
    np.testing.assert_allclose(power, ref_power, atol=1e-8)
    # larger is better: the injected frequency is the top of every kernel's power
    # (PDM/CE may peak at a subharmonic of a sinusoid, so compare against 1/P and 1/(2P))
    best = frequency[np.argmax(power)]
    assert min(abs(best - 1 / TRUE_PERIOD), abs(best - 0.5 / TRUE_PERIOD)) < 0.02
    if kernel.statistic is not None:
        assert statistic.shape == frequency.shape


def test_fast_kernels_fall_back_to_exact_on_irregular_frequencies(sample):
    t, y, dy = sample
    frequency = np.sort(np.random.default_rng(3).uniform(0.1, 3, 200))
    lc = LightCurve("V1", t, y, dy)
    pg = compute_periodogram(lc, PeriodogramSettings(), frequency=frequency)
    assert frequency.flags.writeable  # the caller's array is left alone
    reference = LombScargle(t, y, dy).power(frequency, method="slow")
    assert np.max(np.abs(pg.power - reference)) < 1e-6


# ---------------------------------------------------------------- PDM and CE
def _pdm_theta_loop(t, y, f, n_bins, w=None):
    # Stellingwerf (1978) eqs. 1-3, non-overlapping bins, by direct loops; with
    # weights the sums of squares are weighted (our documented generalisation).
    w = np.ones_like(y) if w is None else w
    phase = (t * f) % 1.0
    bins = np.minimum((phase * n_bins).astype(int), n_bins - 1)
    within, filled = 0.0, 0
    for b in range(n_bins):
        sel = bins == b
        if sel.any():
            mean_b = np.average(y[sel], weights=w[sel])
            within += (w[sel] * (y[sel] - mean_b) ** 2).sum()
            filled += 1
    s2 = within / (y.size - filled)
    sigma2 = (w * (y - np.average(y, weights=w)) ** 2).sum() / (y.size - 1)
    return s2 / sigma2


def _ce_loop(t, y, f, n_phase, n_mag):
    # Graham et al. (2013) eq. 4 from numpy's 2-D histogram.
    phase = (t * f) % 1.0
    scaled = (y - y.min()) / (y.max() - y.min())
    joint, _, _ = np.histogram2d(
        np.minimum(phase * n_phase, n_phase - 1e-9),
        np.minimum(scaled * n_mag, n_mag - 1e-9),
        bins=[n_phase, n_mag],
        range=[[0, n_phase], [0, n_mag]],
    )
    p = joint / y.size
    p_phase = p.sum(axis=1, keepdims=True)
    mask = p > 0
    return float((p[mask] * np.log((p_phase * np.ones_like(p))[mask] / p[mask])).sum())


def test_pdm_theta_matches_direct_loops(sample):
    t, y, _ = sample
    t = t - t.min()
    frequency = np.array([0.3, 1 / TRUE_PERIOD, 2.2])
    power, theta = KERNELS["pdm"].function(t, y, None, frequency, PeriodogramSettings())
    expected = [_pdm_theta_loop(t, y, f, 10) for f in frequency]
    np.testing.assert_allclose(theta, expected, rtol=1e-10)
    np.testing.assert_allclose(power, 1 - theta)
    assert theta[1] < 0.3 < theta[0]


def test_weighted_pdm_matches_direct_loops(sample):
    t, y, dy = sample
    t = t - t.min()
    frequency = np.array([0.3, 1 / TRUE_PERIOD, 2.2])
    _, theta = KERNELS["pdm"].function(t, y, dy, frequency, PeriodogramSettings(pdm_bins=7))
    expected = [_pdm_theta_loop(t, y, f, 7, 1 / dy**2) for f in frequency]
    np.testing.assert_allclose(theta, expected, rtol=1e-10)


def test_conditional_entropy_matches_histogram(sample):
    t, y, _ = sample
    t = t - t.min()
    frequency = np.array([0.3, 1 / TRUE_PERIOD, 2.2])
    power, entropy = KERNELS["ce"].function(t, y, None, frequency, PeriodogramSettings())
    expected = [_ce_loop(t, y, f, 10, 5) for f in frequency]
    np.testing.assert_allclose(entropy, expected, rtol=1e-10)
    # H(m) of the 5 equal-width magnitude bins, by numpy's histogram
    counts, _ = np.histogram(y, bins=5, range=(y.min(), y.max()))
    p_mag = counts[counts > 0] / y.size
    np.testing.assert_allclose(power, 1 - entropy / -(p_mag * np.log(p_mag)).sum())
    assert np.all((power >= 0) & (power <= 1))


# ---------------------------------------------------------------- multi-band
def _two_band_curve(seed=5):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 60, 160))
    band = np.where(rng.random(t.size) < 0.5, "V", "I")
    amp = np.where(band == "V", 0.4, 0.2)
    mean = np.where(band == "V", 15.0, 14.2)
    err = rng.uniform(0.01, 0.03, t.size)
    y = mean + amp * np.sin(2 * np.pi * t / TRUE_PERIOD + 0.3) + rng.normal(0, err)
    return LightCurve("V2", t, y, err, band=band)


def test_multiband_reduces_to_gls_for_one_band(sample):
    t, y, dy = sample
    lc = LightCurve("V1", t, y, dy, band="V")
    single = compute_periodogram(lc, PeriodogramSettings(fmax=3.0, multiband=False))
    multi = compute_periodogram(lc, PeriodogramSettings(fmax=3.0, multiband=True))
    np.testing.assert_allclose(multi.power, single.power, rtol=1e-12)


@pytest.mark.parametrize(("method", "nterms"), [("gls", 1), ("mhgls", 2), ("mhgls", 3)])
def test_multiband_power_is_total_chi2_reduction(method, nterms):
    # Direct weighted least squares per band at a few frequencies (numpy lstsq):
    # P = sum_b (chi2_0,b - chi2_b) / s2_b / sum_b chi2_0,b / s2_b, each band's
    # chi-square in units of its scatter s2_b = chi2_0,b / (N_b - 1).
    lc = _two_band_curve()
    settings = PeriodogramSettings(method=method, nterms=nterms, fmax=3.0)
    pg = compute_periodogram(lc, settings)
    assert set(pg.bands) == {"I", "V"}
    idx = np.array([10, 500, np.argmax(pg.power), 800])
    for i in idx:
        f = pg.frequency[i]
        reduced, total = 0.0, 0.0
        for b in pg.bands:
            t, y, e = lc.arrays(b)
            sw = 1 / e
            columns = [np.ones_like(t)]
            for k in range(1, nterms + 1):
                columns += [np.cos(2 * np.pi * k * f * t), np.sin(2 * np.pi * k * f * t)]
            design = np.column_stack(columns)
            coef, *_ = np.linalg.lstsq(design * sw[:, None], y * sw, rcond=None)
            chi2 = np.sum(((y - design @ coef) * sw) ** 2)
            mean = np.sum(y / e**2) / np.sum(1 / e**2)
            chi2_0 = np.sum(((y - mean) * sw) ** 2)
            s2 = chi2_0 / (t.size - 1)
            reduced += (chi2_0 - chi2) / s2
            total += chi2_0 / s2
        assert pg.power[i] == pytest.approx(reduced / total, abs=1e-8)
    if method == "gls":
        assert abs(pg.best_frequency - 1 / TRUE_PERIOD) < 1 / pg.baseline


@pytest.mark.parametrize("method", ["mhgls", "pdm", "ce"])
def test_multiband_other_methods_find_the_period(method):
    lc = _two_band_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(method=method, nterms=2, fmax=3.0))
    best = pg.best_frequency
    assert min(abs(best - 1 / TRUE_PERIOD), abs(best - 0.5 / TRUE_PERIOD)) < 1 / pg.baseline
    assert np.all(pg.power <= 1 + 1e-12)


# ---------------------------------------------------------------- the result
def test_periodogram_result_is_frozen_and_summarises(sample):
    t, y, dy = sample
    pg = compute_periodogram(LightCurve("V1", t, y, dy), PeriodogramSettings(fmax=3.0))
    assert isinstance(pg, Periodogram)
    with pytest.raises(ValueError):
        pg.power[0] = 1.0
    with pytest.raises(AttributeError):
        pg.method = "pdm"
    d = pg.to_dict()
    assert "power" not in d and "frequency" not in d
    assert d["best_frequency"] == pg.best_frequency and d["best_period"] == pg.period
    assert d["n_points"] == 150 and d["settings"]["method"] == "gls"
    full = pg.to_dict(include_arrays=True)
    assert len(full["power"]) == pg.n_frequencies
    import json

    json.dumps(full)


def test_too_few_points_is_a_clear_error():
    lc = LightCurve("V9", [1.0, 2.0, 3.0], [10.0, 10.1, 10.2])
    with pytest.raises(PhasewiseError, match="star 'V9' has 3 good points"):
        compute_periodogram(lc)


def test_excluded_points_are_not_used(sample):
    t, y, dy = sample
    y_bad = y.copy()
    y_bad[:10] += 5.0
    excluded = np.zeros(t.size, bool)
    excluded[:10] = True
    lc = LightCurve("V1", t, y_bad, dy, excluded=excluded)
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=3.0))
    reference = LombScargle(t[10:], y[10:], dy[10:]).power(pg.frequency, method="slow")
    assert np.max(np.abs(pg.power - reference)) < 1e-6


# ---------------------------------------------------------------- properties


@hyp_settings(max_examples=25, deadline=None)
@given(
    shift=st.floats(-1e4, 1e4),
    offset=st.floats(-30, 30),
    scale=st.floats(0.01, 100),
    method=st.sampled_from(["gls", "mhgls", "pdm", "ce"]),
)
def test_power_is_invariant_to_time_origin_and_magnitude_zero_point_and_scale(
    sample, shift, offset, scale, method
):
    # A periodogram cannot depend on the time origin, the magnitude zero point or
    # the magnitude unit (errors scaled alike): common practice, no source.
    t, y, dy = sample
    settings = PeriodogramSettings(method=method, nterms=2, fmin=0.2, fmax=3.0)
    base = compute_periodogram(LightCurve("P", t, y, dy), settings)
    moved = compute_periodogram(
        LightCurve("P", t + shift, offset + scale * y, scale * dy), settings
    )
    np.testing.assert_allclose(moved.power, base.power, atol=1e-7)
    assert np.all(base.power <= 1 + 1e-9)


@pytest.mark.parametrize("method", ["gls", "mhgls", "pdm", "ce"])
def test_constant_curve_has_zero_power_not_nan(method):
    t = np.linspace(0, 30, 40) + 0.1 * np.sin(np.arange(40))
    settings = PeriodogramSettings(method=method, fmax=3.0)
    one = compute_periodogram(LightCurve("K1", t, np.full(40, 12.5)), settings)
    two = compute_periodogram(
        LightCurve(
            "K2",
            t,
            np.where(np.arange(40) % 2 == 0, 12.5, 13.0),
            band=np.where(np.arange(40) % 2 == 0, "V", "I"),
        ),
        settings,
    )
    for pg in (one, two):
        assert np.all(pg.power == 0.0)
        if pg.statistic is not None:
            assert np.all(np.isfinite(pg.statistic))


def test_pdm_and_ce_see_no_period_in_noise():
    # Stellingwerf (1978): theta ~ 1 without a signal; entropy near its maximum.
    rng = np.random.default_rng(12)
    t = np.sort(rng.uniform(0, 100, 300))
    lc = LightCurve("W1", t, rng.normal(13.0, 0.05, t.size))
    pdm = compute_periodogram(lc, PeriodogramSettings(method="pdm", fmax=5.0))
    assert abs(np.median(pdm.statistic) - 1.0) < 0.05
    assert pdm.best_power < 0.2
    ce = compute_periodogram(lc, PeriodogramSettings(method="ce", fmax=5.0))
    assert np.median(ce.power) < 0.1 and ce.best_power < 0.25


def test_regular_sampling_stops_at_its_pseudo_nyquist_frequency():
    # 30-minute sampling with one gap: peaks above 24 c/d are reflections
    # (Eyer & Bartholdi 1999, from memory; common practice)
    t = np.arange(0.0, 27.0, 1.0 / 48.0)
    t = t[(t < 13.0) | (t > 14.0)]
    sampling = sampling_of(t)
    assert sampling.regular and sampling.step == pytest.approx(1.0 / 48.0)
    assert grid_parameters(t, PeriodogramSettings()).fmax == pytest.approx(24.0, abs=0.01)
    # an explicit fmax is the user's
    assert grid_parameters(t, PeriodogramSettings(fmax=40.0)).fmax == pytest.approx(40.0, 0.01)


def test_irregular_sampling_keeps_the_physical_limit():
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(0.0, 900.0, 80))
    assert not sampling_of(t).regular
    assert grid_parameters(t, PeriodogramSettings()).fmax == pytest.approx(50.0, abs=0.01)


def test_sampling_kept_by_value_follows_the_times():
    # sampling_of keeps its answers per thread, keyed by the times' values:
    # the same values give the same answer, changed values (same size) a new one
    t = np.arange(0.0, 27.0, 1.0 / 48.0)
    first = sampling_of(t)
    assert sampling_of(t.copy()) == first
    t[::3] += 0.004  # the same array object, changed in place: no longer regular
    assert not sampling_of(t).regular
    assert sampling_of(t) == sampling_of(np.array(t))
    assert sampling_of(np.arange(0.0, 27.0, 1.0 / 48.0)) == first


def test_long_irregular_series_coarsened_not_refused():
    # 20 years of random nights up to 50 c/d: 5 points per peak would need
    # 1.8 million frequencies; the default range samples peaks more coarsely
    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(0.0, 20 * 365.25, 400))
    settings = PeriodogramSettings()
    assert grid_size(t, PeriodogramSettings(fmax=50.0)) > settings.max_frequencies
    grid = grid_parameters(t, settings)
    assert grid.n <= settings.max_frequencies
    assert 2.0 <= 1.0 / (grid.df * np.ptp(t)) < 5.0
