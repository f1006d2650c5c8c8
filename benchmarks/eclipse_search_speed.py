"""Eclipse search per call: the compiled phase-binned loop against the numpy one.

    python benchmarks/eclipse_search_speed.py [--stars 8] [--repeat 5]

Both run in this process on the same light curves (about 700 points over
about 1000 days, from the synthetic field generator): ``old`` is the numpy
``aov_binned`` the compiled loop replaced, kept below for comparison only and
swapped into ``eclipse_search`` for its timing.  Printed: the median over
stars of the best-of-``repeat`` time per call (whole search and its coarse
pass), their ratio, the largest difference between the two results, and the
one-off cost of the first call in a freshly spawned process (as a batch
worker sees it) with the compiled code cached on disk and without.
"""

from __future__ import annotations

import argparse
import importlib
import multiprocessing
import os
import sys
import tempfile
import time
from pathlib import Path
from unittest import mock

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.synthetic import synthetic_field  # noqa: E402

# the module (the package exports a function of the same name)
es = importlib.import_module("phasewise.core.periodogram.eclipse_search")

_CHUNK = 150_000


def old_aov_binned(t, y, w, frequency, n_bins, shifts=(0.0, 0.5)):
    """The numpy version before the compiled loop (comparison only)."""
    t = np.asarray(t, dtype=float) - np.min(t)
    wy = w * y
    total = float(np.dot(wy, y))
    n = t.size
    best_f = np.zeros(frequency.size)
    best_r = np.full(frequency.size, 2)
    step = max(1, _CHUNK // n)
    tiled_w = np.tile(w, step)
    tiled_wy = np.tile(wy, step)
    offsets = (np.arange(step) * n_bins)[:, None]
    for start in range(0, frequency.size, step):
        f = frequency[start : start + step]
        m = f.size
        phase = np.multiply.outer(f, t)
        phase -= np.floor(phase)
        phase *= n_bins
        index = np.empty(phase.shape, dtype=np.intp)
        for shift in shifts:
            if shift:
                phase += shift
            np.copyto(index, phase, casting="unsafe")
            if shift:
                index[index == n_bins] = 0
            index += offsets[:m]
            flat = index.ravel()
            bin_w = np.bincount(flat, weights=tiled_w[: m * n], minlength=m * n_bins)
            bin_wy = np.bincount(flat, weights=tiled_wy[: m * n], minlength=m * n_bins)
            filled = bin_w > 0
            np.divide(bin_wy**2, bin_w, out=bin_wy, where=filled)
            bin_wy[~filled] = 0.0
            between = bin_wy.reshape(m, n_bins).sum(axis=1)
            r = filled.reshape(m, n_bins).sum(axis=1)
            within = np.maximum(total - between, 1e-300)
            fv = (between / np.maximum(r - 1, 1)) / (within / np.maximum(n - r, 1))
            fv[r <= 1] = 0.0
            chunk_f = best_f[start : start + step]
            better = fv > chunk_f
            chunk_f[better] = fv[better]
            best_r[start : start + step][better] = r[better]
    return best_f, best_r


def _best_ms(repeat: int, function, *args, **kwargs) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        function(*args, **kwargs)
        times.append(time.perf_counter() - start)
    return 1000.0 * min(times)


def _one_star(lc, repeat: int) -> dict:
    """Old and new times, whole search and coarse pass, and how far the results differ."""
    settings = es.EclipseSearchSettings()
    t, y, w = es._prepare(lc, settings.clip)
    baseline = float(np.ptp(t))
    coarse = np.arange(
        1.0 / (settings.max_period_fraction * baseline),
        1.0 / settings.min_period,
        1.0 / (settings.oversampling * baseline),
    )
    coarse_pass = (t, y, w, coarse, max(4, settings.n_bins // 2))
    new = es.eclipse_search(lc)
    with mock.patch.object(es, "aov_binned", old_aov_binned):
        old = es.eclipse_search(lc)
        old_ms = _best_ms(repeat, es.eclipse_search, lc)
    f_old, r_old = old_aov_binned(*coarse_pass, shifts=(0.0,))
    f_new, r_new = es.aov_binned(*coarse_pass, shifts=(0.0,))
    assert np.array_equal(r_old, r_new)
    return {
        "points": t.size,
        "coarse": coarse.size,
        "old": old_ms,
        "new": _best_ms(repeat, es.eclipse_search, lc),
        "old_coarse": _best_ms(repeat, old_aov_binned, *coarse_pass, shifts=(0.0,)),
        "new_coarse": _best_ms(repeat, es.aov_binned, *coarse_pass, shifts=(0.0,)),
        "coarse_diff": float(np.max(np.abs(f_new - f_old) / np.maximum(f_old, 1e-300))),
        "same_peaks": new.frequencies == old.frequencies,
        "peak_diff": max(abs(a / b - 1) for a, b in zip(new.f_values, old.f_values, strict=True)),
    }


def _first_call(cache_dir: str, queue) -> None:
    """In a spawned process: time the import of the loop and the first search."""
    os.environ["NUMBA_CACHE_DIR"] = cache_dir
    from phasewise.core.periodogram.eclipse_search import eclipse_search

    lc = synthetic_field(1, n_epochs=700, seed=3, shared_epochs=False).lightcurves()[0]
    start = time.perf_counter()
    from phasewise.core.periodogram import _aov_loop  # noqa: F401  (numba and the cached code)

    imported = time.perf_counter()
    eclipse_search(lc)
    first = time.perf_counter()
    eclipse_search(lc)
    second = time.perf_counter()
    queue.put((imported - start, first - imported, second - first))


def _spawned_first_call(cache_dir: str) -> tuple[float, float, float]:
    context = multiprocessing.get_context("spawn")
    queue = context.Queue()
    process = context.Process(target=_first_call, args=(cache_dir, queue))
    process.start()
    result = queue.get(timeout=300)
    process.join()
    return result


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=8)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--seed", type=int, default=3)
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args(argv)
    if args.smoke:
        args.stars, args.repeat = 1, 1
    stars = synthetic_field(args.stars, n_epochs=700, seed=args.seed, shared_epochs=False)
    es.eclipse_search(stars.lightcurves()[0])  # compile or load the loop outside the timing
    rows = [_one_star(lc, args.repeat) for lc in stars.lightcurves()]

    def median(key):
        return float(np.median([row[key] for row in rows]))

    def ratio(old, new):
        return float(np.median([row[old] / row[new] for row in rows]))

    print(
        f"{len(rows)} stars, median {median('points'):.0f} points, {median('coarse'):.0f} "
        f"coarse frequencies (best of {args.repeat}, medians over stars)"
    )
    print(
        f"eclipse_search  old {median('old'):7.1f} ms   new {median('new'):6.1f} ms   "
        f"ratio {ratio('old', 'new'):.1f}x"
    )
    print(
        f"coarse pass     old {median('old_coarse'):7.1f} ms   new {median('new_coarse'):6.1f} ms"
        f"   ratio {ratio('old_coarse', 'new_coarse'):.1f}x"
    )
    print(
        f"same peak frequencies on {sum(row['same_peaks'] for row in rows)}/{len(rows)} stars; "
        f"largest relative difference: coarse F {max(row['coarse_diff'] for row in rows):.1e}, "
        f"peak F {max(row['peak_diff'] for row in rows):.1e}"
    )
    with tempfile.TemporaryDirectory() as cache_dir:
        for label in ("empty cache (compiles)", "warm cache"):
            load, first, again = _spawned_first_call(cache_dir)
            print(
                f"spawned process, {label}: import {1000 * load:.0f} ms, "
                f"first search {1000 * first:.0f} ms, next {1000 * again:.0f} ms"
            )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
