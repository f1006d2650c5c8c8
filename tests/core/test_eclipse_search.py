"""The phase-binned eclipse search, on invented detached binaries and noise.

Injected truth is checked (period found, class suggested); the F statistic is
checked against scipy's one-way analysis of variance; the false-alarm
probability is checked on noise-only simulations.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from core.analysis import AnalysisSettings, analyse
from core.errors import SettingsError
from core.lightcurve import LightCurve
from core.periodogram import EclipseSearchSettings, eclipse_search
from core.periodogram.eclipse_search import aov_binned

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
    assert clipped.faps[0] < search.faps[0]


def test_too_few_points_gives_none():
    t = np.linspace(0, 100, 30)
    lc = LightCurve("demo-few", t, 15 + 0.01 * np.sin(t), np.full(t.size, 0.01))
    assert eclipse_search(lc) is None


def test_settings_are_validated_with_the_field_named():
    with pytest.raises(SettingsError, match="n_bins"):
        EclipseSearchSettings(n_bins=2)
    with pytest.raises(SettingsError, match="clip"):
        EclipseSearchSettings(clip=0.0)
