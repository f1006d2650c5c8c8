"""Whole per-star analysis time, measured against the bare periodogram call.

    python benchmarks/bench_analysis.py [--stars N]

Light curves of about 700 points from the synthetic field generator (one
site, V band) on a grid of about 100,000 frequencies (the grid follows each
star's baseline: fmax is set so that the grid has ~100,000 frequencies at the
default oversampling).  Prints medians of CPU time measured in this run, one
core, single-threaded BLAS:

* analyse() median per star (target <= 60 ms on one core);
* the bare nifty-ls GLS call on the same star and grid, and the ratio;
* the same on the demo survey (two bands, ~140 points, ~230,000 frequencies).

Speed figures depend on the machine and on what else runs on it; they are a
report, not a test.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from dataclasses import replace
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402
from nifty_ls import finufft  # noqa: E402

from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.io import open_photometry  # noqa: E402
from phasewise.core.periodogram import grid_parameters  # noqa: E402
from phasewise.core.synthetic import synthetic_field  # noqa: E402

TARGET_MS = 60.0
N_FREQ = 100_000


def _median_ms(fn, items) -> float:
    # CPU time of this process: the goal is per star on one core, and wall
    # time on a shared machine counts the other jobs' time too
    times = []
    for item in items:
        start = time.process_time()
        fn(item)
        times.append(time.process_time() - start)
    return 1000.0 * float(np.median(times))


def _bare_gls(lc, settings) -> None:
    t, m, e = lc.arrays()
    grid = grid_parameters(t, settings.periodogram)
    finufft.lombscargle(t, m, grid.fmin, grid.df, grid.n, dy=e, nthreads=1)


def run(label: str, lcs, settings) -> None:
    analyse(lcs[0], settings)  # warm-up: imports, rulebook, FFTW wisdom
    full = _median_ms(lambda lc: analyse(lc, settings), lcs)
    bare = _median_ms(lambda lc: _bare_gls(lc, settings), lcs)
    n_points = int(np.median([lc.n_good for lc in lcs]))
    n_freq = grid_parameters(lcs[0].arrays()[0], settings.periodogram).n
    print(f"{label}: {len(lcs)} stars, ~{n_points} points, {n_freq} frequencies")
    print(
        f"  analyse() median per star : {full:8.1f} ms   (target <= {TARGET_MS:.0f} ms)"
        f"  {'meets target' if full <= TARGET_MS else 'ABOVE target'}"
    )
    print(f"  bare GLS call (one band)  : {bare:8.1f} ms   analyse / bare GLS = {full / bare:.1f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=40)
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.stars = 2
    field = synthetic_field(args.stars, n_epochs=700, seed=3)
    lcs = field.lightcurves()
    baseline = float(np.median([lc.baseline for lc in lcs]))
    base = AnalysisSettings()
    fmax = N_FREQ / (base.periodogram.oversampling * baseline)
    settings = replace(base, periodogram=replace(base.periodogram, fmax=fmax))
    run(f"synthetic field (fmax {fmax:.1f} c/d)", lcs, settings)
    demo = Path(__file__).resolve().parents[1] / "demo_data" / "caldera_survey.ecsv"
    if demo.exists():
        stars = list(open_photometry(demo).stars())[: args.stars]
        run("demo survey (default settings)", stars, base)


if __name__ == "__main__":
    main()
