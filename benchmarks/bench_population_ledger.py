"""The population view's read of a survey-size ledger: time and peak memory.

``core.diagrams.point_table`` reads the diagram numbers of every star as
columns (``Ledger.point_columns``: SQLite's JSON functions pick them out of
the small records kept beside each result, one JSON decode per chunk).
This prints, measured in fresh child processes one after the other in one
run: the floor (imports, open, star ids); the former read of the same
records (``Ledger.point_rows``, every record decoded in Python and a
``StarPoint`` per star, as the view read them until 2026-12-03); the
columnar read; the columnar read with the six diagrams and the outlier rule
(what the view computes before it draws); the field summary of the table
(computed afterwards in its own worker); and the full read (``star_point``,
star by star) of a sample, scaled to the ledger's size.  Target (issue
"survey scale"): the population's read at 100,000 stars within 3 s and 500 MB.

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


def former_star_points(ledger) -> list:
    """The population read before the columns: every record decoded, a point per star."""
    from phasewise.core import diagrams as dg

    decided = ("confirmed", "relabelled")
    out = []
    for row in ledger.point_rows():
        final = row.final_point if row.status in decided else None
        if (
            (row.status in decided and row.has_final and final is None)
            or (row.analysed and row.result_point is None)
            or (row.period is not None and (final is None or final.get("period") is None))
        ):
            out.append(dg.star_point(ledger, row.star_id))
            continue
        record = row.result_point if row.analysed else dg.result_point_record(None)
        out.append(
            dg.StarPoint.from_record(
                row.star_id,
                record,
                verdict_class=row.class_code,
                status=row.status,
                final_record=final,
                owned=row.analysed,
            )
        )
    return out


def diagrams_of(table) -> int:
    """The six diagrams and the outlier rule, as the view computes them before drawing."""
    from phasewise.core import diagrams as dg

    bands = dg.available_bands(table)
    band = "V" if "V" in bands else (bands[0] if bands else "V")
    shown = [
        dg.period_amplitude(table, band),
        dg.phi31_logp(table),
        dg.r21_logp(table),
        dg.period_ratio(table),
        dg.period_luminosity(table, band),
        dg.colour_magnitude(table),
    ]
    dg.find_outliers(shown)
    return sum(len(d) for d in shown)


def child(path: str, what: str, sample: int) -> None:
    """In a fresh process: one read, its wall and CPU time and peak memory."""
    from phasewise.core import diagrams as dg

    start, cpu = time.perf_counter(), time.process_time()
    with Ledger.open(path, readonly=True) as ledger:
        extra = None
        if what == "summary":
            table = dg.point_table(ledger)  # not timed: the summary's own cost
            start, cpu = time.perf_counter(), time.process_time()
        if what == "floor":
            n = len(ledger.star_ids())
        elif what == "former":
            n = len(former_star_points(ledger))
        elif what == "columns":
            n = len(dg.point_table(ledger))
        elif what == "drawn":
            table = dg.point_table(ledger)
            n, extra = len(table), diagrams_of(table)
        elif what == "summary":
            n, extra = len(table), len(dg.field_state(table).counts)
        else:
            ids = ledger.star_ids()[:sample]
            n = len([dg.star_point(ledger, s) for s in ids])
        seconds, cpu = time.perf_counter() - start, time.process_time() - cpu
    print(
        json.dumps(
            {
                "n": n,
                "extra": extra,
                "seconds": seconds,
                "cpu": cpu,
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
        runs = [
            ("former: records, a point each", run_child(path, "former", 0)),
            ("columns (point_table)", run_child(path, "columns", 0)),
            ("columns + diagrams + outliers", run_child(path, "drawn", 0)),
            ("field summary of the table", run_child(path, "summary", 0)),
        ]
        full = run_child(path, "full", args.sample)
        n = runs[1][1]["n"]
        scaled = full["cpu"] / max(full["n"], 1) * n
        print("  (time from the open, the summary's from the table; peak of the whole child)")
        print(f"  {'read':32s} {'stars':>7s} {'wall s':>8s} {'CPU s':>8s} {'peak MB':>8s}")
        for name, got in (("floor: open, star ids", floor), *runs):
            print(
                f"  {name:32s} {got['n']:7d} {got['seconds']:8.2f} {got['cpu']:8.2f} "
                f"{got['peak_mb']:8.0f}"
            )
        print(
            f"  {'star_point, star by star':32s} {full['n']:7d} {full['seconds']:8.2f} "
            f"{full['cpu']:8.2f} {full['peak_mb']:8.0f}   (x{n / max(full['n'], 1):.0f}: "
            f"{scaled:.1f} s CPU for all)"
        )
        former, columns = runs[0][1], runs[1][1]
        print(
            f"  columns / former, CPU: {columns['cpu'] / max(former['cpu'], 1e-9):.3f}; "
            f"wall: {columns['seconds'] / max(former['seconds'], 1e-9):.3f}; peak above the "
            f"floor {columns['peak_mb'] - floor['peak_mb']:.0f} MB against "
            f"{former['peak_mb'] - floor['peak_mb']:.0f} MB"
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
