"""Speed of the period search, measured in one run (medians of repeats).

Prints, for ~700 points and ~100,000 frequencies on one thread:

* our GLS (``compute_periodogram``) against the raw nifty-ls call (target <= 1.2x)
  and against astropy ``LombScargle.power(method="fast")`` (target >= 10x faster);
* the multi-harmonic periodogram, PDM and conditional entropy;
* candidates with the spectral window;
* the shared-epoch batch (200 stars x 700 epochs) against star by star
  (target >= 1.4x).

Run: ``.venv/bin/python benchmarks/bench_periodogram.py [--quick]``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.lightcurve import LightCurve  # noqa: E402
from phasewise.core.periodogram import (  # noqa: E402
    PeriodogramSettings,
    compute_periodogram,
    find_candidates,
    grid_parameters,
    shared_epoch_periodograms,
)
from phasewise.core.periodogram.kernels.gls import clear_weight_terms  # noqa: E402


def median_time(func, repeats: int) -> float:
    func()  # warm up (imports, plans, caches)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def interleaved_medians(funcs, repeats: int) -> list[float]:
    """Median times of several calls run in turn, so load changes hit all alike."""
    for func in funcs:
        func()
    times = [[] for _ in funcs]
    for _ in range(repeats):
        for slot, func in zip(times, funcs, strict=True):
            start = time.perf_counter()
            func()
            slot.append(time.perf_counter() - start)
    return [statistics.median(slot) for slot in times]


def invented_star(rng, n_points=700, baseline=400.0):
    t = 2461000.0 + np.sort(rng.uniform(0, baseline, n_points))
    err = rng.uniform(0.01, 0.04, n_points)
    mag = 16.0 + 0.3 * np.sin(2 * np.pi * t / 0.5473) + rng.normal(0, err)
    return t, mag, err


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.quick = True
    reps = 3 if args.quick else 15

    import nifty_ls
    from astropy.timeseries import LombScargle

    rng = np.random.default_rng(2026)
    t, mag, err = invented_star(rng)
    lc = LightCurve("bench-1", t, mag, err)
    settings = PeriodogramSettings()
    grid = grid_parameters(t, settings)
    freq = grid.frequencies()
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores; one thread")
    print(f"{t.size} points, {grid.n:,} frequencies ({grid.fmin:.4g}-{grid.fmax:.4g} c/d)")

    def first_sight():  # a star seen for the first time: its weight terms are computed
        clear_weight_terms()
        return compute_periodogram(lc, settings)

    ours, again, raw = interleaved_medians(
        [
            first_sight,
            lambda: compute_periodogram(lc, settings),  # the same points again (prewhitening)
            lambda: nifty_ls.lombscargle(
                t,
                mag,
                err,
                fmin=grid.fmin,
                fmax=grid.fmax,
                Nf=grid.n,
                backend="finufft",
                nthreads=1,
            ),
        ],
        2 * reps,
    )
    ls = LombScargle(t, mag, err)
    astro = median_time(lambda: ls.power(freq, method="fast"), max(3, reps // 3))
    print(f"GLS ours            {ours * 1e3:8.2f} ms (a new star: three transforms)")
    print(f"GLS ours, same points {again * 1e3:6.2f} ms (weight terms kept: one transform)")
    print(
        f"GLS raw nifty-ls    {raw * 1e3:8.2f} ms   ours/raw = {ours / raw:5.2f}x (target <= 1.2)"
    )
    print(
        f"astropy fast        {astro * 1e3:8.2f} ms   astropy/ours = {astro / ours:5.1f}x "
        "(target >= 10)"
    )

    mh = PeriodogramSettings(method="mhgls", nterms=3)
    t_mh = median_time(lambda: compute_periodogram(lc, mh), max(3, reps // 3))
    raw_mh = median_time(
        lambda: nifty_ls.lombscargle(
            t,
            mag,
            err,
            fmin=grid.fmin,
            fmax=grid.fmax,
            Nf=grid.n,
            backend="finufft_chi2",
            nterms=3,
            nthreads=1,
        ),
        max(3, reps // 3),
    )
    ls3 = LombScargle(t, mag, err, nterms=3)
    astro_mh = median_time(lambda: ls3.power(freq, method="fastchi2"), 1 if args.quick else 3)
    print(
        f"multi-harmonic (3)  {t_mh * 1e3:8.2f} ms   ours/raw = {t_mh / raw_mh:5.2f}x, "
        f"astropy fastchi2/ours = {astro_mh / t_mh:5.1f}x"
    )
    for method in ("pdm", "ce"):
        s = PeriodogramSettings(method=method)
        elapsed = median_time(lambda s=s: compute_periodogram(lc, s), 3 if not args.quick else 1)
        print(f"{method.upper():<19} {elapsed * 1e3:8.1f} ms")
    pg = compute_periodogram(lc, settings)
    t_cand = median_time(lambda: find_candidates(pg, lc), reps)
    print(f"candidates+window   {t_cand * 1e3:8.2f} ms")

    n_stars = 200
    epochs = t
    mags = np.stack([invented_star(rng)[1] for _ in range(n_stars)])
    errs = rng.uniform(0.01, 0.04, mags.shape)
    mags[rng.random(mags.shape) < 0.05] = np.nan  # missing points, zero weight
    stars = []
    for i in range(n_stars):
        good = np.isfinite(mags[i])
        stars.append(LightCurve(f"bench-{i}", epochs[good], mags[i][good], errs[i][good]))
    freq_shared = grid_parameters(epochs, settings).frequencies()
    batch_reps = 1 if args.quick else 3

    def one_by_one():
        for star in stars:
            compute_periodogram(star, settings, frequency=freq_shared)

    t_single, t_batch = interleaved_medians(
        [one_by_one, lambda: shared_epoch_periodograms(epochs, mags, errs, settings)], batch_reps
    )
    print(
        f"shared epochs {n_stars} x {epochs.size}: star by star {t_single:6.2f} s, "
        f"batched {t_batch:6.2f} s, speed-up {t_single / t_batch:4.2f}x (target >= 1.4)"
    )


if __name__ == "__main__":
    main()
