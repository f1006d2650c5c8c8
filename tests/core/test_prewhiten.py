"""Prewhitening on invented multi-periodic stars (injected truth checked).

The residual search is astropy's ``LombScargle`` on a plain grid (an
independent reference), except in the test of the default search, which is
the project's own ``core.periodogram``.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from astropy.timeseries import LombScargle

from phasewise.core.errors import PhasewiseError, SettingsError
from phasewise.core.lightcurve import LightCurve
from phasewise.core.prewhiten import PrewhitenSettings, _combination_label, _noise, prewhiten

TWO_PI = 2 * np.pi
N, SPAN, NOISE = 700, 300.0, 0.02
P1O = 0.3576  # invented double-mode star: first overtone ...
P_F = P1O / 0.745  # ... and fundamental with the RRd-like ratio
F1O, F_F = 1 / P1O, 1 / P_F


def gls_search(lc):
    t, m, e = lc.arrays()
    grid = np.arange(0.02, 8.0, 1 / (5 * np.ptp(t)))
    return grid, LombScargle(t, m, e).power(grid, method="fast")


def _times(seed):
    return np.sort(np.random.default_rng(seed).uniform(0, SPAN, N))


def _star(t, mag, seed, band="V"):
    noisy = mag + np.random.default_rng(seed + 1000).normal(0, NOISE, t.size)
    return LightCurve(f"demo-{seed}", t, noisy, np.full(t.size, NOISE), band=band)


def _double_mode(t, combination=0.0):
    return (
        15.0
        + 0.2 * np.sin(TWO_PI * F1O * t)
        + 0.03 * np.sin(2 * TWO_PI * F1O * t + 1.0)
        + 0.1 * np.sin(TWO_PI * F_F * t + 2.0)
        + combination * np.sin(TWO_PI * (F1O + F_F) * t + 0.5)
    )


def test_double_mode_cepheid_ratio_is_recovered():
    # 1O/F ratio near 0.72 (Alcock et al. 1995, via REFERENCES.md); periods invented
    t = _times(9)
    p_f = 3.1
    f_f, f_1o = 1 / p_f, 1 / (0.72 * p_f)
    mag = 14 + 0.25 * np.sin(TWO_PI * f_f * t) + 0.08 * np.sin(2 * TWO_PI * f_f * t + 1)
    mag = mag + 0.12 * np.sin(TWO_PI * f_1o * t + 2)
    res = prewhiten(_star(t, mag, 9), f_f, search=gls_search)
    assert [f.kind for f in res.frequencies[:2]] == ["main", "independent"]
    assert res.period_ratio == pytest.approx(0.72, abs=5e-4)


def test_two_independent_modes_give_the_injected_period_ratio():
    t = _times(1)
    res = prewhiten(_star(t, _double_mode(t), 1), F1O, search=gls_search)
    kinds = [f.kind for f in res.frequencies]
    assert kinds[:2] == ["main", "independent"]
    second = res.frequencies[1]
    assert second.frequency == pytest.approx(F_F, abs=3 * second.frequency_err + 1e-6)
    assert second.amplitude == pytest.approx(0.1, abs=0.005)
    assert res.period_ratio == pytest.approx(0.745, abs=2e-4)
    assert res.secondary_period == pytest.approx(P_F, rel=1e-4)
    assert res.main_order == 2
    assert res.stop_reason == "snr" and res.last_snr < 4


def test_combination_frequency_is_labelled():
    t = _times(2)
    res = prewhiten(_star(t, _double_mode(t, combination=0.04), 2), F1O, search=gls_search)
    by_label = {f.label: f for f in res.frequencies}
    assert "f1+f2" in by_label
    combo = by_label["f1+f2"]
    assert combo.kind == "combination"
    assert combo.frequency == pytest.approx(F1O + F_F, abs=1 / SPAN)
    assert combo.amplitude == pytest.approx(0.04, abs=0.005)
    assert res.period_ratio == pytest.approx(0.745, abs=2e-4)  # combination is not a mode


def test_amplitude_modulation_shows_side_peaks_and_its_period():
    # a 40-day modulation of amplitude (Blazhko-like) splits f1 into
    # f1 - fm, f1, f1 + fm with side amplitudes 0.3 * 0.3 / 2 = 0.045
    t = _times(3)
    f1, p_mod = 1 / 0.48, 40.0
    mag = 15 + 0.3 * (1 + 0.3 * np.sin(TWO_PI * t / p_mod)) * np.sin(TWO_PI * f1 * t)
    mag = mag + 0.1 * np.sin(2 * TWO_PI * f1 * t + 1.0)
    res = prewhiten(_star(t, mag, 3), f1, search=gls_search)
    sides = [f for f in res.frequencies if f.kind == "side peak"]
    assert len(sides) == 2
    assert sorted(np.sign([f.frequency - f1 for f in sides])) == [-1, 1]
    for side in sides:
        assert side.amplitude == pytest.approx(0.045, abs=0.005)
        assert side.modulation_period == pytest.approx(p_mod, rel=0.03)
    assert res.modulation_period == pytest.approx(p_mod, rel=0.03)
    assert res.period_ratio is None and res.secondary_periods == ()


def test_a_harmonic_left_out_of_the_main_model_is_labelled_harmonic():
    t = _times(4)
    f1 = 1 / 0.61
    mag = 15 + 0.3 * np.sin(TWO_PI * f1 * t) + 0.12 * np.sin(2 * TWO_PI * f1 * t + 1)
    res = prewhiten(_star(t, mag, 4), f1, PrewhitenSettings(main_order=1), search=gls_search)
    assert res.frequencies[1].kind == "harmonic" and res.frequencies[1].label == "2f1"
    assert res.period_ratio is None


def test_noise_alone_is_rarely_taken_for_a_frequency():
    # Breger et al. 1993 (from memory): amplitude S/N >= 4 for a real peak.
    # The highest of ~2400 independent noise peaks sits near 3-3.5 times the
    # mean noise amplitude (Rayleigh tail), so S/N 4 is seldom passed.
    spurious, refused = 0, []
    for seed in range(20):
        t = _times(100 + seed)
        mag = 15 + 0.3 * np.sin(TWO_PI * F_F * t)
        res = prewhiten(
            _star(t, mag, 100 + seed), F_F, PrewhitenSettings(max_frequencies=1), gls_search
        )
        if len(res.frequencies) > 1:
            spurious += 1
        else:
            refused.append(res.last_snr)
    assert spurious <= 3
    assert 2.5 < np.median(refused) < 4.0


def test_noise_level_matches_the_rayleigh_mean_of_white_noise():
    # white noise of sigma: the amplitude spectrum 2|sum r e^{-i w t}|/N is
    # Rayleigh distributed with mean sigma * sqrt(pi / N) (derivation)
    rng = np.random.default_rng(7)
    t = np.sort(rng.uniform(0, SPAN, 2000))
    sigma = 0.05
    values = [
        _noise(t, rng.normal(0, sigma, t.size), np.ones(t.size), 3.0, 1.0, 400) for _ in range(5)
    ]
    assert np.mean(values) == pytest.approx(sigma * np.sqrt(np.pi / t.size), rel=0.05)


def test_limit_and_multiband():
    t = _times(5)
    rng = np.random.default_rng(5)
    band = np.where(rng.uniform(size=t.size) < 0.6, "V", "I")
    scale = np.where(band == "V", 1.0, 0.6)
    mean = np.where(band == "V", 0.0, -0.7)
    mag = mean + 15 + scale * (_double_mode(t) - 15)
    lc = _star(t, mag, 5, band=band)
    res = prewhiten(lc, F1O, PrewhitenSettings(max_frequencies=1), search=gls_search)
    assert res.stop_reason == "limit" and len(res.frequencies) == 2
    assert res.period_ratio == pytest.approx(0.745, abs=3e-4)
    # amplitudes are those of the band with most points (V)
    assert res.frequencies[0].amplitude == pytest.approx(0.2, abs=0.01)


def test_combination_labels_read_naturally():
    assert _combination_label(1, 1, 1, 2) == "f1+f2"
    assert _combination_label(2, 1, -1, 2) == "2f1-f2"
    assert _combination_label(-1, 1, 1, 2) == "f2-f1"


def test_results_and_errors():
    t = _times(6)
    res = prewhiten(_star(t, _double_mode(t), 6), F1O, search=gls_search)
    d = res.to_dict()
    json.dumps(d)
    assert d["period_ratio"] == pytest.approx(res.period_ratio)
    assert {f["kind"] for f in d["frequencies"]} <= {
        "main",
        "harmonic",
        "side peak",
        "combination",
        "independent",
    }
    assert d["frequencies"][0]["label"] == "f1" and d["frequencies"][0]["snr"] > 50
    with pytest.raises(PhasewiseError, match="field 'frequency'"):
        prewhiten(_star(t, _double_mode(t), 6), -1.0, search=gls_search)
    with pytest.raises(SettingsError, match="field 'snr_threshold'"):
        PrewhitenSettings(snr_threshold=0)
    with pytest.raises(SettingsError, match="field 'max_frequencies'"):
        PrewhitenSettings(max_frequencies=-1)


def test_nightly_sampling_reports_the_aliases_of_a_second_mode():
    # one visit a night: the window has a peak at 1 c/d, so f2 - 1 and
    # f2 + 1 rival f2 in the residuals (common practice, no source)
    rng = np.random.default_rng(11)
    t = np.arange(300.0) + rng.normal(0, 0.04, 300)
    res = prewhiten(_star(t, _double_mode(t), 11), F1O, search=gls_search)
    second = res.frequencies[1]
    assert second.kind == "independent"
    found = [second.frequency, *second.alternatives]
    assert len(second.alternatives) >= 1
    assert min(abs(np.array(found) - F_F)) < 1 / 300
    offsets = np.array(found) - second.frequency
    assert np.any(np.abs(np.abs(offsets) - 1.0) < 0.02)  # a +-1 c/d alias among them


def test_default_search_is_the_project_periodogram_and_handles_bands():
    t = _times(12)
    rng = np.random.default_rng(12)
    band = np.where(rng.uniform(size=t.size) < 0.6, "V", "I")
    mag = _double_mode(t) + np.where(band == "I", -0.5, 0.0)
    res = prewhiten(_star(t, mag, 12, band=band), F1O)
    assert res.frequencies[1].kind == "independent"
    assert res.period_ratio == pytest.approx(0.745, abs=3e-4)


def test_a_search_that_refuses_stops_prewhitening_with_its_reason():
    from phasewise.core.errors import GridTooLargeError

    def refusing(lc):
        raise GridTooLargeError("grid of 2,000,000 frequencies is above the limit")

    t = _times(13)
    res = prewhiten(_star(t, _double_mode(t), 13), F1O, search=refusing)
    assert res.stop_reason == "search failed" and "above the limit" in res.note
    assert len(res.frequencies) == 1 and res.frequencies[0].kind == "main"
    assert res.to_dict()["note"] == res.note


def test_residual_search_keeps_to_the_main_search_range():
    from phasewise.core.periodogram import PeriodogramSettings
    from phasewise.core.prewhiten import residual_search

    t = _times(14)
    lc = _star(t, _double_mode(t), 14)
    search = residual_search(3, PeriodogramSettings(method="pdm", fmin=0.5, fmax=3.0))
    grid, power = search(lc)
    baseline = np.ptp(t)
    assert grid[0] == pytest.approx(0.5) and grid[-1] <= 3.0
    assert np.diff(grid)[0] == pytest.approx(1.0 / (3 * baseline))  # its own oversampling
    assert np.all((power >= 0) & (power <= 1))  # a least-squares power even for a PDM main search
    # both modes of the double-mode star lie below 3 c/d: the second is found in range
    assert F1O < 3.0 and F_F < 3.0
    res = prewhiten(lc, F1O, search=search)
    assert all(0.5 <= f.frequency <= 3.0 for f in res.frequencies)
    assert min(abs(f.frequency - F_F) for f in res.frequencies[1:]) < 1.0 / baseline


def test_masks_near_known_frequencies_equal_the_plain_test():
    # the plain test over the whole grid (definition) on increasing and other grids
    from phasewise.core.prewhiten import _near_mask

    rng = np.random.default_rng(21)
    grid = 0.01 + 0.003 * np.arange(20_000)
    centres = np.concatenate([rng.uniform(-1, 70, 60), grid[[0, 5, 19_999]], [grid[7] + 0.002]])
    tolerance = 0.002
    plain = np.zeros(grid.size, bool)
    for x in centres:
        plain |= np.abs(grid - x) < tolerance
    assert np.array_equal(_near_mask(grid, centres, tolerance), plain)
    shuffled = rng.permutation(grid)
    plain_shuffled = np.zeros(grid.size, bool)
    for x in centres:
        plain_shuffled |= np.abs(shuffled - x) < tolerance
    assert np.array_equal(_near_mask(shuffled, centres, tolerance), plain_shuffled)
    assert not _near_mask(grid, [], tolerance).any()


def test_bands_are_indexed_by_their_number_of_points():
    # the band with most points is band 0 of the joint fit: its amplitude is reported
    rng = np.random.default_rng(22)
    t = np.sort(rng.uniform(0, 200, 500))
    band = np.where(rng.random(t.size) < 0.2, "V", "I").astype(object)
    amp = np.where(band == "I", 0.2, 0.35)
    mag = amp * np.sin(2 * np.pi * t / 0.61) + rng.normal(0, 0.01, t.size)
    lc = LightCurve("bands", t, mag, np.full(t.size, 0.01), band=band)
    result = prewhiten(lc, 1 / 0.61, PrewhitenSettings(max_frequencies=1))
    assert result.frequencies[0].amplitude == pytest.approx(0.2, abs=0.01)  # I, not V


def test_gaussian_noise_on_sparse_sampling_gives_no_further_frequency():
    # ~120 points over three seasons, searched to 50 c/d: the S/N of the
    # highest residual peak alone passed its threshold at most steps here
    # (fitted amplitude above the spectrum, noise lowered by the removal);
    # the step false-alarm probability (Baluev 2008) holds the rate near 1e-3
    from phasewise.core.prewhiten import residual_search

    spurious = []
    for seed in range(12):
        rng = np.random.default_rng(300 + seed)
        nights = np.sort(rng.choice(np.arange(800), 120, replace=False)).astype(float)
        t = nights + 0.5 + rng.uniform(-0.15, 0.15, nights.size)
        mag = 15 + 0.3 * np.sin(TWO_PI * F1O * t) + 0.1 * np.sin(2 * TWO_PI * F1O * t + 1)
        lc = _star(t, mag, 300 + seed)
        res = prewhiten(lc, F1O, search=residual_search())
        spurious += [f for f in res.frequencies if f.kind not in ("main", "harmonic")]
    assert len(spurious) <= 1
    for found in spurious:
        assert found.fap is not None and found.fap <= 1e-3


def test_reflections_of_side_peaks_and_harmonics_are_named():
    # nightly sampling: the 1 c/d reflection of a side peak or of a harmonic
    # can be the higher of the two (frequencies invented)
    from phasewise.core.prewhiten import _classify

    settings = PrewhitenSettings()
    day, f1, fm, res = 1.0027, 1.79, 1 / 60.0, 1e-3
    kinds, labels, mods = _classify([f1, 2 * f1 + fm + day], res, f1, settings, window_freqs=(day,))
    assert kinds[1] == "side peak" and mods[1] == pytest.approx(60.0, rel=1e-6)
    assert labels[1].endswith(f"+{day:.4f}")
    # beside a second mode (RRd-like ratio) the reflection of its harmonic is a harmonic,
    # and no side peak is sought through the window
    f2 = 0.745 * f1
    kinds, labels, _ = _classify([f1, f2, 3 * f2 + day], res, f1, settings, window_freqs=(day,))
    assert kinds == ["main", "independent", "harmonic"] and labels[2].startswith("3f2")
    # without the window peak it stays independent
    kinds, _, _ = _classify([f1, 2 * f1 + fm + day], res, f1, settings)
    assert kinds[1] == "independent"


def test_in_a_modulated_star_peaks_weaker_than_the_side_peaks_are_modulation():
    from phasewise.core.prewhiten import FoundFrequency, _modulation_residue

    def found(kind, amplitude):
        return FoundFrequency(1.0, 1e-4, amplitude, 10.0, kind, "f", 1)

    items = [found("main", 0.4), found("side peak", 0.08), found("independent", 0.03)]
    assert [f.kind for f in _modulation_residue(items)] == ["main", "side peak", "modulation"]
    # a second mode as strong as the side peaks or stronger stays one
    items[2] = found("independent", 0.1)
    assert _modulation_residue(items)[2].kind == "independent"
    # no side peak: nothing changes
    assert _modulation_residue([found("main", 0.4), found("independent", 0.03)])[1].kind == (
        "independent"
    )


def test_joint_fit_started_at_the_peak_vertex_reaches_the_same_frequency():
    # the residual peak's parabola vertex (a better start, common practice, no
    # source) lies within half a grid step, nearer the injected frequency, and
    # the joint fit from it converges where the fit from the grid point does
    from phasewise.core.fourier import multi_frequency_fit
    from phasewise.core.prewhiten import _vertex

    rng = np.random.default_rng(41)
    t = np.sort(rng.uniform(0.0, 80.0, 600))
    e = np.full(t.size, 0.01)
    f_true = 2.34567
    y = 0.1 * np.sin(2 * np.pi * f_true * t + 0.3) + rng.normal(0, 0.01, t.size)
    grid = 2.0 + np.arange(4000) / (3 * 80.0)  # three samples per peak width
    from phasewise.core.periodogram.kernels.gls import gls_exact

    power, _ = gls_exact(t, y, e, grid)
    peak = float(grid[np.argmax(power)])
    start = _vertex(grid, power, peak)
    step = grid[1] - grid[0]
    assert abs(start - peak) <= 0.5 * step
    assert abs(start - f_true) < abs(peak - f_true)
    bands = np.zeros(t.size, int)
    from_grid = multi_frequency_fit(t, y, e, [peak], [1], bands)
    from_vertex = multi_frequency_fit(t, y, e, [start], [1], bands)
    assert from_vertex.nfev <= from_grid.nfev
    err = from_grid.frequencies_err[0]
    assert abs(from_vertex.frequencies[0] - from_grid.frequencies[0]) < 1e-3 * err
    # no neighbour on one side, or no downward bend: the grid point itself
    assert _vertex(grid, power, float(grid[0])) == float(grid[0])
    assert _vertex(grid, np.ones(grid.size), float(grid[5])) == float(grid[5])
