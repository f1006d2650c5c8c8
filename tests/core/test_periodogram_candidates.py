"""Spectral window, candidates, marks and false-alarm probabilities."""

from __future__ import annotations

import numpy as np
import pytest
from astropy.timeseries import LombScargle

from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import (
    Candidate,
    PeriodogramSettings,
    WindowPeak,
    baluev_fap,
    candidate_marks,
    compute_periodogram,
    f_test_fap,
    find_candidates,
    spectral_window,
    window_peaks,
)


def _nightly_curve(period=0.5731, n_nights=160, seed=11, amplitude=0.3, noise=0.05):
    """One point per night near the same hour (the sampling that makes 1 c/d aliases)."""
    rng = np.random.default_rng(seed)
    nights = np.sort(rng.choice(np.arange(250), n_nights, replace=False))
    t = 2460100.0 + nights + 0.35 + rng.normal(0, 0.03, n_nights)
    err = np.full(n_nights, noise)
    y = 15.0 + amplitude * np.sin(2 * np.pi * t / period) + rng.normal(0, noise, n_nights)
    return LightCurve("N1", t, y, err)


# ----------------------------------------------------------------- window
def test_spectral_window_equals_direct_sum():
    # |sum w exp(2 pi i f t)|^2 / (sum w)^2, written out directly.
    rng = np.random.default_rng(1)
    t = np.sort(rng.uniform(0, 50, 80))
    w = rng.uniform(0.5, 2, t.size)
    f = np.linspace(0.0, 3.0, 301)
    direct = np.abs(np.exp(2j * np.pi * f[:, None] * t) @ w) ** 2 / w.sum() ** 2
    np.testing.assert_allclose(spectral_window(t, f, w), direct, atol=1e-9)
    assert spectral_window(t, np.array([0.0]))[0] == pytest.approx(1.0)


def test_window_of_nightly_sampling_peaks_at_one_cycle_per_day():
    lc = _nightly_curve()
    peaks = window_peaks(lc.time)
    assert peaks and isinstance(peaks[0], WindowPeak)
    assert abs(peaks[0].frequency - 1.0) < 0.01
    assert peaks[0].power > 0.8
    assert any(abs(p.frequency - 2.0) < 0.01 for p in peaks)


def test_window_of_seasonal_sampling_shows_the_year():
    # Four 150-night observing seasons a year apart: window peaks at 1 c/d and 1/yr.
    rng = np.random.default_rng(3)
    nights = np.concatenate([np.arange(150) + 365 * k for k in range(4)])
    nights = nights[rng.random(nights.size) < 0.5]
    t = nights + 0.3 + rng.normal(0, 0.02, nights.size)
    peaks = window_peaks(t)
    baseline = t.max() - t.min()
    assert any(abs(p.frequency - 1 / 365.0) < 1 / baseline for p in peaks)
    assert any(abs(p.frequency - 1.0) < 1 / baseline for p in peaks)


def test_random_sampling_has_no_window_peaks():
    t = np.sort(np.random.default_rng(5).uniform(0, 300, 500))
    assert window_peaks(t) == ()


# ----------------------------------------------------------------- candidates
def test_nightly_aliases_are_marked_through_the_one_day_window_peak():
    lc = _nightly_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=5.0))
    cands = find_candidates(pg, lc)
    assert len(cands) == 5 and all(isinstance(c, Candidate) for c in cands)
    best = cands[0]
    f_true = 1 / 0.5731
    assert abs(best.frequency - f_true) < 0.1 / pg.baseline
    assert best.marks == ()
    aliases = [c for c in cands[1:] if "alias" in c.marks]
    alias_freqs = [c.frequency for c in aliases]
    for expected in (f_true - 1.0, f_true + 1.0):  # the +-1 c/d aliases
        assert any(abs(f - expected) < 0.01 for f in alias_freqs)
    detail = next(d for c in aliases for d in c.mark_details if "candidate 1" in d)
    assert "via window peak 1.0" in detail or "via window peak 0.99" in detail
    # strongest first, distinct peaks, consistent period
    powers = [c.power for c in cands]
    assert powers == sorted(powers, reverse=True)
    freqs = np.array([c.frequency for c in cands])
    assert np.min(np.abs(np.diff(np.sort(freqs)))) > 1 / pg.baseline
    assert all(c.period == pytest.approx(1 / c.frequency) for c in cands)
    assert best.snr > 10


def test_eclipsing_like_curve_half_period_peak_and_true_period_marked():
    # EW-like: two nearly equal minima per orbit; GLS peaks at twice the orbital frequency.
    rng = np.random.default_rng(8)
    t = np.sort(rng.uniform(0, 80, 400))
    p_orb = 0.37
    phase = 2 * np.pi * t / p_orb
    y = 13.0 + 0.25 * np.cos(2 * phase) + 0.06 * np.cos(phase) + rng.normal(0, 0.01, t.size)
    lc = LightCurve("E1", t, y, np.full(t.size, 0.01))
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=8.0))
    cands = find_candidates(pg, lc, PeriodogramSettings(fmax=8.0, n_candidates=8))
    assert abs(cands[0].frequency - 2 / p_orb) < 0.1 / pg.baseline
    orbital = [c for c in cands if abs(c.frequency - 1 / p_orb) < 0.5 / pg.baseline]
    assert orbital, "the orbital frequency should be a candidate"
    assert "subharmonic" in orbital[0].marks
    assert any("f/2 of" in d and "candidate 1" in d for d in orbital[0].mark_details)


def test_marks_rules_on_given_frequencies():
    settings = PeriodogramSettings(mark_tolerance=0.5)
    baseline = 100.0  # tolerance 0.005 c/d
    windows = (WindowPeak(1.0027, 0.9),)
    freqs = [1.7234, 3.4470, 0.8617, 2.7261, 0.7207, 5.1111]
    marks = candidate_marks(freqs, windows, baseline, settings)
    assert marks[0] == ((), ())
    assert marks[1][0] == ("harmonic",)  # 2 x 1.7234
    assert marks[2][0] == ("subharmonic",)  # 1.7234 / 2
    assert marks[3][0] == ("alias",)  # 1.7234 + 1.0027
    assert "alias of 1.7234 c/d (candidate 1) via window peak 1.0027 c/d" in marks[3][1]
    assert marks[4][0] == ("alias",)  # |1.7234 - 1.0027|
    assert marks[5][0] == ()  # unrelated


# ----------------------------------------------------------------- FAP
@pytest.mark.parametrize("with_errors", [True, False])
def test_baluev_fap_matches_astropy(with_errors):
    # Reference: astropy LombScargle.false_alarm_probability(method="baluev") (Baluev 2008).
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(0, 90, 120))
    dy = rng.uniform(0.05, 0.15, t.size) if with_errors else None
    y = 0.08 * np.sin(2 * np.pi * t / 2.3) + rng.normal(0, 0.1, t.size)
    ls = LombScargle(t, y, dy)
    powers = np.array([0.05, 0.12, 0.2, 0.35])
    expected = ls.false_alarm_probability(powers, method="baluev", maximum_frequency=10.0)
    # astropy puts fmax on its own grid (fmin + df (Nf - 1)); use the same fmax here.
    _, fmax = ls.autofrequency(maximum_frequency=10.0, return_freq_limits=True)
    np.testing.assert_allclose(baluev_fap(powers, fmax, t, dy), expected, rtol=1e-10)


def test_candidate_fap_is_baluev_for_gls_and_small_for_a_real_signal():
    lc = _nightly_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=5.0))
    best = find_candidates(pg, lc)[0]
    t, y, e = lc.arrays()
    assert best.fap_method == "baluev"
    assert best.fap == pytest.approx(float(baluev_fap(best.power, pg.frequency[-1], t, e)))
    # Reference: astropy false_alarm_probability(method="baluev"); astropy's own fmax
    # differs from ours by under a grid step, hence the looser tolerance.
    expected = LombScargle(t, y, e).false_alarm_probability(
        best.power, method="baluev", maximum_frequency=pg.frequency[-1]
    )
    assert best.fap == pytest.approx(float(expected), rel=1e-3)
    assert best.fap < 1e-10


def test_noise_has_a_large_fap():
    rng = np.random.default_rng(21)
    t = np.sort(rng.uniform(0, 60, 100))
    lc = LightCurve("C1", t, rng.normal(12.0, 0.02, t.size), np.full(t.size, 0.02))
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=10.0))
    assert find_candidates(pg, lc)[0].fap > 0.01


def test_f_test_fap_for_one_term_tracks_single_frequency_baluev():
    # With nterms = 1 and one frequency the F test is exact: sf of F(2, N-3)
    # equals (1 - z)^((N-3)/2) (Baluev 2008, Table 1, "standard").
    z = np.array([0.05, 0.1, 0.3])
    n = 80
    np.testing.assert_allclose(
        f_test_fap(z, n, n_model=2, n_null=1, n_independent=1), (1 - z) ** ((n - 3) / 2), rtol=1e-9
    )


@pytest.mark.parametrize("method", ["mhgls", "pdm", "ce"])
def test_other_methods_get_a_documented_fap(method):
    lc = _nightly_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(method=method, fmax=5.0, nterms=2))
    cands = find_candidates(pg, lc)
    expected_method = {"mhgls": "f_test", "pdm": "gls_at_frequency", "ce": "gls_at_frequency"}
    assert cands[0].fap_method == expected_method[method]
    assert 0 <= cands[0].fap < 1e-6
    d = cands[0].to_dict()
    assert set(d) >= {"frequency", "period", "power", "fap", "snr", "marks", "mark_details"}


def test_precomputed_window_peaks_are_used():
    lc = _nightly_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=5.0))
    without = find_candidates(pg, lc, windows=())
    assert all("alias" not in c.marks for c in without)


def test_multiband_candidates_use_the_f_test():
    rng = np.random.default_rng(30)
    t = np.sort(rng.uniform(0, 50, 200))
    band = np.where(np.arange(t.size) % 2 == 0, "g", "r")
    y = np.where(band == "g", 15.0, 14.6) + 0.2 * np.sin(2 * np.pi * t / 0.77)
    y = y + rng.normal(0, 0.02, t.size)
    lc = LightCurve("M1", t, y, np.full(t.size, 0.02), band=band)
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=4.0))
    best = find_candidates(pg, lc)[0]
    assert abs(best.frequency - 1 / 0.77) < 0.2 / pg.baseline
    assert best.fap_method == "f_test" and best.fap < 1e-20


@pytest.mark.parametrize("method", ["gls", "pdm", "ce"])
def test_constant_curve_candidates_are_not_significant(method):
    t = np.linspace(0, 30, 40) + 0.1 * np.sin(np.arange(40))
    lc = LightCurve("K1", t, np.full(40, 12.5))
    pg = compute_periodogram(lc, PeriodogramSettings(method=method, fmax=3.0))
    cands = find_candidates(pg, lc)
    assert cands and all(c.fap == 1.0 and c.snr == 0.0 for c in cands)


def test_fap_power_levels_match_astropy_false_alarm_level():
    # Reference: astropy LombScargle.false_alarm_level(method="baluev") (Baluev 2008),
    # the power a peak needs for a given false-alarm probability; the desk draws these.
    from phasewise.core.folding import fap_power_levels

    lc = _nightly_curve()
    pg = compute_periodogram(lc, PeriodogramSettings(fmax=5.0))
    levels = fap_power_levels(pg, lc, PeriodogramSettings(fmax=5.0))
    assert [fap for fap, _ in levels] == [0.1, 0.01, 0.001]
    t, y, e = lc.arrays()
    ls = LombScargle(t, y, e)
    for fap, power in levels:
        expected = ls.false_alarm_level(fap, method="baluev", maximum_frequency=pg.frequency[-1])
        # astropy's own fmax differs from ours by under a grid step
        assert power == pytest.approx(float(expected), rel=1e-3)
    assert [p for _, p in levels] == sorted(p for _, p in levels)  # rarer: higher
