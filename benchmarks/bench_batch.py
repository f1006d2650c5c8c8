"""Batch analysis speed: stars per second, shared-epoch speed-up, per-star cost.

Prints, measured in one run on this machine:

1. stars/s with 1 and 2 worker processes on the demo survey (demo_data/,
   read through core.io) and on a synthetic field of stars sharing their
   epochs (``--field-stars``, 10,000 by default; ~700 points, 100,000
   frequencies);
2. the shared-epoch speed-up at equal cores (one core): the whole analysis
   of chunks with and without shared-epoch periodograms, and the
   periodogram stage alone (batched calls against one call per star);
3. the per-star analysis time on one core against the bare periodogram
   library call (nifty-ls) on the same star.

Targets (DESIGN.md): 30 stars/s or more with two workers at ~700 points and
100,000 frequencies; shared epochs 1.4x or more at equal cores.

    python benchmarks/bench_batch.py [--field-stars N] [--demo-stars N]
"""

from __future__ import annotations

import os

# one BLAS/OpenMP thread per process, here as in the workers: the per-core figures
for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.batch import analyse_chunk, analyse_ledger, shared_epoch_groups  # noqa: E402
from phasewise.core.clean import clean  # noqa: E402
from phasewise.core.ledger import Ledger  # noqa: E402
from phasewise.core.periodogram import (  # noqa: E402
    PeriodogramSettings,
    compute_periodogram,
    grid_parameters,
    shared_epoch_periodograms,
)
from phasewise.core.synthetic import synthetic_field  # noqa: E402

N_FREQUENCIES = 100_000


def settings_for(baseline: float, n_frequencies: int = N_FREQUENCIES) -> AnalysisSettings:
    """Default analysis with a grid of ``n_frequencies`` (oversampling 5 over the baseline)."""
    df = 1.0 / (5.0 * baseline)
    fmin = 1.0 / baseline
    fmax = fmin + df * (n_frequencies - 0.5)
    return AnalysisSettings(periodogram=PeriodogramSettings(fmax=fmax))


def make_ledger(folder: Path, name: str, lightcurves) -> Path:
    path = folder / f"{name}.ledger.sqlite"
    with Ledger.create(path) as ledger:
        ledger.add_stars(lightcurves)
    return path


def rate_of(path: Path, settings, workers: int, shared: bool = False) -> tuple[float, float, int]:
    """Stars/s of a full run (start-up included, as a user sees it) and once running.

    The second figure counts from the first chunk written to the last, so
    that the workers' start-up (imports, about a second) is left out.
    """
    marks: list[tuple[float, int]] = []
    summary = analyse_ledger(
        path,
        settings,
        workers=workers,
        only="all",
        shared_epochs=shared,
        progress=lambda p: marks.append((p.elapsed, p.done)),
    )
    done = [(t, n) for t, n in marks if n > 0]
    steady = summary.rate
    if len(done) >= 2 and done[-1][0] > done[0][0]:
        steady = (done[-1][1] - done[0][1]) / (done[-1][0] - done[0][0])
    return summary.rate, steady, summary.shared_epoch_stars


CHUNK = 32


def whole_analysis_both_ways(lcs, settings) -> tuple[float, float]:
    """Seconds per star of analyse_chunk with and without shared epochs, one process.

    Each chunk runs both ways one after the other, so that the load of a
    shared machine weighs on both alike.
    """
    spent = {True: 0.0, False: 0.0}
    for start in range(0, len(lcs), CHUNK):
        chunk = lcs[start : start + CHUNK]
        for shared in (True, False) if start % (2 * CHUNK) else (False, True):
            began = time.perf_counter()
            analyse_chunk(chunk, settings, shared_epochs=shared)
            spent[shared] += time.perf_counter() - began
    return spent[True] / len(lcs), spent[False] / len(lcs)


def demo_lightcurves(n: int | None):
    from phasewise.core.io import open_photometry

    source = open_photometry(ROOT / "demo_data" / "caldera_survey.csv")
    lcs = list(source.stars())
    return lcs[:n] if n else lcs


def periodogram_stage(lcs, settings, repeats: int = 3) -> tuple[float, float, float, int]:
    """Seconds per star of the periodogram stage three ways (one process).

    * one nifty-ls call per star (the library used as it comes: two transform
      plans made and dropped per call; what this project did before it kept
      its plans);
    * one call of our kernel per star (plans reused between calls);
    * shared-epoch batches of our kernel.

    Chunk by chunk, all ways in turn, best of ``repeats`` each: the load of
    a shared machine changes by the second.
    """
    import nifty_ls

    spent = {"library": 0.0, "alone": 0.0, "batched": 0.0}
    n_batched = 0
    for start in range(0, len(lcs), CHUNK):
        chunk = lcs[start : start + CHUNK]
        cleaned = [clean(lc, settings.clean)[0] for lc in chunk]
        arrays = []
        for lc in cleaned:
            t, m, e = lc.arrays()
            arrays.append((t - 0.5 * (t[0] + t[-1]), m, e))
        grids = [grid_parameters(a[0], settings.periodogram) for a in arrays]
        best = {key: [] for key in spent}
        for _ in range(repeats):
            began = time.perf_counter()
            for (t, m, e), g in zip(arrays, grids, strict=True):
                nifty_ls.lombscargle(t, m, e, fmin=g.fmin, fmax=g.fmax, Nf=g.n, nthreads=1)
            best["library"].append(time.perf_counter() - began)
            began = time.perf_counter()
            for lc in cleaned:
                compute_periodogram(lc, settings.periodogram)
            best["alone"].append(time.perf_counter() - began)
            began = time.perf_counter()
            groups = shared_epoch_groups(chunk, settings)  # the grouping work counts
            for g in groups:
                shared_epoch_periodograms(
                    g.time, g.mag, g.mag_err, settings.periodogram, frequency=g.frequency
                )
            best["batched"].append(time.perf_counter() - began)
        n_in = sum(len(g.members) for g in groups)
        spent["library"] += min(best["library"])
        spent["alone"] += min(best["alone"])
        # stars left out of the batches would be computed alone: add their share
        spent["batched"] += min(best["batched"]) + min(best["alone"]) * (len(chunk) - n_in) / len(
            chunk
        )
        n_batched += n_in
    n = len(lcs)
    return spent["library"] / n, spent["alone"] / n, spent["batched"] / n, n_batched


def per_star_against_bare(lcs, settings, n: int = 20) -> tuple[float, float]:
    """Median seconds of analyse() and of the bare nifty-ls call, same stars, one core."""
    import nifty_ls

    analyse(lcs[0], settings)  # warm caches and imports
    full, bare = [], []
    for lc in lcs[:n]:
        start = time.perf_counter()
        analyse(lc, settings)
        full.append(time.perf_counter() - start)
        t, m, e = lc.arrays()
        grid = settings.periodogram
        baseline = t.max() - t.min()
        fmin, df = 1.0 / baseline, 1.0 / (grid.oversampling * baseline)
        start = time.perf_counter()
        nifty_ls.lombscargle(
            t - t.mean(),
            m,
            e,
            fmin=fmin,
            fmax=fmin + df * (N_FREQUENCIES - 1),
            Nf=N_FREQUENCIES,
            nthreads=1,
        )
        bare.append(time.perf_counter() - start)
    return statistics.median(full), statistics.median(bare)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--field-stars", type=int, default=10_000)
    parser.add_argument("--demo-stars", type=int, default=None, help="default: all 300")
    parser.add_argument("--epochs", type=int, default=700)
    parser.add_argument(
        "--compare-stars", type=int, default=200, help="for the one-core comparisons"
    )
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.field_stars, args.demo_stars, args.epochs, args.compare_stars = 8, 4, 120, 4
    print(f"cores available: {len(os.sched_getaffinity(0))}; load average {os.getloadavg()[0]:.1f}")
    print("(a shared machine: other jobs run beside this one; figures are of this run)\n")

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        demo = demo_lightcurves(args.demo_stars)
        demo_settings = AnalysisSettings()
        demo_path = make_ledger(folder, "demo", demo)
        print(
            f"demo survey: {len(demo)} stars, median {int(np.median([lc.n_points for lc in demo]))} points, V and I"
        )
        for workers in (1, 2):
            rate, steady, _ = rate_of(demo_path, demo_settings, workers)
            print(f"  {workers} worker(s): {rate:6.2f} stars/s ({steady:.2f} once running)")

        field = synthetic_field(args.field_stars, n_epochs=args.epochs, seed=7)
        lcs = field.lightcurves()
        baseline = float(np.nanmax(field.time) - np.nanmin(field.time))
        settings = settings_for(baseline)
        n_grid = compute_periodogram(
            clean(lcs[0], settings.clean)[0], settings.periodogram
        ).n_frequencies
        field_path = make_ledger(folder, "field", lcs)
        print(
            f"\nsynthetic field: {len(lcs)} stars sharing {args.epochs} epochs "
            f"(each misses up to 10%), {n_grid:,} frequencies"
        )
        rates = {}
        for workers in (1, 2):
            rate, rates[workers], shared_n = rate_of(field_path, settings, workers)
            print(
                f"  {workers} worker(s): {rate:6.2f} stars/s ({rates[workers]:.2f} once running; "
                f"{shared_n} stars through shared-epoch batches)"
            )
        print(f"  two workers against one: {rates[2] / rates[1]:.2f}x; target 30 stars/s with two")

        sample = lcs[: min(args.compare_stars, len(lcs))]
        with_shared, without = whole_analysis_both_ways(sample, settings)
        print(
            f"\nwhole analysis, one core, {len(sample)} stars, chunks of {CHUNK} run both ways in "
            f"turn: {without * 1e3:.0f} ms/star star by star, {with_shared * 1e3:.0f} ms/star "
            f"with shared epochs: {without / with_shared:.2f}x (target 1.4x)"
        )

        library, alone, batched, n = periodogram_stage(sample, settings)
        print(
            f"periodogram stage, one process, {len(sample)} stars ({n} batched), chunks in turn: "
            f"{library * 1e3:.1f} ms/star with one nifty-ls call per star, "
            f"{alone * 1e3:.1f} ms/star with our kernel per star (plans kept), "
            f"{batched * 1e3:.1f} ms/star in shared-epoch batches: "
            f"{library / batched:.2f}x against the library per star, "
            f"{alone / batched:.2f}x against our kernel per star (target 1.4x)"
        )
        full, bare = per_star_against_bare(lcs, settings)
        print(
            f"per-star analysis on one core: median {full * 1e3:.0f} ms; bare nifty-ls call "
            f"{bare * 1e3:.1f} ms ({full / bare:.1f}x the bare periodogram; target 60 ms)"
        )


if __name__ == "__main__":  # the pool's spawned workers import this file too
    main()
