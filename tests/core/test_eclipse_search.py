"""The phase-binned eclipse search, on invented detached binaries and noise.

Injected truth is checked (period found, class suggested); the F statistic is
checked against scipy's one-way analysis of variance; the false-alarm
probability is checked on noise-only simulations.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.errors import SettingsError
from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import EclipseSearchSettings, eclipse_search
from phasewise.core.periodogram.eclipse_search import aov_binned

P_EA = 2.1374  # invented detached binary, days


def _sparse_times(rng, n_nights=75, baseline=600.0):
    """One to three visits on each of ``n_nights`` random nights (sparse survey)."""
    nights = np.sort(rng.choice(int(baseline), n_nights, replace=False)).astype(float)
    times = [night + rng.uniform(0.0, 0.25, rng.integers(1, 4)) for night in nights]
    return np.concatenate(times)


def _ea_star(seed=0, noise=0.015, width=0.01, depth2=0.0, name="demo-ea-sparse"):
    """Flat light with a Gaussian primary eclipse of sigma ``width`` in phase.

    ``width`` 0.01 gives an eclipse about 5% of the orbit wide (+-2.5 sigma).
    """
    rng = np.random.default_rng(seed)
    t = _sparse_times(rng)
    phase = np.mod(t / P_EA, 1.0)
    d1 = np.mod(phase + 0.5, 1.0) - 0.5
    d2 = np.mod(phase, 1.0) - 0.5
    flux = 1 - 0.6 * np.exp(-0.5 * (d1 / width) ** 2) - depth2 * np.exp(-0.5 * (d2 / width) ** 2)
    mag = 15.0 - 2.5 * np.log10(flux) + rng.normal(0, noise, t.size)
    return LightCurve(name, t, mag, np.full(t.size, noise))


def _n_in_eclipse(lc):
    """Points within +-0.02 in phase of primary eclipse (a sparse draw may have none)."""
    phase = np.mod(lc.time / P_EA, 1.0)
    in_eclipse = np.abs(np.mod(phase + 0.5, 1.0) - 0.5) < 0.02
    return int(in_eclipse.sum())


def test_f_statistic_matches_scipy_one_way_anova():
    # Source: scipy.stats.f_oneway (one-way ANOVA; Schwarzenberg-Czerny 1989
    # uses the same statistic on phase bins).  Unit weights, one bin offset.
    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(0, 50, 200))
    y = np.sin(2 * np.pi * t / 3.1) + rng.normal(0, 0.5, t.size)
    f = np.array([1 / 3.1, 0.777])
    n_bins = 8
    ours, filled = aov_binned(t, y - y.mean(), np.ones_like(y), f, n_bins, shifts=(0.0,))
    for k, freq in enumerate(f):
        phase = np.mod(freq * (t - t.min()), 1.0)
        groups = [y[(phase * n_bins).astype(int) == b] for b in range(n_bins)]
        groups = [g for g in groups if g.size]
        assert filled[k] == len(groups)
        assert ours[k] == pytest.approx(stats.f_oneway(*groups).statistic, rel=1e-9)


def _direct_aov(t, y, w, frequency, n_bins, shifts):
    """Weighted one-way analysis of variance on phase bins, one frequency and bin at a time.

    Textbook form (between- and within-bin sums of squares about the weighted
    means; Schwarzenberg-Czerny 1989), written plainly as a slow reference.
    The largest F over the shifts is kept; F is 0 with fewer than two bins.
    """
    best_f = np.zeros(frequency.size)
    best_r = np.full(frequency.size, 2)
    mean = np.sum(w * y) / np.sum(w)
    for k, freq in enumerate(frequency):
        phase = np.mod(freq * (t - t.min()), 1.0)
        for shift in shifts:
            bins = np.floor(phase * n_bins + shift).astype(int) % n_bins
            between = within = 0.0
            filled = 0
            for b in range(n_bins):
                inside = bins == b
                if not inside.any():
                    continue
                filled += 1
                bin_mean = np.sum(w[inside] * y[inside]) / np.sum(w[inside])
                between += np.sum(w[inside]) * (bin_mean - mean) ** 2
                within += np.sum(w[inside] * (y[inside] - bin_mean) ** 2)
            if filled < 2:
                continue
            value = (between / (filled - 1)) / (within / (t.size - filled))
            if value > best_f[k]:
                best_f[k], best_r[k] = value, filled
    return best_f, best_r


@pytest.mark.parametrize(
    ("seed", "n_bins", "shifts"),
    [(0, 20, (0.0, 0.5)), (1, 10, (0.0,)), (2, 7, (0.0, 0.5)), (3, 20, (0.25, 0.75))],
)
def test_aov_binned_equals_the_direct_reference(seed, n_bins, shifts):
    rng = np.random.default_rng(seed)
    n = 60  # few points for the bins: some bins stay empty
    t = np.sort(rng.uniform(0.0, 300.0, n)) + 2_450_000.0
    y = rng.normal(0.0, 0.1, n)
    w = rng.uniform(0.5, 4.0, n)
    y -= np.sum(w * y) / np.sum(w)  # aov_binned takes magnitudes of zero weighted mean
    # zero (one bin only), low frequencies (points crowd a few bins), random ones
    frequency = np.concatenate([[0.0, 1e-4, 2e-3], rng.uniform(0.0, 5.0, 60)])
    ours, filled = aov_binned(t, y, w, frequency, n_bins, shifts=shifts)
    ref, ref_filled = _direct_aov(t, y, w, frequency, n_bins, shifts)
    assert ours[0] == 0.0
    assert np.any((ref > 0) & (ref_filled < n_bins))  # empty bins were exercised
    np.testing.assert_allclose(ours, ref, rtol=1e-10, atol=0.0)
    np.testing.assert_array_equal(filled, ref_filled)


def test_aov_binned_refuses_what_the_compiled_loop_cannot_take():
    t = np.linspace(0.0, 10.0, 30)
    ones = np.ones_like(t)
    with pytest.raises(SettingsError, match="shifts"):
        aov_binned(t, ones, ones, np.array([0.3]), 10, shifts=(0.0, 1.0))
    with pytest.raises(SettingsError, match="frequency"):
        aov_binned(t, ones, ones, np.array([np.nan]), 10)
    with pytest.raises(SettingsError, match="field 't'"):
        aov_binned(t, ones[:-1], ones, np.array([0.3]), 10)
    with pytest.raises(SettingsError, match="n_bins"):
        aov_binned(t, ones, ones, np.array([0.3]), 0)


def test_sparse_ea_with_five_percent_eclipses_is_found_at_its_period():
    lc = _ea_star(seed=2)
    assert _n_in_eclipse(lc) >= 5  # this draw samples the eclipse (seed chosen for that)
    search = eclipse_search(lc)
    assert search is not None
    f_true = 1.0 / P_EA
    # within a quarter of a peak width 1/T of the injected frequency
    assert abs(search.frequencies[0] - f_true) < 0.25 / np.ptp(lc.time)
    assert search.faps[0] < 1e-6


def test_sparse_ea_is_missed_by_the_periodogram_but_analysed_as_ea():
    lc = _ea_star(seed=2)
    plain = analyse(lc, AnalysisSettings(eclipse_search=None))
    result = analyse(lc)
    d = result.to_dict()
    assert d["status"] == "ok"
    assert d["period"] == pytest.approx(P_EA, rel=1e-3)
    assert d["eclipse_search"]["method"] == "aov_binned"
    assert any("eclipse search" in flag for flag in d["flags"])
    assert d["suggestions"][0]["class"] == "EA"
    # without the search the sinusoid-based periodogram does not get there
    assert plain.period is None or abs(plain.period / P_EA - 1) > 1e-3 or plain.fap > 1e-3


def test_noise_only_false_alarm_probability_is_not_too_small():
    # Noise-only simulations (Gaussian, the sampling of the sparse survey):
    # the bound must not claim more significance than the noise has.  With
    # 40 curves, fewer than 4 + 2 sigma below FAP 0.1 (binomial, p = 0.1).
    rng = np.random.default_rng(11)
    faps = []
    settings = EclipseSearchSettings(min_period=0.5)
    for i in range(40):
        t = _sparse_times(rng, n_nights=60, baseline=300.0)
        y = 15.0 + rng.normal(0, 0.02, t.size)
        lc = LightCurve(f"noise-{i}", t, y, np.full(t.size, 0.02))
        faps.append(eclipse_search(lc, settings).faps[0])
    assert sum(f < 0.1 for f in faps) <= 4 + 2 * np.sqrt(40 * 0.1 * 0.9)
    assert min(faps) > 1e-3


def test_lone_outlier_does_not_make_an_eclipse():
    rng = np.random.default_rng(3)
    t = _sparse_times(rng)
    y = 15.0 + rng.normal(0, 0.01, t.size)
    y[17] += 1.5  # one bad point
    lc = LightCurve("demo-outlier", t, y, np.full(t.size, 0.01))
    search = eclipse_search(lc)
    assert search.faps[0] > 0.01
    clipped = eclipse_search(lc, EclipseSearchSettings(clip=1e6))  # no clipping
    # unclipped, the outlier raises the statistic; the median check of the
    # deepest bin still refuses it as a dip
    assert clipped.f_values[0] > search.f_values[0]
    assert clipped.faps[0] > 0.01


def test_too_few_points_gives_none():
    t = np.linspace(0, 100, 30)
    lc = LightCurve("demo-few", t, 15 + 0.01 * np.sin(t), np.full(t.size, 0.01))
    assert eclipse_search(lc) is None


def test_settings_are_validated_with_the_field_named():
    with pytest.raises(SettingsError, match="n_bins"):
        EclipseSearchSettings(n_bins=2)
    with pytest.raises(SettingsError, match="clip"):
        EclipseSearchSettings(clip=0.0)


def _dip_confirmed_plain(t, y, f, n_bins):
    # the rule written out: the best robust S/N over every bin of both offsets
    from phasewise.core.periodogram.eclipse_search import MIN_DIP_POINTS, MIN_DIP_SNR

    phase = (f * (t - t.min())) % 1.0
    best = 0.0
    for shift in (0.0, 0.5):
        index = np.floor(phase * n_bins + shift).astype(int) % n_bins
        for b in range(n_bins):
            inside = index == b
            k = int(inside.sum())
            if k < MIN_DIP_POINTS or k == t.size:
                continue
            rest = y[~inside]
            centre = np.median(rest)
            sigma = 1.4826 * np.median(np.abs(rest - centre))
            if sigma > 0:
                best = max(best, (np.median(y[inside]) - centre) / (1.2533 * sigma / np.sqrt(k)))
    return best >= MIN_DIP_SNR


@pytest.mark.parametrize("depth", [0.0, 0.005, 0.01, 0.02, 0.3])
def test_dip_confirmation_gives_the_answer_of_the_plain_rule(depth):
    from phasewise.core.periodogram.eclipse_search import _dip_confirmed

    rng = np.random.default_rng(int(depth * 1000) + 5)
    t = np.sort(rng.uniform(0, 300, 400))
    y = rng.normal(0, 0.02, t.size)
    y[((t / 2.7) % 1.0) < 0.04] += depth  # a narrow dip of this depth
    y[rng.choice(t.size, 3, replace=False)] += 0.8  # and three outliers
    w = np.ones(t.size)
    for f in (1 / 2.7, 1 / 1.35, 0.813):
        assert _dip_confirmed(t, y, w, f, 20) == _dip_confirmed_plain(t, y, f, 20)


def test_harmonic_screen_equals_the_direct_sums():
    # the formula of harmonic_screen's docstring, summed directly point by point
    from phasewise.core.periodogram.eclipse_search import harmonic_screen

    rng = np.random.default_rng(8)
    t = np.sort(rng.uniform(0.0, 80.0, 150)) + 2_460_000.0
    y = rng.normal(0.0, 0.1, t.size)
    w = rng.uniform(0.5, 2.0, t.size)
    y -= np.sum(w * y) / np.sum(w)
    df, k_first, k_last, n_harm = 1.0 / 400.0, 3, 200, 7
    ours = harmonic_screen(t, y, w, df, k_first, k_last, n_harm)
    ref = np.zeros(k_last - k_first + 1)
    for j, k in enumerate(range(k_first, k_last + 1)):
        for h in range(1, n_harm + 1):
            z = np.sum(w * y * np.exp(2j * np.pi * h * k * df * (t - t[0])))
            ref[j] += np.sinc(h / n_harm) ** 2 * abs(z) ** 2
    # the transform is asked for 1e-9 relative precision
    np.testing.assert_allclose(ours, ref, rtol=1e-6, atol=1e-9 * ref.max())


def _dense_ea_star(seed, depth, period, n_nights=300, baseline=700.0, noise=0.02):
    """A detached binary (Gaussian eclipse of sigma 0.01 in phase) seen 1-9 times a night."""
    rng = np.random.default_rng(seed)
    nights = np.sort(rng.choice(int(baseline), n_nights, replace=False)).astype(float)
    t = np.concatenate(
        [night + np.sort(rng.uniform(0.0, 0.3, rng.integers(1, 10))) for night in nights]
    )
    d1 = np.mod(t / period + 0.5, 1.0) - 0.5
    flux = 1 - depth * np.exp(-0.5 * (d1 / 0.01) ** 2)
    mag = 15.0 - 2.5 * np.log10(flux) + rng.normal(0, noise, t.size)
    return LightCurve(f"demo-ea-dense-{seed}", t, mag, np.full(t.size, noise))


@pytest.mark.slow
@pytest.mark.parametrize(("seed", "depth", "period"), [(1, 0.1, 4.3875), (8, 0.05, 3.0196)])
def test_screened_search_finds_what_the_exact_coarse_pass_finds(seed, depth, period, monkeypatch):
    # ~1,500 points over 700 d: the harmonic screen chooses the seeds; with the
    # screen switched off the exact coarse pass does.  Both find the injected
    # orbit, significant, at the same fine-grid frequency.
    import importlib

    module = importlib.import_module("phasewise.core.periodogram.eclipse_search")
    lc = _dense_ea_star(seed, depth, period)
    assert lc.n_good * 5 * 5 * 700 > module.SCREEN_MIN_WORK  # the screen is used
    screened = eclipse_search(lc)
    monkeypatch.setattr(module, "SCREEN_MIN_POINTS", 10**9)
    exact = eclipse_search(lc)
    for search in (screened, exact):
        assert abs(search.frequencies[0] - 1.0 / period) < 0.25 / 700.0
        assert search.faps[0] < 1e-6
    # the same fine-grid point (the two grids differ by rounding only)
    assert screened.frequencies[0] == pytest.approx(exact.frequencies[0], rel=1e-12)
    assert screened.f_values[0] == pytest.approx(exact.f_values[0], rel=1e-6)
    # the S/N from a sample of the coarse grid is close to the whole grid's
    assert screened.snrs[0] == pytest.approx(exact.snrs[0], rel=0.15)


def test_screened_search_on_noise_is_not_significant():
    # 1,500 points of white noise: the screen's best seeds are noise, and
    # the exact statistic there gives no false alarm
    rng = np.random.default_rng(4)
    lc = _dense_ea_star(4, 0.0, 1.0)
    lc = LightCurve(
        "demo-noise-dense",
        lc.time,
        15.0 + rng.normal(0, 0.02, lc.time.size),
        np.full(lc.time.size, 0.02),
    )
    search = eclipse_search(lc)
    assert search.faps[0] > 0.01


def test_sorted_mad_equals_numpy():
    # definition: np.median(np.abs(values - centre)) of the sorted values
    from phasewise.core.periodogram.eclipse_search import _sorted_mad

    rng = np.random.default_rng(6)
    for _ in range(500):
        n = int(rng.integers(1, 60))
        values = np.sort(np.round(rng.normal(size=n), int(rng.integers(0, 3))))  # ties too
        for centre in (float(np.median(values)), float(values[n // 3]), float(rng.normal())):
            assert _sorted_mad(values, centre) == np.median(np.abs(values - centre))


def test_time_cells_keep_the_centre_and_spread_of_the_statistic():
    # 20,000 points, many within seconds of each other (dense photometry):
    # merged into cells, the statistic's median and MAD over 2,000 trial
    # frequencies stay within 5% of the plain statistic's (seeds 0-5 of this
    # set-up differed by 2.3% at most: the two partitions' own scatter)
    from phasewise.core.periodogram.eclipse_search import _aov_in_cells

    rng = np.random.default_rng(9)
    starts = np.sort(rng.uniform(0.0, 300.0, 400))
    t = np.sort(np.concatenate([s + np.arange(50) * 3e-4 for s in starts]))
    y = rng.normal(0.0, 0.01, t.size) + 0.005 * np.sin(2 * np.pi * t / 17.0)
    w = np.full(t.size, 1e4)
    y -= y.mean()
    f = np.linspace(0.05, 5.0, 2000)
    plain = aov_binned(t, y, w, f, 10, shifts=(0.0,))[0]
    cells = _aov_in_cells(t, y, w, f, 10)
    for stat in (
        np.median,
        lambda v: np.median(np.abs(v - np.median(v))),
    ):
        assert stat(cells) == pytest.approx(stat(plain), rel=0.05)
