"""Ledger at survey scale: 100,000 stars x 100 points, analysed.

Prints, from one run: import time, file size against the raw photometry
bytes (time, magnitude and error as float64: the target is 3x or less once
every star has a result), time to open and to list the star rows (first
``star_rows()`` on a fresh read-only open), a star switch, a verdict, a
bulk action on every star, the undo of one verdict recorded after that bulk
action (target 2 ms or less: undo must not grow with the history), the
content checksum the export reads, and ``check()``.

The stored results are real: the first stars are analysed with
``core.analysis.analyse`` and their result dicts are stored, in turn, for all
stars (each record is compressed on its own, so sizes are those of real
results).  Usage::

    python benchmarks/bench_ledger.py [--stars 100000] [--points 100] [--keep DIR]
    python benchmarks/bench_ledger.py --smoke     # 300 stars, a quick run
    python benchmarks/bench_ledger.py --undo-of PATH   # only the undo, on a copy of PATH
"""

from __future__ import annotations

import argparse
import shutil
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
            f"FLD-{i:06d}",
            time_,
            mag,
            np.full(n_points, 0.02),
            band=band,
            time_scale="HJD",
            meta=StarMeta(ra=210.0 + i * 1e-4, dec=-45.0),
        )


def real_results(stars: list[LightCurve], n: int) -> list[dict]:
    """Results of the real analysis of the first ``n`` stars."""
    from phasewise.core.analysis import AnalysisSettings, analyse

    settings = AnalysisSettings()
    return [analyse(lc, settings).to_dict() for lc in stars[:n]]


def timed(func, repeat=1):
    times = []
    value = None
    for _ in range(repeat):
        start = time.perf_counter()
        value = func()
        times.append(time.perf_counter() - start)
    return value, statistics.median(times)


def measure_undo(ledger: Ledger, pick: list[str], repeat: int = 40) -> None:
    """Undo of one verdict (recorded after the bulk action), and a commit alone, interleaved.

    Wall time includes the commit's fsync (``synchronous=FULL``); CPU time is
    the undo's own work (queries, JSON, seals), which the disk does not blur.
    """
    undo_times, undo_cpu, commit_times, commit_cpu = [], [], [], []
    for k in range(repeat):
        ledger.set_verdict(pick[k % len(pick)], "rejected", note="blend")
        start, cpu = time.perf_counter(), time.process_time()
        action = ledger.undo()
        undo_times.append(time.perf_counter() - start)
        undo_cpu.append(time.process_time() - cpu)
        assert action is not None and len(action.entries) == 1
        start, cpu = time.perf_counter(), time.process_time()
        with ledger._write("bench"):  # a commit alone: what durability costs on this disk
            ledger._put_meta("bench", str(k))
        commit_times.append(time.perf_counter() - start)
        commit_cpu.append(time.process_time() - cpu)
    history = len(ledger.history())
    t_undo, t_commit = statistics.median(undo_times), statistics.median(commit_times)
    c_undo, c_commit = statistics.median(undo_cpu), statistics.median(commit_cpu)
    print(
        f"  undo of one verdict after the bulk action {t_undo * 1e3:6.2f} ms "
        f"(median of {repeat}; {history:,} history rows; target <= 2 ms)"
    )
    print(
        f"    of which the commit's fsync      {t_commit * 1e3:8.2f} ms (one committed write "
        f"alone, median); undo's own work {max(0.0, t_undo - t_commit) * 1e3:.2f} ms"
    )
    print(
        f"    CPU: undo {c_undo * 1e3:.2f} ms, a committed write alone {c_commit * 1e3:.2f} ms "
        f"(medians)"
    )


def undo_of(source: Path) -> None:
    """Only the undo measurement, on a copy of an existing ledger (its last action a bulk one)."""
    folder = Path(tempfile.mkdtemp(prefix="bench_ledger_undo_"))
    path = folder / "copy.ledger.sqlite"
    try:
        shutil.copyfile(source, path)
        with Ledger.open(path) as ledger:
            print(f"undo on a copy of {source} ({ledger.n_stars:,} stars)")
            print(f"  last action: {ledger.undo_label()!r}")
            ids = ledger.star_ids()
            pick = [ids[i] for i in np.random.default_rng(2).integers(0, len(ids), 50)]
            measure_undo(ledger, pick)
    finally:
        shutil.rmtree(folder)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=100_000)
    parser.add_argument("--points", type=int, default=100)
    parser.add_argument("--analysed", type=int, default=40, help="stars really analysed")
    parser.add_argument("--keep", type=Path, help="folder to keep the ledger in")
    parser.add_argument("--smoke", action="store_true", help="300 stars: a quick run")
    parser.add_argument(
        "--undo-of", type=Path, help="only the undo, on a copy of this ledger (never written)"
    )
    args = parser.parse_args()
    if args.undo_of:
        undo_of(args.undo_of)
        return
    if args.smoke:
        args.stars, args.analysed = 300, 4
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench_ledger_"))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "bench.ledger.sqlite"
    for suffix in ("", "-wal", "-shm"):
        Path(f"{path}{suffix}").unlink(missing_ok=True)
    n = args.stars
    print(f"ledger benchmark: {n:,} stars x {args.points} points -> {path}")

    stars, t_make = timed(lambda: list(synthetic_field(n, args.points)))
    print(f"  make light curves in memory      {t_make:8.2f} s (not ledger time)")
    results, t_analyse = timed(lambda: real_results(stars, args.analysed))
    print(f"  analyse {args.analysed} stars for real results {t_analyse:6.2f} s (not ledger time)")
    raw = n * args.points * 3 * 8
    with Ledger.create(path) as ledger:
        _, t_import = timed(lambda: ledger.add_stars(stars, source_file="field.csv"))
        stars.clear()  # free the memory before the results
        print(
            f"  import (one transaction)         {t_import:8.2f} s  ({n / t_import:,.0f} stars/s)"
        )
        settings_hash = results[0]["settings_hash"]
        ledger.set_analysis_settings({"bench": True}, settings_hash)
        ids = ledger.star_ids()
        batch = 500
        start = time.perf_counter()
        for k in range(0, n, batch):
            chunk = ids[k : k + batch]
            ledger.store_results(
                [
                    (s, settings_hash, {**results[(k + j) % len(results)], "star_id": s})
                    for j, s in enumerate(chunk)
                ]
            )
        t_results = time.perf_counter() - start
        print(
            f"  store {n:,} results ({batch}/batch)  {t_results:7.2f} s  "
            f"({n / t_results:,.0f} results/s)"
        )
        items = [(s, "confirmed", "RRab", 0.5, None) for s in ids]
        _, t_bulk = timed(lambda: ledger.set_verdicts(items, label="bulk confirm"))
        print(f"  bulk confirm of {n:,} (one action) {t_bulk:7.2f} s")
    size = sum(
        Path(f"{path}{s}").stat().st_size for s in ("", "-wal") if Path(f"{path}{s}").exists()
    )
    print(
        f"  file size, analysed + bulk action {size / 1e6:7.1f} MB  = {size / raw:.2f} x the raw "
        f"photometry ({raw / 1e6:.1f} MB float64; target <= 3x)"
    )

    for check in ("none", "quick"):
        ledger, t_open = timed(lambda c=check: Ledger.open(path, readonly=True, check=c))
        ledger.close()
        print(f"  open read-only, check={check:5s}     {t_open * 1e3:8.1f} ms")

    def first_rows():
        with Ledger.open(path, readonly=True) as reader:
            return reader.star_rows()

    rows, t_first_rows = timed(first_rows)
    assert len(rows) == n
    print(f"  open + first star_rows()         {t_first_rows * 1e3:8.1f} ms")

    with Ledger.open(path) as ledger:
        rows, t_rows = timed(ledger.star_rows, repeat=3)
        print(f"  star_rows() again                {t_rows * 1e3:8.1f} ms (median of 3)")
        pick = [ids[i] for i in np.random.default_rng(2).integers(0, n, 50)]
        _, t_switch = timed(lambda: [(ledger.lightcurve(s), ledger.result(s)) for s in pick])
        print(f"  star switch (curve + result)     {t_switch / len(pick) * 1e3:8.2f} ms per star")
        _, t_verdict = timed(
            lambda: [ledger.set_verdict(s, "deferred", note="look again") for s in pick[:20]]
        )
        print(f"  verdict committed                {t_verdict / 20 * 1e3:8.2f} ms per verdict")
        measure_undo(ledger, pick)
        while ledger.undo_label() not in (None, "bulk confirm"):
            ledger.undo()
        _, t_bulk_undo = timed(ledger.undo)
        print(f"  undo of the bulk action itself   {t_bulk_undo:8.2f} s ({n:,} verdicts restored)")
        _, t_sum = timed(ledger.checksum, repeat=5)
        print(f"  content checksum (export)        {t_sum * 1e3:8.2f} ms (kept with every write)")
        problems, t_check = timed(ledger.check)
        print(f"  check(): SQLite + every seal     {t_check:8.2f} s ({len(problems)} problems)")
    print(f"  final file size                  {path.stat().st_size / 1e6:8.1f} MB")
    if not args.keep:
        for suffix in ("", "-wal", "-shm"):
            Path(f"{path}{suffix}").unlink(missing_ok=True)


if __name__ == "__main__":
    main()
