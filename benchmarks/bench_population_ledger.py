"""The population view's read of a survey-size ledger: time and peak memory.

``core.diagrams.star_points`` reads every star's diagram records with one
query (``Ledger.point_rows``); before schema 4 it decoded every full
result.  This prints, measured in fresh child processes in one run: the
floor (imports, open, star ids), the fast read of every star, and the full
read (``star_point``, star by star) of a sample, scaled to the ledger's size.
Target (issue "survey scale"): the population's read at 100,000 stars within
3 s and 500 MB.

The ledger is built as ``bench_export.py`` builds its own (real analysis
results of seeded stars, nine in ten confirmed with final numbers), or given
with ``--ledger`` (copied; an older schema is migrated in the copy, and the
migration is timed).  Usage::

    python benchmarks/bench_population_ledger.py [--stars 100000] [--ledger PATH]
    python benchmarks/bench_population_ledger.py --smoke
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench_export import _peak_mb, build, child_json  # noqa: E402

from phasewise.core.ledger import Ledger  # noqa: E402


def child(path: str, what: str, sample: int) -> None:
    """In a fresh process: one read, its wall and CPU time and peak memory."""
    from phasewise.core import diagrams as dg

    start, cpu = time.perf_counter(), time.process_time()
    with Ledger.open(path, readonly=True) as ledger:
        if what == "floor":
            n = len(ledger.star_ids())
        elif what == "fast":
            n = len(dg.star_points(ledger))
        else:
            ids = ledger.star_ids()[:sample]
            n = len([dg.star_point(ledger, s) for s in ids])
    print(
        json.dumps(
            {
                "n": n,
                "seconds": time.perf_counter() - start,
                "cpu": time.process_time() - cpu,
                "peak_mb": _peak_mb(resource.getrusage(resource.RUSAGE_SELF)),
            }
        )
    )


def run_child(path: Path, what: str, sample: int) -> dict:
    return child_json(__file__, path, what, sample)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=100_000)
    parser.add_argument("--points", type=int, default=100)
    parser.add_argument("--pool", type=int, default=60, help="seeded stars analysed")
    parser.add_argument("--sample", type=int, default=2000, help="stars of the full read")
    parser.add_argument("--ledger", type=Path, help="an existing ledger (copied)")
    parser.add_argument("--smoke", action="store_true", help="a tiny run")
    parser.add_argument("--child", nargs=3, metavar=("LEDGER", "WHAT", "SAMPLE"), help="internal")
    args = parser.parse_args()
    if args.child:
        child(args.child[0], args.child[1], int(args.child[2]))
        return
    if args.smoke:
        args.stars, args.points, args.pool, args.sample = 200, 30, 12, 50
    folder = Path(tempfile.mkdtemp(prefix="bench_population_ledger_"))
    path = folder / "bench.ledger.sqlite"
    print("population read of a ledger")
    print(
        "  load average (1, 5, 15 min) at the start: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg())
    )
    try:
        if args.ledger:
            shutil.copyfile(args.ledger, path)
            start, cpu = time.perf_counter(), time.process_time()
            Ledger.open(path).close()  # migrates an older schema
            print(
                f"  open for writing (migration, if any)  {time.perf_counter() - start:7.1f} s "
                f"wall {time.process_time() - cpu:7.1f} s CPU"
            )
        else:
            build(path, args.stars, args.points, args.pool)
        floor = run_child(path, "floor", 0)
        fast = run_child(path, "fast", 0)
        full = run_child(path, "full", args.sample)
        n = fast["n"]
        scaled = full["cpu"] / max(full["n"], 1) * n
        print(f"  {'read':28s} {'stars':>7s} {'wall s':>8s} {'CPU s':>8s} {'peak MB':>8s}")
        for name, got in (("floor: open, star ids", floor), ("star_points (records)", fast)):
            print(
                f"  {name:28s} {got['n']:7d} {got['seconds']:8.2f} {got['cpu']:8.2f} "
                f"{got['peak_mb']:8.0f}"
            )
        print(
            f"  {'star_point, star by star':28s} {full['n']:7d} {full['seconds']:8.2f} "
            f"{full['cpu']:8.2f} {full['peak_mb']:8.0f}   (x{n / max(full['n'], 1):.0f}: "
            f"{scaled:.1f} s CPU for all)"
        )
        print(
            f"  records / full read, CPU per star: {fast['cpu'] / n / (full['cpu'] / full['n']):.3f}"
            f"; peak above the floor {fast['peak_mb'] - floor['peak_mb']:.0f} MB"
        )
        print(
            "  load average (1, 5, 15 min) at the end: {:.2f} {:.2f} {:.2f}".format(
                *os.getloadavg()
            )
        )
    finally:
        shutil.rmtree(folder)


if __name__ == "__main__":
    main()
