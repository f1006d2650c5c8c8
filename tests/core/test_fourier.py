"""Fourier decomposition, order choice and frequency refinement.

Invented light curves only; every injected truth is checked.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize

from phasewise.core.errors import PhasewiseError, SettingsError
from phasewise.core.fourier import (
    FourierSettings,
    choose_order,
    convert_phase,
    convert_term_phase,
    decompose,
    fit_fourier,
    max_order_allowed,
    montgomery_odonoghue_sigma_f,
    petersen_ratio_errors,
    refine_frequency,
)
from phasewise.core.lightcurve import LightCurve

TWO_PI = 2 * np.pi
FREQ = 1 / 0.5731  # an RRab-like period, invented
AMPS = (0.35, 0.17, 0.11, 0.07)
PHASES = (1.0, 2.6, 3.5, 0.3)  # phi21 = 0.6, phi31 = 0.5: away from the 2 pi wrap


def series(t, t0, amps=AMPS, phases=PHASES, freq=FREQ, form="sine", a0=15.0):
    wave = np.sin if form == "sine" else np.cos
    return a0 + sum(
        a * wave(TWO_PI * (i + 1) * freq * (t - t0) + p)
        for i, (a, p) in enumerate(zip(amps, phases, strict=True))
    )


def sampling(n=700, span=300.0, seed=1, start=2_460_000.0):
    rng = np.random.default_rng(seed)
    return np.sort(start + rng.uniform(0, span, n))


# ------------------------------------------------------- Simon & Lee (1981)
@pytest.mark.parametrize("form", ["sine", "cosine"])
def test_analytic_series_gives_back_simon_lee_parameters(form):
    # Simon & Lee 1981, ApJ 248, 291: R_i1 = A_i/A_1, phi_i1 = phi_i - i phi_1
    t = sampling()
    t0 = t[350]
    fit = fit_fourier(t, series(t, t0, form=form), None, FREQ, 4, form=form, epoch=t0)
    assert fit.epoch == t0
    np.testing.assert_allclose(fit.amplitudes, AMPS, atol=1e-10)
    np.testing.assert_allclose(fit.phases, PHASES, atol=1e-9)
    assert fit.R21 == pytest.approx(AMPS[1] / AMPS[0], abs=1e-10)
    assert fit.R31 == pytest.approx(AMPS[2] / AMPS[0], abs=1e-10)
    assert fit.phi21 == pytest.approx(np.mod(PHASES[1] - 2 * PHASES[0], TWO_PI), abs=1e-9)
    assert fit.phi31 == pytest.approx(np.mod(PHASES[2] - 3 * PHASES[0], TWO_PI), abs=1e-9)
    assert fit.A0 == pytest.approx(15.0, abs=1e-12)
    assert fit.residual_std < 1e-10


def test_phi21_phi31_do_not_depend_on_the_time_origin():
    t = sampling()
    mag = series(t, t[100]) + np.random.default_rng(3).normal(0, 0.02, t.size)
    shift = 12_345.6789  # not a whole number of periods
    a = fit_fourier(t, mag, None, FREQ, 4)
    b = fit_fourier(t + shift, mag, None, FREQ, 4)
    assert b.phi21 == pytest.approx(a.phi21, abs=1e-8)
    assert b.phi31 == pytest.approx(a.phi31, abs=1e-8)
    # phases are referred to epoch_max, so they also stay put
    np.testing.assert_allclose(b.phases, a.phases, atol=1e-7)
    assert b.epoch_max - a.epoch_max == pytest.approx(shift, abs=1e-7)


# ---------------------------------------------------- sine <-> cosine forms
def test_convert_phase_worked_values():
    # derivation: cos x = sin(x + pi/2) => phi21(sin) = phi21(cos) - pi/2,
    # phi31(sin) = phi31(cos) - pi (mod 2 pi); REFERENCES.md "exact"
    assert convert_phase(np.pi, 2, "cosine", "sine") == pytest.approx(np.pi / 2)
    assert convert_phase(1.0, 3, "cosine", "sine") == pytest.approx(1.0 + np.pi)
    assert convert_phase(0.2, 2, "cosine", "sine") == pytest.approx(0.2 - np.pi / 2 + TWO_PI)
    for k in (2, 3, 4):
        back = convert_phase(convert_phase(2.5, k, "sine", "cosine"), k, "cosine", "sine")
        assert back == pytest.approx(2.5)
    assert convert_term_phase(0.0, "cosine", "sine") == pytest.approx(np.pi / 2)


def test_same_curve_fitted_in_both_forms_agrees_through_conversion():
    t = sampling(seed=5)
    mag = series(t, t[0]) + np.random.default_rng(5).normal(0, 0.01, t.size)
    sin_fit = fit_fourier(t, mag, None, FREQ, 4, form="sine")
    cos_fit = fit_fourier(t, mag, None, FREQ, 4, form="cosine")
    np.testing.assert_allclose(sin_fit.amplitudes, cos_fit.amplitudes, rtol=1e-12)
    assert sin_fit.epoch == cos_fit.epoch
    for ps, pc in zip(sin_fit.phases, cos_fit.phases, strict=True):
        assert ps == pytest.approx(convert_term_phase(pc, "cosine", "sine"), abs=1e-9)
    assert sin_fit.phi21 == pytest.approx(convert_phase(cos_fit.phi21, 2), abs=1e-9)
    assert sin_fit.phi31 == pytest.approx(convert_phase(cos_fit.phi31, 3), abs=1e-9)
    np.testing.assert_allclose(sin_fit.model(t), cos_fit.model(t), atol=1e-10)
    assert sin_fit.phi21_err == pytest.approx(cos_fit.phi21_err, rel=1e-9)


# ----------------------------------------------------------- curve figures
def test_curve_figures_of_a_pure_sinusoid():
    t = sampling(n=400, seed=2)
    amp, a0 = 0.4, 12.0
    mag = a0 + amp * np.sin(TWO_PI * FREQ * (t - t[0]) + 0.7)
    fit = fit_fourier(t, mag, None, FREQ, 1)
    assert fit.peak_to_peak == pytest.approx(2 * amp, abs=1e-10)
    assert fit.rise_time == pytest.approx(0.5, abs=1e-9)
    assert fit.skewness == pytest.approx(0.0, abs=1e-9)
    # intensity mean by independent quadrature of 10^(-0.4 m) over one cycle
    flux, _ = integrate.quad(lambda x: 10 ** (-0.4 * (a0 + amp * np.sin(TWO_PI * x))), 0, 1)
    assert fit.intensity_mean_mag == pytest.approx(-2.5 * np.log10(flux), abs=1e-9)
    assert fit.mean_mag == pytest.approx(a0)
    # maximum light: sin(...) = -1, the one nearest the middle of the data
    middle = 0.5 * (t.min() + t.max())
    assert abs(fit.epoch_max - middle) <= 0.5 / FREQ
    assert fit.model(np.array([fit.epoch_max]))[0] == pytest.approx(a0 - amp, abs=1e-12)
    assert fit.model_phase(np.array([0.0]))[0] == pytest.approx(a0 - amp, abs=1e-12)
    assert fit.model_phase(np.array([0.5]))[0] == pytest.approx(a0 + amp, abs=1e-12)
    assert fit.R21 is None and fit.phi31 is None and fit.to_dict()["R21_err"] is None


def test_rise_time_and_extremes_match_a_brute_force_grid():
    t = sampling(seed=4)
    t0 = t[0]
    fit = fit_fourier(t, series(t, t0), None, FREQ, 4, epoch=t0)
    phase = np.linspace(0, 1, 200_001)
    curve = series(t0 + phase / FREQ, t0)
    p_bright, p_faint = phase[np.argmin(curve)], phase[np.argmax(curve)]
    assert fit.rise_time == pytest.approx(np.mod(p_bright - p_faint, 1), abs=2e-5)
    assert fit.peak_to_peak == pytest.approx(np.ptp(curve), abs=1e-9)
    assert np.mod((fit.epoch_max - t0) * FREQ - p_bright + 0.5, 1) - 0.5 == pytest.approx(
        0, abs=2e-5
    )


# ----------------------------------------------------------------- errors
def test_covariance_errors_match_monte_carlo_and_petersen_propagation():
    t = sampling(n=300, seed=7)
    truth = series(t, t[0])
    sigma = 0.03
    rng = np.random.default_rng(8)
    fits = [
        fit_fourier(t, truth + rng.normal(0, sigma, t.size), np.full(t.size, sigma), FREQ, 4)
        for _ in range(300)
    ]
    for name in ("R21", "R31", "phi21", "phi31"):
        values = np.array([getattr(f, name) for f in fits])
        errors = np.array([getattr(f, name + "_err") for f in fits])
        assert np.std(values) == pytest.approx(np.median(errors), rel=0.15), name
    # Petersen (1986) style propagation ignores correlations; for good
    # phase coverage the correlations are small, so the two nearly agree
    f = fits[0]
    for k, (r_err, p_err) in ((2, (f.R21_err, f.phi21_err)), (3, (f.R31_err, f.phi31_err))):
        sr, sp = petersen_ratio_errors(f.amplitudes, f.amplitudes_err, f.phases_err, k)
        assert sr == pytest.approx(r_err, rel=0.3)
        assert sp == pytest.approx(p_err, rel=0.3)
    amps = np.array([f.amplitudes for f in fits])
    amp_err = np.array([f.amplitudes_err for f in fits])
    np.testing.assert_allclose(amps.std(axis=0), np.median(amp_err, axis=0), rtol=0.15)


# ----------------------------------------------------------- order choice
@pytest.mark.parametrize("criterion", ["bic", "ftest"])
def test_order_choice_finds_the_injected_order(criterion):
    t = sampling()
    mag = series(t, t[0]) + np.random.default_rng(11).normal(0, 0.02, t.size)
    choice = choose_order(t, mag, None, FREQ, FourierSettings(criterion=criterion))
    assert 4 <= choice.order <= 5
    assert choice.max_allowed == 8 and choice.limited_by == "max_order"


def test_sparse_noisy_curve_does_not_get_an_absurd_order():
    rng = np.random.default_rng(12)
    t = np.sort(rng.uniform(0, 80, 22))
    mag = 16 + 0.3 * np.sin(TWO_PI * FREQ * t) + rng.normal(0, 0.08, t.size)
    cap, why = max_order_allowed(t, FREQ)
    assert cap <= 3
    choice = choose_order(t, mag, None, FREQ)
    assert 1 <= choice.order <= min(cap, 2)


def test_phase_gap_limits_the_order():
    rng = np.random.default_rng(13)
    # every point in the first 60 % of the cycle: a 0.4-cycle gap
    cycles = rng.integers(0, 100, 500) + rng.uniform(0, 0.6, 500)
    t = np.sort(cycles / FREQ)
    cap, why = max_order_allowed(t, FREQ)
    assert why == "phase_gap" and cap == 1
    choice = choose_order(t, series(t, 0.0), None, FREQ)
    assert choice.order == 1


def test_too_few_points_are_refused_with_a_clear_message():
    t = np.array([0.0, 0.3, 0.7, 1.1])
    with pytest.raises(PhasewiseError, match="cannot support a Fourier fit"):
        choose_order(t, np.ones(4), None, FREQ)
    with pytest.raises(PhasewiseError, match="field 'order'.*need at least"):
        fit_fourier(t, np.ones(4), None, FREQ, 3)
    with pytest.raises(PhasewiseError, match="field 'frequency'"):
        fit_fourier(t, np.ones(4), None, -1.0, 1)


def test_settings_are_validated():
    with pytest.raises(SettingsError, match="field 'form'"):
        FourierSettings(form="tangent")
    with pytest.raises(SettingsError, match="field 'criterion'"):
        FourierSettings(criterion="aic")
    with pytest.raises(SettingsError, match="field 'max_order'"):
        FourierSettings(max_order=0)


# ------------------------------------------------------------- refinement
def _sinusoid_sample(seed, n=300, span=200.0, amp=0.2, noise=0.05, freq=1 / 0.37):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, span, n))
    mag = 14 + amp * np.sin(TWO_PI * freq * (t - 3.0) + 0.4) + rng.normal(0, noise, n)
    return t, mag, np.full(n, noise), rng


def test_injected_sinusoid_recovered_within_montgomery_odonoghue_error():
    # Montgomery & O'Donoghue 1999: sigma_f = sqrt(6) sigma_N / (pi sqrt(N) A T)
    freq = 1 / 0.37
    z_mo, z_cov, ratios = [], [], []
    for seed in range(200):
        t, mag, err, rng = _sinusoid_sample(seed)
        start = freq + rng.normal(0, 2e-4)  # a grid peak is off by a fraction of 1/T
        r = refine_frequency((t, mag, err), start, 1)
        assert r.converged
        z_mo.append((r.frequency - freq) / r.frequency_err_mo)
        z_cov.append((r.frequency - freq) / r.frequency_err)
        ratios.append(r.frequency_err / r.frequency_err_mo)
    within_mo = np.mean(np.abs(z_mo) < 2)
    within_cov = np.mean(np.abs(z_cov) < 2)
    assert 0.90 <= within_mo <= 0.99
    assert 0.90 <= within_cov <= 0.99
    assert 1 / 1.5 < np.min(ratios) and np.max(ratios) < 1.5
    # the formula itself, with numbers worked by hand: sqrt(6)*0.05/(pi*10*0.2*200)
    assert montgomery_odonoghue_sigma_f(0.05, 100, 0.2, 200.0) == pytest.approx(9.7456e-5, rel=1e-4)


def test_refinement_matches_an_independent_curve_fit():
    # reference: scipy.optimize.curve_fit on the same model, errors scaled
    # by the reduced chi-square (absolute_sigma=False)
    freq = 1 / 0.37
    t, mag, err, _ = _sinusoid_sample(42)
    tc = 0.5 * (t.min() + t.max())

    def model(tt, a0, f, c1, s1, c2, s2):
        x = TWO_PI * f * (tt - tc)
        return a0 + c1 * np.cos(x) + s1 * np.sin(x) + c2 * np.cos(2 * x) + s2 * np.sin(2 * x)

    x0 = TWO_PI * freq * (t - tc)
    design = np.column_stack([np.ones_like(t), np.cos(x0), np.sin(x0), np.cos(2 * x0)])
    design = np.column_stack([design, np.sin(2 * x0)])
    lin, *_ = np.linalg.lstsq(design, mag, rcond=None)
    p0 = [lin[0], freq + 1e-4, *lin[1:]]
    popt, pcov = optimize.curve_fit(model, t, mag, p0=p0, sigma=err, absolute_sigma=False)
    r = refine_frequency((t, mag, err), freq + 1e-4, 2)
    assert r.frequency == pytest.approx(popt[1], abs=1e-3 * r.frequency_err)
    assert r.frequency_err == pytest.approx(np.sqrt(pcov[1, 1]), rel=0.02)
    assert r.amplitude == pytest.approx(np.hypot(popt[2], popt[3]), rel=1e-6)
    # the linear fit at the refined frequency gives curve_fit's coefficients
    fit = fit_fourier(t, mag, err, r.frequency, 2)
    assert fit.A0 == pytest.approx(popt[0], abs=1e-3 * fit.A0_err)
    np.testing.assert_allclose(
        fit.amplitudes,
        [np.hypot(popt[2], popt[3]), np.hypot(popt[4], popt[5])],
        atol=1e-3 * min(fit.amplitudes_err),
    )
    np.testing.assert_allclose(fit.amplitudes_err[0], np.sqrt(pcov[2, 2]), rtol=0.05)
    assert r.period_err == pytest.approx(r.frequency_err / r.frequency**2)


def test_multiband_refinement_shares_the_frequency():
    freq = 1 / 0.37
    rng = np.random.default_rng(21)
    n = 250
    t = np.sort(rng.uniform(0, 150, 2 * n))
    band = np.where(rng.uniform(size=t.size) < 0.5, "V", "I")
    amp = np.where(band == "V", 0.3, 0.18)
    mean = np.where(band == "V", 15.2, 14.5)
    mag = mean + amp * np.sin(TWO_PI * freq * t + 1.0) + rng.normal(0, 0.04, t.size)
    lc = LightCurve("demo-rr-1", t, mag, np.full(t.size, 0.04), band=band)
    both = refine_frequency(lc, freq + 3e-4, 1)
    v = band == "V"
    alone = refine_frequency((t[v], mag[v], np.full(v.sum(), 0.04)), freq + 3e-4, 1)
    assert set(both.bands) == {"V", "I"} and both.n_points == t.size
    assert abs(both.frequency - freq) < 3 * both.frequency_err
    assert both.frequency_err < alone.frequency_err
    assert both.frequency_err_mo < alone.frequency_err_mo


def test_refinement_that_wanders_off_keeps_the_start():
    # started in a sidelobe valley (a chi-square maximum) 2.5/T from a strong
    # peak, this seeded fit walks more than 1/T away; the start must be kept
    # and said so
    rng = np.random.default_rng(0)
    t = np.sort(rng.uniform(0, 100, 200))
    mag = 0.3 * np.sin(TWO_PI * 2.0 * t) + rng.normal(0, 0.05, t.size)
    start = 2.0 + 2.5 / 100
    r = refine_frequency((t, mag, None), start, 1)
    assert not r.converged
    assert r.frequency == start and "kept the start" in r.message
    assert np.isfinite(r.frequency_err) and r.frequency_err > 0
    near = refine_frequency((t, mag, None), 2.0 + 0.3 / 100, 1)
    assert near.converged and abs(near.frequency - 2.0) < 3 * near.frequency_err
    with pytest.raises(PhasewiseError, match="field 'frequency'"):
        refine_frequency((t, mag, None), 0.0, 1)
    with pytest.raises(PhasewiseError, match="field 'lightcurve'.*2 good points"):
        refine_frequency((t[:2], mag[:2], None), 2.0, 1)


# ------------------------------------------------------------ decomposition
def test_decompose_gives_each_band_its_own_order():
    rng = np.random.default_rng(31)
    tv = sampling(n=600, seed=31)
    ti = np.sort(rng.uniform(tv.min(), tv.max(), 120))
    tb = np.sort(rng.uniform(tv.min(), tv.max(), 5))  # too few for any fit
    mv = series(tv, tv[0]) + rng.normal(0, 0.01, tv.size)
    mi = 14.0 + 0.2 * np.sin(TWO_PI * FREQ * (ti - tv[0]) + 1) + rng.normal(0, 0.05, ti.size)
    mb = 15.5 + rng.normal(0, 0.05, tb.size)
    t = np.concatenate([tv, ti, tb])
    lc = LightCurve(
        "demo-rr-2",
        t,
        np.concatenate([mv, mi, mb]),
        np.concatenate([np.full(tv.size, 0.01), np.full(ti.size, 0.05), np.full(5, 0.05)]),
        band=["V"] * tv.size + ["I"] * ti.size + ["B"] * 5,
    )
    fits = decompose(lc, FREQ)
    assert list(fits) == ["V", "I"]
    assert fits["V"].order >= 4 and fits["I"].order <= 2
    assert fits["I"].mean_mag == pytest.approx(14.0, abs=0.02)
    assert fits["V"].R21 == pytest.approx(AMPS[1] / AMPS[0], abs=0.01)
    text = json.dumps({band: fit.to_dict() for band, fit in fits.items()})
    assert '"phi31"' in text


def test_to_dict_is_plain_and_stable():
    t = sampling(n=100, seed=40)
    fit = fit_fourier(t, series(t, t[0], amps=(0.3, 0.1), phases=(1, 2)), None, FREQ, 2)
    d = fit.to_dict()
    json.dumps(d)
    assert d["R31"] is None and d["phi31_err"] is None and d["R21"] is not None
    assert all(isinstance(x, float) for x in d["amplitudes"])
    for key in ("order", "form", "A0", "phases_err", "mean_mag", "intensity_mean_mag"):
        assert key in d
    assert d["peak_to_peak"] > 0 and 0 <= d["rise_time"] < 1


@settings(max_examples=30, deadline=None)
@given(
    amps=st.lists(st.floats(0.02, 0.5), min_size=3, max_size=3),
    phases=st.lists(st.floats(0.0, 6.28), min_size=3, max_size=3),
)
def test_any_sine_series_fitted_in_cosine_form_converts_back(amps, phases):
    # cos x = sin(x + pi/2): phi_k1(sin) = phi_k1(cos) - (k - 1) pi / 2
    t = sampling(n=120, seed=50)
    mag = series(t, t[0], amps=amps, phases=phases)
    sin_fit = fit_fourier(t, mag, None, FREQ, 3, form="sine", epoch=t[0])
    cos_fit = fit_fourier(t, mag, None, FREQ, 3, form="cosine", epoch=t[0])
    for k, (ps, pc) in enumerate(
        ((sin_fit.phi21, cos_fit.phi21), (sin_fit.phi31, cos_fit.phi31)), start=2
    ):
        gap = np.mod(ps - convert_phase(pc, k) + np.pi, TWO_PI) - np.pi
        assert abs(gap) < 1e-8
    gaps = np.mod(np.array(sin_fit.phases) - phases + np.pi, TWO_PI) - np.pi
    assert np.max(np.abs(gaps)) < 1e-8


def test_a_given_epoch_shifts_each_phase_by_its_harmonic():
    t = sampling(seed=60)
    mag = series(t, t[0]) + np.random.default_rng(60).normal(0, 0.01, t.size)
    free = fit_fourier(t, mag, None, FREQ, 4)
    epoch = free.epoch_max + 0.1234
    given_ = fit_fourier(t, mag, None, FREQ, 4, epoch=epoch)
    assert given_.epoch == epoch and given_.epoch_max == pytest.approx(free.epoch_max)
    k = np.arange(1, 5)
    expected = np.mod(np.array(free.phases) + TWO_PI * k * FREQ * 0.1234, TWO_PI)
    np.testing.assert_allclose(given_.phases, expected, atol=1e-9)
    assert given_.phi31 == pytest.approx(free.phi31, abs=1e-9)
    np.testing.assert_allclose(given_.model(t), free.model(t), atol=1e-12)


def test_errors_are_honest_on_the_synthetic_survey():
    # Recovery on the seeded demo survey (core.synthetic): nightly cadence,
    # seasonal gaps, magnitude-dependent noise, outliers removed by core.clean.
    # Injected R21, phi31 (sine form, V) and period must lie within the
    # covariance errors as often as Gaussian statistics say.
    from phasewise.core.clean import CleanSettings, clean
    from phasewise.core.synthetic import make_survey

    survey = make_survey(n_stars=150, seed=20260)
    z = []
    for lc, star in zip(survey.lightcurves, survey.stars, strict=True):
        truth = star.truth
        if truth.class_code not in ("RRab", "RRc") or truth.blazhko:
            continue
        lc, _ = clean(lc, CleanSettings())
        refined = refine_frequency(lc, 1 / truth.period)
        fit = decompose(lc, refined.frequency)["V"]
        if fit.order < 3:
            continue
        d_phi = np.mod(fit.phi31 - truth.phi31 + np.pi, TWO_PI) - np.pi
        z.append(
            (
                (fit.R21 - truth.R21) / fit.R21_err,
                d_phi / fit.phi31_err,
                (refined.period - truth.period) / refined.period_err,
            )
        )
    z = np.array(z)
    assert len(z) >= 25
    assert np.all(np.mean(np.abs(z) < 3, axis=0) >= 0.9)
    assert np.all((0.6 < z.std(axis=0)) & (z.std(axis=0) < 1.6))


# ------------------------------------------------- fast paths vs plain ones
def test_harmonic_recurrence_matches_direct_trig():
    # angle addition (cos kθ, sin kθ from cos θ, sin θ) against plain
    # np.cos/np.sin of k θ, where forming k θ costs little precision
    from phasewise.core.fourier import _basis, _basis_rows

    theta = np.random.default_rng(70).uniform(-40.0, 40.0, 500)
    rows = _basis_rows(theta, 30)
    k = np.arange(1, 31)[:, None]
    np.testing.assert_array_equal(rows[0], 1.0)
    np.testing.assert_allclose(rows[1::2], np.cos(k * theta), rtol=0, atol=1e-12)
    np.testing.assert_allclose(rows[2::2], np.sin(k * theta), rtol=0, atol=1e-12)
    np.testing.assert_array_equal(_basis(theta, 3), rows[:7].T)


@pytest.mark.skipif(np.finfo(np.longdouble).eps > 1e-18, reason="no extended precision")
def test_harmonic_recurrence_keeps_its_precision_at_large_phase():
    # at θ ~ 1e4 rad (20 c/d over 150 d) np.cos(k θ) loses ulp(k θ) ~ 1e-11
    # when forming k θ; the recurrence stays near 1e-14.  Reference: cos and
    # sin of k θ in x87 extended precision (64-bit mantissa).
    from phasewise.core.fourier import _basis_rows

    theta = np.random.default_rng(71).uniform(-2e4, 2e4, 500)
    rows = _basis_rows(theta, 30)
    k_theta = np.arange(1, 31, dtype=np.longdouble)[:, None] * theta.astype(np.longdouble)
    assert np.max(np.abs(rows[1::2] - np.cos(k_theta))) < 1e-13
    assert np.max(np.abs(rows[2::2] - np.sin(k_theta))) < 1e-13


def _design(t, frequency, order, tc=None):
    tc = 0.5 * (t.min() + t.max()) if tc is None else tc
    x = TWO_PI * frequency * (t - tc)
    cols = [np.ones_like(t)]
    for k in range(1, order + 1):
        cols += [np.cos(k * x), np.sin(k * x)]
    return np.column_stack(cols)


def test_nested_chi_square_matches_separate_least_squares_fits():
    # one QR of the highest order gives every lower order's chi-square; the
    # reference is np.linalg.lstsq per order.  A bright, precise star (mean
    # 15 mag, errors 2 mmag) has sum(y^2/err^2) some 1e7 times chi-square,
    # where "total minus explained" would lose about seven digits.
    from phasewise.core.fourier import _basis_rows, _weighted_factor

    t = sampling(n=500, seed=72)
    err = np.full(t.size, 0.002)
    mag = series(t, t[0]) + np.random.default_rng(72).normal(0, 0.002, t.size)
    tc = 0.5 * (t.min() + t.max())
    _, _, chi2, total = _weighted_factor(_basis_rows(TWO_PI * FREQ * (t - tc), 8), mag, 1 / err)
    assert total / chi2[-1] > 1e6
    for order in range(1, 9):
        x = _design(t, FREQ, order) / err[:, None]
        beta, *_ = np.linalg.lstsq(x, mag / err, rcond=None)
        reference = float(np.sum((mag / err - x @ beta) ** 2))
        assert chi2[2 * order] == pytest.approx(reference, rel=1e-10)


def _reference_choice(t, mag, frequency, settings):
    """choose_order the plain way: a separate least-squares fit per order."""
    cap, limited_by = max_order_allowed(t, frequency, settings)
    n = t.size
    diag = np.abs(np.diag(np.linalg.qr(_design(t, frequency, cap))[1]))
    tc = 0.5 * (t.min() + t.max())
    grid = tc + np.arange(256) / 256 / frequency
    orders, chis = [], []
    for order in range(1, cap + 1):
        if diag[: 2 * order + 1].min() <= 1e-10 * diag.max():
            limited_by = "phase_gap"
            break
        beta, *_ = np.linalg.lstsq(_design(t, frequency, order), mag, rcond=None)
        curve = _design(grid, frequency, order, tc) @ beta
        if order > 1 and np.ptp(curve) > (1 + settings.max_overshoot) * np.ptp(mag):
            limited_by = "overshoot"
            break
        orders.append(order)
        chis.append(float(np.sum((mag - _design(t, frequency, order) @ beta) ** 2)))
    bic = [n * np.log(c / n) + (2 * o + 1) * np.log(n) for o, c in zip(orders, chis, strict=True)]
    return orders[int(np.argmin(bic))], len(orders), limited_by, bic


def test_order_choice_matches_separate_fits_on_random_samplings():
    # seeded random samplings and settings that reach every limit: the
    # maximum order, points per parameter, the phase gap and the overshoot
    seen = set()
    for seed in range(300):
        rng = np.random.default_rng(seed)
        n = int(rng.integers(20, 200))
        t = np.sort(rng.uniform(0, 50, n))
        f = rng.uniform(0.3, 3)
        mag = 15 + 0.3 * np.sin(TWO_PI * f * t) + 0.1 * np.sin(2 * TWO_PI * f * t + 1)
        mag = mag + rng.normal(0, rng.uniform(0.01, 0.2), n)
        chosen = FourierSettings(
            max_order=int(rng.integers(3, 12)),
            max_gap_cycles=float(rng.uniform(0.5, 3)),
            max_overshoot=float(rng.uniform(0, 0.5)),
        )
        if max_order_allowed(t, f, chosen)[0] < 1:
            continue
        choice = choose_order(t, mag, None, f, chosen)
        order, max_allowed, limited_by, bic = _reference_choice(t, mag, f, chosen)
        assert (choice.order, choice.max_allowed, choice.limited_by) == (
            order,
            max_allowed,
            limited_by,
        ), seed
        np.testing.assert_allclose(choice.scores, bic, rtol=0, atol=1e-8)
        seen.add(limited_by)
    assert seen == {"max_order", "points", "phase_gap", "overshoot"}


def _two_band_signal(seed=80):
    """Two bands, a main frequency with harmonics and two weak ones."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 120, 400))
    band = (rng.uniform(size=t.size) < 0.4).astype(int)
    scale = np.where(band == 0, 1.0, 0.6)
    mag = np.where(band == 0, 15.0, 14.4) + scale * (
        0.3 * np.sin(TWO_PI * FREQ * t + 0.3)
        + 0.1 * np.sin(2 * TWO_PI * FREQ * t + 2.0)
        + 0.05 * np.sin(3 * TWO_PI * FREQ * t + 1.0)
    )
    mag = mag + 0.04 * np.sin(TWO_PI * 2.31 * t) + 0.03 * np.sin(TWO_PI * 0.77 * t + 1)
    err = np.where(band == 0, 0.01, 0.02)
    mag = mag + rng.normal(0, err)
    return t, mag, err, band, [FREQ, 2.31, 0.77], [3, 1, 1]


def test_joint_model_jacobian_matches_finite_differences():
    # analytic Jacobian of the weighted residuals vs central differences
    from phasewise.core.fourier import _JointModel

    t, mag, err, band, freqs, orders = _two_band_signal()
    tau = t - 0.5 * (t.min() + t.max())
    model = _JointModel(tau, mag, 1 / err, band, 2, orders)
    rng = np.random.default_rng(81)
    x = np.concatenate([freqs, rng.normal(0, 0.2, model.n_par - 3)])
    _, jac, _ = model.evaluate(x, second=False)
    steps = np.where(np.arange(x.size) < 3, 1e-7, 1e-5)
    for i, h in enumerate(steps):
        up, down = x.copy(), x.copy()
        up[i] += h
        down[i] -= h
        numeric = (model.evaluate(up)[0] - model.evaluate(down)[0]) / (2 * h)
        np.testing.assert_allclose(jac[i], numeric, rtol=1e-5, atol=1e-5 * np.abs(jac[i]).max())


def test_joint_model_hessian_matches_finite_differences():
    # exact Hessian of r.r/2 (Gauss-Newton part plus the second-order part)
    # against central differences of the analytic gradient J^T r
    from phasewise.core.fourier import _JointModel

    t, mag, err, band, freqs, orders = _two_band_signal()
    tau = t - 0.5 * (t.min() + t.max())
    model = _JointModel(tau, mag, 1 / err, band, 2, orders)
    x = _plain_fit(t, mag, err, band, freqs, orders, tight=False)
    r, jac, second = model.evaluate(x)
    hessian = jac @ jac.T + second
    assert np.abs(second[:3]).max() > 1e-3 * np.abs(hessian[:3]).max()  # not negligible
    steps = np.where(np.arange(x.size) < 3, 1e-8, 1e-6)
    for i, h in enumerate(steps):
        up, down = x.copy(), x.copy()
        up[i] += h
        down[i] -= h
        r_up, j_up, _ = model.evaluate(up, second=False)
        r_down, j_down, _ = model.evaluate(down, second=False)
        numeric = (j_up @ r_up - j_down @ r_down) / (2 * h)
        np.testing.assert_allclose(
            hessian[i], numeric, rtol=1e-5, atol=1e-6 * np.abs(hessian).max()
        )


def _band_linear_fit(t, mag, err, sel, freqs, orders, tc):
    """Weighted linear least squares of one band at fixed frequencies (numpy lstsq)."""
    cols = [np.ones(sel.sum())]
    for f, order in zip(freqs, orders, strict=True):
        arg = TWO_PI * f * (t[sel] - tc)
        cols += [g(k * arg) for k in range(1, order + 1) for g in (np.cos, np.sin)]
    design = np.column_stack(cols) / err[sel, None]
    beta, *_ = np.linalg.lstsq(design, mag[sel] / err[sel], rcond=None)
    return beta


def _plain_fit(t, mag, err, band, freqs, orders, tight=True):
    """The joint model written plainly, fitted by scipy.optimize.least_squares."""
    tc = 0.5 * (t.min() + t.max())
    n_f, per_band = len(freqs), 1 + 2 * sum(orders)

    def residuals(x):
        model = np.zeros(t.size)
        for b in (0, 1):
            coef = x[n_f + b * per_band : n_f + (b + 1) * per_band]
            sel = band == b
            model[sel] = coef[0]
            col = 1
            for f, order in zip(x[:n_f], orders, strict=True):
                for k in range(1, order + 1):
                    arg = TWO_PI * k * f * (t[sel] - tc)
                    model[sel] += coef[col] * np.cos(arg) + coef[col + 1] * np.sin(arg)
                    col += 2
        return (mag - model) / err

    start = np.concatenate([freqs, np.zeros(2 * per_band)])
    for b in (0, 1):  # linear start at the given frequencies
        beta = _band_linear_fit(t, mag, err, band == b, freqs, orders, tc)
        start[n_f + b * per_band : n_f + (b + 1) * per_band] = beta
    tol = {"ftol": 1e-15, "xtol": 1e-15, "gtol": 1e-15} if tight else {}
    return optimize.least_squares(
        residuals, start, jac="3-point", method="lm", x_scale="jac", **tol
    ).x


def test_joint_fit_matches_scipy_least_squares():
    # reference: scipy.optimize.least_squares (Levenberg-Marquardt, numerical
    # Jacobian) on the plainly written model, converged to machine tolerance
    from phasewise.core.fourier import _JointModel, multi_frequency_fit

    t, mag, err, band, freqs, orders = _two_band_signal()
    start = np.array(freqs) + np.array([2e-5, -1e-4, 1e-4])  # off by a fraction of 1/T
    fit = multi_frequency_fit(t, mag, err, start, orders, band)
    assert fit.success and 2 <= fit.nfev <= 10
    reference = _plain_fit(t, mag, err, band, start, orders)
    # the reference's finite-difference Jacobian limits its own precision to
    # about 1e-10 relative; where they differ, ours has the lower chi-square
    np.testing.assert_allclose(fit.frequencies, reference[:3], rtol=1e-9, atol=0)
    np.testing.assert_allclose(np.concatenate(fit.coefficients), reference[3:], rtol=0, atol=1e-8)
    tau = t - fit.tc
    ours = np.concatenate([fit.frequencies, *fit.coefficients])
    joint = _JointModel(tau, mag, 1 / err, band, 2, orders)
    chi2_ours, chi2_reference = (
        float(r @ r) for r in (joint.evaluate(x)[0] for x in (ours, reference))
    )
    assert chi2_ours <= chi2_reference
    assert np.all(np.abs(fit.frequencies - freqs) < 4 * fit.frequencies_err)


def test_joint_fit_with_a_band_of_fewer_points_than_terms():
    # six points cannot constrain a band's eleven coefficients: that band
    # fits its points exactly at any frequency, so the shared frequencies
    # are those of the other band alone
    from phasewise.core.fourier import multi_frequency_fit

    t, mag, err, band, freqs, orders = _two_band_signal()
    keep = (band == 0) | ((band == 1) & (np.cumsum(band == 1) <= 6))
    t, mag, err, band = t[keep], mag[keep], err[keep], band[keep]
    start = np.array(freqs) + np.array([2e-5, -1e-4, 1e-4])
    both = multi_frequency_fit(t, mag, err, start, orders, band)
    alone = multi_frequency_fit(t[band == 0], mag[band == 0], err[band == 0], start, orders)
    assert both.success and both.nfev < 20
    np.testing.assert_allclose(
        both.frequencies, alone.frequencies, rtol=0, atol=1e-6 * alone.frequencies_err.min()
    )
    assert np.abs(both.residuals[band == 1]).max() < 1e-9


def test_repeated_order_choices_and_fits_are_kept_and_equal_fresh_ones():
    from phasewise.core import fourier as fourier_module

    rng = np.random.default_rng(31)
    t = np.sort(rng.uniform(0, 100, 300))
    m = 0.3 * np.sin(2 * np.pi * t / 0.57) + 0.1 * np.sin(4 * np.pi * t / 0.57)
    m = m + rng.normal(0, 0.02, t.size)
    e = np.full(t.size, 0.02)
    fourier_module.clear_memo()
    choice = fourier_module.choose_order(t, m, e, 1 / 0.57)
    fit = fourier_module.fit_fourier(t, m, e, 1 / 0.57, choice.order)
    # equal content (a copy) gives the kept result
    assert fourier_module.choose_order(t.copy(), m.copy(), e.copy(), 1 / 0.57) is choice
    assert fourier_module.fit_fourier(t.copy(), m.copy(), e, 1 / 0.57, choice.order) is fit
    # other magnitudes, another frequency or order: computed afresh
    m2 = m.copy()
    m2[3] += 0.5
    assert fourier_module.fit_fourier(t, m2, e, 1 / 0.57, choice.order) is not fit
    assert fourier_module.fit_fourier(t, m, e, 1 / 0.571, choice.order) is not fit
    fourier_module.clear_memo()
    fresh = fourier_module.fit_fourier(t, m, e, 1 / 0.57, choice.order)
    assert fresh is not fit and fresh == fit


@pytest.mark.parametrize("frequency", [1 / 0.57, 1 / 0.3, 2.3])
def test_order_choice_carries_the_chi_square_of_its_fit(frequency):
    # reference: the weighted residuals of fit_fourier at the chosen order (definition)
    from phasewise.core.fourier import choose_order, fit_fourier

    rng = np.random.default_rng(41)
    t = np.sort(rng.uniform(0, 300, 700))
    m = 0.3 * np.sin(2 * np.pi * t / 0.57) ** 3 + rng.normal(0, 0.02, t.size)
    e = rng.uniform(0.01, 0.03, t.size)
    choice = choose_order(t, m, e, frequency)
    fit = fit_fourier(t, m, e, frequency, choice.order)
    chi2 = float(np.sum(((m - fit.model(t)) / e) ** 2))
    assert choice.chi2 == pytest.approx(chi2, rel=1e-10)


def test_joint_fit_at_fixed_frequencies_is_the_linear_least_squares_fit():
    # reference: numpy's SVD least squares of each band on [1, cos k theta, sin k theta]
    from phasewise.core.fourier import multi_frequency_fit

    t, mag, err, band, freqs, orders = _two_band_signal()
    fit = multi_frequency_fit(t, mag, err, freqs, orders, band, refine=False)
    tc = fit.tc
    for b in (0, 1):
        beta = _band_linear_fit(t, mag, err, band == b, freqs, orders, tc)
        np.testing.assert_allclose(fit.coefficients[b], beta, rtol=1e-9, atol=1e-12)
