"""Ledger at survey scale: 10,000 stars x 700 points.

Prints, from one run: import time, open time (with each integrity check),
file size, time to list the star rows for the GUI's list, one star's light
curve and result (a star switch), a batch of results written, and a verdict
committed.  Usage::

    python benchmarks/bench_ledger.py [--stars 10000] [--points 700] [--keep DIR]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.ledger import Ledger  # noqa: E402
from phasewise.core.lightcurve import LightCurve, StarMeta  # noqa: E402


def synthetic_field(n_stars: int, n_points: int, seed: int = 1):
    """An invented field: shared epochs, two bands, sinusoids with noise."""
    rng = np.random.default_rng(seed)
    time_ = np.sort(rng.uniform(2460000.0, 2460400.0, n_points))
    band = np.where(np.arange(n_points) % 3 == 0, "I", "V")
    for i in range(n_stars):
        period = rng.uniform(0.2, 1.0)
        mag = 15 + 0.4 * np.sin(2 * np.pi * time_ / period) + rng.normal(0, 0.02, n_points)
        yield LightCurve(
            f"FLD-{i:05d}",
            time_,
            mag,
            np.full(n_points, 0.02),
            band=band,
            time_scale="HJD",
            meta=StarMeta(ra=210.0 + i * 1e-4, dec=-45.0),
        )


def result_dict(i: int) -> dict:
    period = 0.3 + (i % 70) / 100
    return {
        "status": "ok",
        "period": period,
        "period_err": 1e-6,
        "amplitude": 0.8,
        "fap": 1e-12,
        "flags": [],
        "mean_mag_by_band": {"V": 15.0, "I": 14.5},
        "candidates": [{"frequency": 1 / period, "period": period, "power": 0.9}] * 5,
        "fourier": {"order": 4, "amplitudes": [0.3, 0.1, 0.05, 0.02], "R21": 0.33},
        "suggestions": [{"class": "RRab", "score": 0.9, "reasons": ["R21"], "period": period}],
    }


def timed(func, repeat=1):
    times = []
    value = None
    for _ in range(repeat):
        start = time.perf_counter()
        value = func()
        times.append(time.perf_counter() - start)
    return value, statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=10_000)
    parser.add_argument("--points", type=int, default=700)
    parser.add_argument("--keep", type=Path, help="folder to keep the ledger in")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.stars, args.points = 20, 30
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench_ledger_"))
    path = folder / "bench.ledger.sqlite"
    for suffix in ("", "-wal", "-shm"):
        Path(f"{path}{suffix}").unlink(missing_ok=True)
    n = args.stars
    print(f"ledger benchmark: {n} stars x {args.points} points -> {path}")

    stars, t_make = timed(lambda: list(synthetic_field(n, args.points)))
    print(f"  make light curves in memory   {t_make:8.2f} s (not ledger time)")
    with Ledger.create(path) as ledger:
        _, t_import = timed(lambda: ledger.add_stars(stars, source_file="field.csv"))
    print(f"  import (one transaction)      {t_import:8.2f} s  ({n / t_import:,.0f} stars/s)")
    size = path.stat().st_size
    raw = n * args.points * 3 * 8
    print(
        f"  file size                     {size / 1e6:8.1f} MB  ({size / raw:.2f} x the raw float64)"
    )

    for check in ("none", "quick", "full"):
        ledger, t_open = timed(lambda c=check: Ledger.open(path, check=c))
        ledger.close()
        print(f"  open, check={check:5s}            {t_open:8.3f} s")

    with Ledger.open(path) as ledger:
        settings_hash = "benchhash0000001"
        ledger.set_analysis_settings({"bench": True}, settings_hash)
        ids = ledger.star_ids()
        batch = 500
        start = time.perf_counter()
        for k in range(0, n, batch):
            ledger.store_results(
                [(s, settings_hash, result_dict(k + j)) for j, s in enumerate(ids[k : k + batch])]
            )
        t_results = time.perf_counter() - start
        print(
            f"  store {n} results ({batch}/batch) {t_results:6.2f} s  ({n / t_results:,.0f} results/s)"
        )
        rows, t_rows = timed(ledger.star_rows, repeat=5)
        assert len(rows) == n
        print(f"  star_rows() for the list      {t_rows * 1e3:8.1f} ms (median of 5)")
        pick = [ids[i] for i in np.random.default_rng(2).integers(0, n, 50)]
        _, t_switch = timed(lambda: [(ledger.lightcurve(s), ledger.result(s)) for s in pick])
        print(f"  star switch (curve + result)  {t_switch / len(pick) * 1e3:8.2f} ms per star")
        _, t_verdict = timed(
            lambda: [ledger.set_verdict(s, "confirmed", class_code="RRab") for s in pick[:20]]
        )
        print(f"  verdict committed             {t_verdict / 20 * 1e3:8.2f} ms per verdict")
        items = [(s, "confirmed", "RRab", 0.5, None) for s in ids]
        _, t_bulk = timed(lambda: ledger.set_verdicts(items, label="bulk confirm"))
        print(f"  bulk confirm {n} (one action)  {t_bulk:7.2f} s")
        from phasewise.core.export import write_catalogue

        for suffix in (".fits", ".vot"):
            target = folder / f"bench_vetted{suffix}"
            _, t_export = timed(lambda t=target: write_catalogue(ledger, t))
            print(f"  export {n} stars as {suffix:6s}    {t_export:8.2f} s")
            target.unlink()
        _, t_undo = timed(ledger.undo)
        print(f"  undo of the bulk confirm      {t_undo:8.2f} s")
        _, t_needing = timed(lambda: ledger.stars_needing_analysis(settings_hash, "stale"))
        print(f"  stars_needing_analysis        {t_needing * 1e3:8.1f} ms")
        _, t_sum = timed(ledger.checksum)
        print(f"  content checksum (export)     {t_sum:8.2f} s")

    def first_star():
        with Ledger.open(path, readonly=True) as reader:
            reader.star_rows()
            return reader.lightcurve(reader.star_ids()[0]), reader.result(reader.star_ids()[0])

    _, t_first = timed(first_star)
    print(f"  open + list + first star      {t_first:8.3f} s (read-only, quick check)")
    print(f"  final file size               {path.stat().st_size / 1e6:8.1f} MB")
    if not args.keep:
        for suffix in ("", "-wal", "-shm"):
            Path(f"{path}{suffix}").unlink(missing_ok=True)


if __name__ == "__main__":
    main()
