"""Whole-analysis cost against our own periodogram at any number of points.

    python benchmarks/bench_scale_analysis.py [--smoke] [--repeats N] [--stars N]
    python benchmarks/bench_scale_analysis.py --profile 50000 nonvar

For 700, 5,000 and 50,000 points and two stars each (a variable, RRab, and
a non-variable), both drawn by ``core.synthetic`` (one field, V band, the
synthetic field's dense cadence, default analysis settings), prints the CPU
time of the whole ``analyse()`` and of our own periodogram of the same
cleaned curve on the same (default) grid, and their ratio, all measured in
this run on one core with single-threaded BLAS.  Each figure is the median
of ``--repeats`` runs after one warm-up (imports, compiled loops, transform
plans); before each run the per-thread results kept by content (weight
terms and sums of the searches, Fourier fits, sampling) are dropped, so
every run sees the star as new, as a batch does.  Then the median per-star ``analyse()`` time over ``--stars`` stars
of 700 points (the synthetic field's mix of classes) on a grid of about
100,000 frequencies, the grid of the 60 ms goal (as ``bench_analysis.py``).

Targets (issue 17): analysis / own periodogram <= 3x at 5,000 points and
<= 5x at 50,000 points, for variables and non-variables; median <= 60 ms per
star at 700 points.  Figures depend on the machine and on what else runs on
it: a report, not a test.

``--profile N KIND`` runs cProfile on one analysis (KIND ``rrab`` or
``nonvar``) and prints the 25 largest cumulative entries.  ``--counts``
adds, per row, the work of one analysis: transforms of full grids (sums of
the searches), searches computed from the last one's sums less a few
points (see ``core.periodogram.kernels.gls``), joint Fourier fits and
their Newton evaluations, and whether the eclipse search ran.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import sys
import time
from dataclasses import replace
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402

from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.clean import clean  # noqa: E402
from phasewise.core.periodogram import compute_periodogram, grid_parameters  # noqa: E402
from phasewise.core.synthetic import synthetic_field  # noqa: E402
from phasewise.core.threads import limit_blas_threads  # noqa: E402

SIZES = (700, 5_000, 50_000)
KINDS = {"rrab": "RRab", "nonvar": "NONVAR"}
TARGETS = {5_000: 3.0, 50_000: 5.0}
TARGET_MEDIAN_MS = 60.0
N_FREQ = 100_000


def star_of(kind: str, n_points: int, seed: int = 11):
    """The first star of class ``KINDS[kind]`` in a synthetic field of ``n_points`` epochs."""
    # eight stars hold both classes (core.synthetic.class_counts); no points lost
    field = synthetic_field(8, n_epochs=n_points, seed=seed, missing=(0.0, 0.0))
    for lc, truth in zip(field.lightcurves(), field.truth, strict=True):
        if truth.class_code == KINDS[kind]:
            return lc
    raise RuntimeError(f"no {KINDS[kind]} star in the field of {n_points} points")


def forget_star() -> None:
    """Drop what a thread keeps by content of the last stars (not the transform plans)."""
    from phasewise.core import fourier, period_choice
    from phasewise.core.periodogram import grid
    from phasewise.core.periodogram.kernels.gls import clear_weight_terms

    clear_weight_terms()
    fourier.clear_memo()
    period_choice._harmonics.kept = {}
    if hasattr(grid, "clear_sampling_memo"):  # absent from earlier versions
        grid.clear_sampling_memo()


def cpu_median(fn, repeats: int) -> float:
    """Median CPU seconds of ``fn()`` over ``repeats`` calls, after one warm-up call.

    Each call starts from :func:`forget_star` (not timed).
    """
    fn()
    times = []
    for _ in range(repeats):
        forget_star()
        start = time.process_time()
        fn()
        times.append(time.process_time() - start)
    return float(np.median(times))


def scale_table(sizes, repeats: int, settings: AnalysisSettings, counts: bool = False) -> None:
    print(f"{'points':>7} {'star':>7} {'grid':>9} {'analyse':>10} {'periodogram':>12} {'ratio':>6}")
    for n in sizes:
        for kind in KINDS:
            lc = star_of(kind, n)
            cleaned, _ = clean(lc, settings.clean)
            n_freq = grid_parameters(cleaned.arrays()[0], settings.periodogram).n
            reps = repeats if n < 50_000 else max(1, repeats // 2)
            full = cpu_median(lambda lc=lc: analyse(lc, settings), reps)
            pgram = cpu_median(lambda c=cleaned: compute_periodogram(c, settings.periodogram), reps)
            ratio = full / pgram
            target = TARGETS.get(n)
            verdict = "" if target is None else ("  meets" if ratio <= target else "  ABOVE")
            verdict += f" (target <= {target:g}x)" if target else ""
            print(
                f"{n:>7} {kind:>7} {n_freq:>9} {1000 * full:>8.1f}ms {1000 * pgram:>10.1f}ms"
                f" {ratio:>5.1f}x{verdict}"
            )
            if counts:
                work = count_work(lc, settings)
                print("        work: " + ", ".join(f"{k} {v}" for k, v in work.items()))


def median_per_star(n_stars: int, settings: AnalysisSettings) -> None:
    lcs = synthetic_field(n_stars, n_epochs=700, seed=3).lightcurves()
    # the grid of the 60 ms goal (DESIGN.md): ~100,000 frequencies, as in bench_analysis.py
    baseline = float(np.median([lc.baseline for lc in lcs]))
    fmax = N_FREQ / (settings.periodogram.oversampling * baseline)
    settings = replace(settings, periodogram=replace(settings.periodogram, fmax=fmax))
    analyse(lcs[0], settings)
    times = []
    for lc in lcs:
        start = time.process_time()
        analyse(lc, settings)
        times.append(time.process_time() - start)
    median = 1000.0 * float(np.median(times))
    verdict = "meets target" if median <= TARGET_MEDIAN_MS else "ABOVE target"
    print(
        f"median analyse() CPU per star, {len(lcs)} stars of ~700 points, fmax {fmax:.1f} c/d "
        f"(~{N_FREQ:,} frequencies): {median:.1f} ms "
        f"(target <= {TARGET_MEDIAN_MS:g} ms) {verdict}; mean {1000 * np.mean(times):.1f} ms, "
        f"max {1000 * np.max(times):.1f} ms"
    )


def count_work(lc, settings: AnalysisSettings) -> dict[str, int]:
    """Transforms, downdated searches, joint fits and eclipse searches of one analysis."""
    import importlib

    from phasewise.core import fourier, prewhiten
    from phasewise.core.periodogram.kernels import gls

    # the package's name eclipse_search is the function; the module by its path
    eclipse_module = importlib.import_module("phasewise.core.periodogram.eclipse_search")

    counts = {"transforms": 0, "downdated": 0, "joint_fits": 0, "newton_evals": 0, "eclipse": 0}
    places = [
        (gls, "trig_sums"),
        (gls, "_downdate"),  # absent from earlier versions
        (fourier, "multi_frequency_fit"),
        (prewhiten, "multi_frequency_fit"),
        (eclipse_module, "harmonic_screen"),
    ]
    saved = {(m, name): getattr(m, name) for m, name in places if hasattr(m, name)}

    def counted(key, inner):
        def wrapper(*args, **kwargs):
            out = inner(*args, **kwargs)
            counts[key] += 1
            if key == "joint_fits":
                counts["newton_evals"] += out.nfev
            return out

        return wrapper

    names = {"trig_sums": "transforms", "_downdate": "downdated"}
    names |= {"multi_frequency_fit": "joint_fits", "harmonic_screen": "eclipse"}
    forget_star()
    try:
        for (module, name), inner in saved.items():
            setattr(module, name, counted(names[name], inner))
        analyse(lc, settings)
    finally:
        for (module, name), inner in saved.items():
            setattr(module, name, inner)
    return counts


def profile(n: int, kind: str, settings: AnalysisSettings) -> None:
    lc = star_of(kind, n)
    analyse(lc, settings)  # warm-up
    prof = cProfile.Profile()
    prof.enable()
    analyse(lc, settings)
    prof.disable()
    pstats.Stats(prof).sort_stats("cumulative").print_stats(25)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--stars", type=int, default=40)
    parser.add_argument("--smoke", action="store_true", help="a tiny run that checks the script")
    parser.add_argument("--profile", nargs=2, metavar=("N", "KIND"))
    parser.add_argument("--counts", action="store_true", help="count each row's work")
    args = parser.parse_args()
    limit_blas_threads()
    settings = AnalysisSettings()
    if args.profile:
        profile(int(args.profile[0]), args.profile[1], settings)
        return
    sizes = SIZES
    if args.smoke:
        sizes, args.repeats, args.stars = (300,), 1, 3
    scale_table(sizes, args.repeats, settings, counts=args.counts)
    median_per_star(args.stars, settings)


if __name__ == "__main__":
    main()
