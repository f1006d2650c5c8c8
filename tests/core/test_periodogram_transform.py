"""The transform layer under the fast GLS: trigonometric sums, reused plans and weight terms."""

from __future__ import annotations

import threading

import numpy as np
import pytest
from astropy.timeseries import LombScargle

from phasewise.core.periodogram.grid import RegularGrid
from phasewise.core.periodogram.kernels import gls as gls_module
from phasewise.core.periodogram.kernels import nufft as nufft_module
from phasewise.core.periodogram.kernels.gls import clear_weight_terms, gls_nufft, weight_terms
from phasewise.core.periodogram.kernels.nufft import clear_plans, plan_size, trig_sums


def _direct(t, c, frequency):
    return np.exp(2j * np.pi * np.multiply.outer(frequency, t)) @ c


@pytest.mark.parametrize(
    ("fmin", "df", "n"),
    [
        (0.001, 0.0002, 5000),  # a long baseline from 1/T
        (40.0, 0.003, 2001),  # a grid far from zero (fast pulsators)
        (0.5, 0.4, 301),  # a step coarse enough that 2 pi df t leaves [-3 pi, 3 pi]
    ],
)
def test_trig_sums_equal_direct_sums(fmin, df, n):
    # Reference: the sums written out, sum_i c_i exp(2 pi i f t_i) (definition).
    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(-400.0, 400.0, 300))
    c = rng.normal(size=300) + 1j * rng.normal(size=300)
    frequency = fmin + df * np.arange(n)
    got = trig_sums(t, c, fmin, df, n)
    want = _direct(t, c, frequency)
    assert np.max(np.abs(got - want)) < 1e-7 * np.sum(np.abs(c))


def test_plans_are_reused_and_can_be_dropped():
    rng = np.random.default_rng(2)
    t1, t2 = rng.uniform(-10, 10, 50), rng.uniform(-10, 10, 80)
    c1, c2 = rng.normal(size=50), rng.normal(size=80)
    clear_plans()
    first = trig_sums(t1, c1, 0.1, 0.01, 1000)
    # other points on the same grid size reuse the plan; results stay exact
    other = trig_sums(t2, c2, 0.1, 0.01, 1000)
    again = trig_sums(t1, c1, 0.1, 0.01, 1000)
    assert np.array_equal(first, again)
    frequency = 0.1 + 0.01 * np.arange(1000)
    assert np.max(np.abs(other - _direct(t2, c2, frequency))) < 1e-7 * np.abs(c2).sum()


def test_plan_sizes_are_few_and_cover_the_grid():
    sizes = [plan_size(n) for n in range(1, 200_000, 7)]
    for n, size in zip(range(1, 200_000, 7), sizes, strict=True):
        assert n <= size <= max(n, 16) * 1.125
    # eight sizes per octave: 17 octaves of grids share about 8 x 17 plans
    assert len(set(sizes)) < 8 * 18 + 16


def test_grids_of_nearly_one_size_share_a_plan_and_keep_their_sums():
    # Reference: the sums written out on each grid (definition).
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(-300.0, 300.0, 200))
    c = rng.normal(size=200)
    clear_plans()
    for n in (20_100, 20_400, 20_479):  # one size step: 20,480 modes
        assert plan_size(n) == 20_480
        got = trig_sums(t, c, 0.003, 0.0017, n)
        assert got.shape == (n,)
        want = _direct(t, c, 0.003 + 0.0017 * np.arange(n))
        assert np.max(np.abs(got - want)) < 1e-7 * np.sum(np.abs(c))
    assert [key[0] for key in nufft_module._local.plans] == [20_480]


def test_fast_gls_equals_astropy_and_nifty_ls():
    # References: astropy LombScargle(method="slow"), standard normalisation, and
    # the nifty-ls finufft backend (Garrison et al. 2024), both outside this project.
    from nifty_ls import finufft as nifty

    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(0, 300, 400))
    t -= 0.5 * (t[0] + t[-1])
    y = 0.3 * np.sin(2 * np.pi * t / 0.613) + rng.normal(0, 0.1, t.size)
    dy = rng.uniform(0.05, 0.2, t.size)
    grid = RegularGrid(1.0 / 300, 1.0 / 1500, 20_000)
    power, _ = gls_nufft(t, y, dy, grid.frequencies(), grid=grid)
    slow = LombScargle(t, y, dy).power(grid.frequencies()[::40], method="slow")
    assert np.max(np.abs(power[::40] - slow)) < 1e-8
    other = nifty.lombscargle(t, y, grid.fmin, grid.df, grid.n, dy=dy, nthreads=1)
    # both transforms are asked for a relative precision of 1e-9 (nufft.EPS)
    assert np.max(np.abs(power - other)) < 1e-9


def test_weight_terms_are_kept_for_the_same_points_and_not_for_others():
    rng = np.random.default_rng(8)
    t = rng.uniform(-50, 50, 200)
    w = rng.uniform(1, 4, 200)
    grid = RegularGrid(0.01, 0.002, 3000)
    first = weight_terms(t, w, grid)
    assert weight_terms(t.copy(), w.copy(), grid) is first  # equal content: kept
    w2 = w.copy()
    w2[7] = 0.0  # one point without weight is another star
    assert weight_terms(t, w2, grid) is not first
    assert weight_terms(t, w, RegularGrid(0.01, 0.002, 3001)) is not first


def test_weight_cache_is_bounded(monkeypatch):
    monkeypatch.setattr(gls_module, "WEIGHT_CACHE_BYTES", 1)
    rng = np.random.default_rng(9)
    grid = RegularGrid(0.01, 0.002, 1000)
    t = rng.uniform(-50, 50, 100)
    first = weight_terms(t, np.ones(100), grid)
    weight_terms(t, np.full(100, 2.0), grid)
    # over the byte budget only the newest entry stays: the first is computed anew
    assert weight_terms(t, np.ones(100), grid) is not first


def test_the_residual_searches_of_one_star_match_fresh_computations():
    # A cached weight-term set must give the same power as computing from scratch.
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(-100, 100, 300))
    dy = rng.uniform(0.01, 0.05, 300)
    grid = RegularGrid(0.005, 0.001, 8000)
    powers = []
    for k in range(3):
        y = np.sin(2 * np.pi * (k + 1) * 0.37 * t) + rng.normal(0, 0.02, t.size)
        powers.append((y, gls_nufft(t, y, dy, None, grid=grid)[0]))
    clear_weight_terms()
    for y, cached in powers:
        fresh, _ = gls_nufft(t, y, dy, None, grid=grid)
        assert np.array_equal(fresh, cached)


def test_threads_compute_independently():
    # Plans are per thread: concurrent searches give what one thread gives.
    rng = np.random.default_rng(12)
    grid = RegularGrid(0.01, 0.001, 20_000)
    data = []
    for _ in range(4):
        t = np.sort(rng.uniform(-200, 200, 250))
        y = np.sin(2 * np.pi * rng.uniform(0.5, 3) * t) + rng.normal(0, 0.3, t.size)
        data.append((t, y))
    expected = [gls_nufft(t, y, None, None, grid=grid)[0] for t, y in data]
    results: dict[int, list] = {}

    def work(index: int) -> None:
        results[index] = [gls_nufft(t, y, None, None, grid=grid)[0] for t, y in data * 3]

    threads = [threading.Thread(target=work, args=(i,)) for i in range(3)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    for got in results.values():
        for power, want in zip(got, expected * 3, strict=True):
            assert np.max(np.abs(power - want)) < 1e-12


def test_plan_cache_is_bounded_by_grid_points(monkeypatch):
    from phasewise.core.periodogram.kernels import nufft

    monkeypatch.setattr(nufft, "MAX_PLAN_MODES", 1500)
    clear_plans()
    rng = np.random.default_rng(3)
    t, c = rng.uniform(-5, 5, 20), rng.normal(size=20)
    for n in (1024, 416, 320):  # sizes of the plan ladder (plan_size(n) == n)
        trig_sums(t, c, 0.1, 0.01, n)
    kept = [key[0] for key in nufft._local.plans]
    assert kept == [416, 320]  # 1024 + 416 + 320 is over the budget: the oldest went
    trig_sums(t, c, 0.1, 0.01, 2000)  # one plan alone may exceed it
    assert [key[0] for key in nufft._local.plans] == [plan_size(2000)]


@pytest.mark.parametrize("n_removed", [1, 3, 16])
def test_a_search_less_a_few_points_equals_a_fresh_one(n_removed, monkeypatch):
    # A search of the same points less a few (outliers set aside) is computed
    # from the kept sums of the last search less those points' terms; it must
    # give the power a fresh computation gives, and astropy's exact GLS
    # (Zechmeister & Kuerster 2009; astropy method="slow") on a sample of it.
    rng = np.random.default_rng(31)
    t = np.sort(rng.uniform(-300.0, 300.0, 400))
    dy = rng.uniform(0.01, 0.05, t.size)
    y = 15.0 + 0.2 * np.sin(2 * np.pi * 1.37 * t) + rng.normal(0, 0.02, t.size)
    y[[50, 200]] += 1.0  # outliers whose removal changes the mean and the spectrum
    grid = RegularGrid(1.0 / 600.0, 1.0 / 3000.0, 40_000)  # wider than one anchor run
    clear_weight_terms()
    gls_nufft(t, y, dy, None, grid=grid)
    keep = np.ones(t.size, bool)
    if n_removed == 3:
        keep[[50, 120, 200]] = False  # the outliers and one more
    else:
        keep[rng.choice(np.arange(1, t.size - 1), n_removed, replace=False)] = False
    transforms = []
    monkeypatch.setattr(gls_module, "trig_sums", lambda *a, **k: transforms.append(a))
    downdated, _ = gls_nufft(t[keep], y[keep], dy[keep], None, grid=grid)
    assert not transforms  # computed from the kept sums, no transform
    monkeypatch.undo()
    clear_weight_terms()
    fresh, _ = gls_nufft(t[keep], y[keep], dy[keep], None, grid=grid)
    assert np.max(np.abs(downdated - fresh)) < 1e-8
    sample = np.arange(0, grid.n, 997)
    ls = LombScargle(t[keep], y[keep], dy[keep], normalization="standard")
    exact = ls.power(grid.frequencies()[sample], method="slow")
    assert np.max(np.abs(downdated[sample] - exact)) < 1e-7


def test_only_a_subset_of_the_same_points_reuses_the_kept_sums():
    # a changed magnitude, a changed weight or too many points removed: a fresh search
    rng = np.random.default_rng(32)
    t = np.sort(rng.uniform(-100.0, 100.0, 200))
    dy = np.full(t.size, 0.02)
    y = np.sin(2 * np.pi * 0.8 * t) + rng.normal(0, 0.05, t.size)
    grid = RegularGrid(0.005, 0.001, 5000)
    keep = np.ones(t.size, bool)
    keep[[10, 20]] = False
    y2 = y.copy()
    y2[30] += 0.1
    dy2 = dy.copy()
    dy2[40] = 0.03
    many = np.ones(t.size, bool)
    many[1 : 2 + gls_module.DOWNDATE_MAX_POINTS] = False
    for tt, yy, ee in (
        (t[keep], y2[keep], dy[keep]),
        (t[keep], y[keep], dy2[keep]),
        (t[many], y[many], dy[many]),
    ):
        clear_weight_terms()
        gls_nufft(t, y, dy, None, grid=grid)
        assert gls_module._from_kept_sums(tt, yy, 1.0 / ee**2, grid) is None
    clear_weight_terms()
    gls_nufft(t, y, dy, None, grid=grid)
    assert gls_module._from_kept_sums(t[keep], y[keep], 1.0 / dy[keep] ** 2, grid) is not None


def test_kept_sums_are_bounded(monkeypatch):
    # over the byte budget only the newest search's sums stay (sums are kept
    # for searches whose weight terms were computed, i.e. new points)
    monkeypatch.setattr(gls_module, "KEPT_SUMS_BYTES", 1)
    rng = np.random.default_rng(33)
    grid = RegularGrid(0.01, 0.002, 1000)
    clear_weight_terms()
    times = [np.sort(rng.uniform(-50, 50, 100)) for _ in range(6)]
    for t in times[:3]:
        gls_nufft(t, np.sin(t), None, None, grid=grid)
    assert len(gls_module._local.sums) == 1
    assert np.array_equal(gls_module._local.sums[0].t, times[2])
    monkeypatch.undo()
    for t in times:
        gls_nufft(t, np.cos(t), None, None, grid=grid)
    assert len(gls_module._local.sums) == gls_module.KEPT_SUMS
