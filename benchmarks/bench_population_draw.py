"""The population view's drawing of a survey-size field: set_points and one paint.

Times, in one process and offscreen, ``PopulationView.set_points`` (the six
diagrams and the outlier rule from ``core.diagrams``, then the plots'
``setData``) and one paint of the whole view (``grab()``), at 10,000 and
100,000 stars.  Wall time and the process's CPU time are printed for each
step, and the core part (diagrams + outliers, computed alone) beside them so
that the drawing's own share shows.  The field summary, computed in a worker
thread, is left out (``bench_population.py`` times it).

The points are the real analysis results of ``--pool`` seeded stars
(``core.synthetic.make_survey`` + ``core.analysis.analyse``) replicated with
new ids, as the columns (``core.diagrams.PointTable``) the view gets from
the ledger's read: what is measured is the drawing, not the read.  Target (issue 17):
the population view at 100,000 stars within 3 s and 500 MB.  Usage::

    python benchmarks/bench_population_draw.py [--stars 10000 100000] [--pool 40]
    python benchmarks/bench_population_draw.py --smoke
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import time
from dataclasses import replace
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core import diagrams as dg  # noqa: E402
from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.synthetic import make_survey  # noqa: E402


def seeded_points(pool: int) -> list[dg.StarPoint]:
    """StarPoints of ``pool`` seeded stars of every class, from their real analysis."""
    survey = make_survey(pool, seed=2026)
    settings = AnalysisSettings()
    points = []
    for lc in survey.lightcurves:
        # as stored in a ledger: the class drawn is the top suggestion's
        points.append(dg.StarPoint.from_result(lc.star_id, analyse(lc, settings).to_dict()))
    return points


def replicate(points: list[dg.StarPoint], n: int) -> list[dg.StarPoint]:
    return [replace(points[i % len(points)], star_id=f"DRW-{i:06d}") for i in range(n)]


def clock() -> tuple[float, float]:
    return time.perf_counter(), time.process_time()


def since(start: tuple[float, float]) -> tuple[float, float]:
    wall, cpu = clock()
    return wall - start[0], cpu - start[1]


def core_only(points: dg.PointTable) -> tuple[float, float]:
    """The diagrams and the outlier rule as the view computes them (no drawing)."""
    start = clock()
    diagrams = [
        dg.period_amplitude(points, "V"),
        dg.phi31_logp(points),
        dg.r21_logp(points),
        dg.period_ratio(points),
        dg.period_luminosity(points, "V"),
        dg.colour_magnitude(points, "V", "I"),
    ]
    dg.find_outliers(diagrams)
    return since(start)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, nargs="+", default=[10_000, 100_000])
    parser.add_argument("--pool", type=int, default=40, help="seeded stars analysed")
    parser.add_argument("--smoke", action="store_true", help="a tiny run")
    args = parser.parse_args()
    if args.smoke:
        args.stars, args.pool = [300, 3000], 8

    from PySide6 import QtWidgets

    from phasewise import app  # noqa: F401  (guards None against the PySide6 6.12 leak)
    from phasewise.app.population import PopulationView

    start = time.perf_counter()
    pool = seeded_points(args.pool)
    codes = sorted({p.class_code for p in pool})
    print(f"analysed {len(pool)} seeded stars in {time.perf_counter() - start:.1f} s: {codes}")

    qt = QtWidgets.QApplication.instance() or QtWidgets.QApplication([])
    rows = []
    for n in args.stars:
        # the columns the view gets from the ledger's read (point_table)
        points = dg.PointTable.from_points(replicate(pool, n))
        core = core_only(points)
        view = PopulationView()
        view._start_summary = lambda *a, **k: None  # the summary is not the drawing
        view.resize(1500, 850)
        view.show()
        qt.processEvents()
        start = clock()
        view.set_points(points)
        set_points = since(start)
        start = clock()
        view.grab()
        paint = since(start)
        drawn = sum(len(p.shown_star_ids()) for p in view.plots.values())
        view.close()
        view.deleteLater()
        qt.processEvents()
        rows.append((n, core, set_points, paint, drawn))
        print(
            f"{n:>7} stars ({drawn} points drawn): core diagrams+outliers "
            f"{core[0]:6.2f} s wall {core[1]:6.2f} s CPU | set_points {set_points[0]:6.2f} s "
            f"wall {set_points[1]:6.2f} s CPU | paint {paint[0]:6.2f} s wall "
            f"{paint[1]:6.2f} s CPU | set_points + paint {set_points[0] + paint[0]:6.2f} s wall",
            flush=True,
        )
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak memory of the process {peak:.0f} MB")
    if len(rows) > 1:
        (n1, _, s1, p1, _), (n2, _, s2, p2, _) = rows[0], rows[-1]
        ratio = (s2[0] + p2[0]) / max(s1[0] + p1[0], 1e-9)
        print(f"{n2 / n1:.0f}x stars: set_points + paint {ratio:.1f}x ({n2 / n1:.0f}x = linear)")


if __name__ == "__main__":
    main()
