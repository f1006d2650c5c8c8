"""Population view at survey scale: diagrams, outliers, field summary, redraw.

Prints, from one run, for a small and a large invented field (N and 10 N
stars): the time to compute the six diagrams and the outlier rule
(core.diagrams), the field summary (core.diagrams.field_state, which calls
core.physics.derive per star and core.physics.population_summary), and, with
``--gui``, the population view's redraw of all six diagrams (offscreen).  The
ratio large/small shows how each part scales (10 = linear).  Usage::

    python benchmarks/bench_population.py [--stars 1000] [--gui]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from core import diagrams as dg  # noqa: E402


def invented_points(n_stars: int, seed: int = 5) -> list[dg.StarPoint]:
    """RRab, RRc and Cepheid-like points of an invented field (no real stars)."""
    rng = np.random.default_rng(seed)
    points = []
    for i in range(n_stars):
        kind = rng.choice(["RRab", "RRc", "DCEP"], p=[0.6, 0.3, 0.1])
        if kind == "RRab":
            period, amp, r21, phi31 = rng.uniform(0.45, 0.75), rng.uniform(0.5, 1.2), 0.45, 5.0
        elif kind == "RRc":
            period, amp, r21, phi31 = rng.uniform(0.25, 0.42), rng.uniform(0.3, 0.5), 0.15, 3.1
        else:
            period, amp, r21, phi31 = 10 ** rng.uniform(0.6, 1.4), 0.8, 0.4, 4.8
        v = 17.0 + rng.normal(0, 0.08) if kind != "DCEP" else 16.5 - 2.43 * np.log10(period)
        features = {
            "period": period,
            "phi31": phi31 + rng.normal(0, 0.1),
            "R21": r21,
            "primary_band": "V",
            "mean_mag_V": v,
            "mean_mag_I": v - 0.6,
        }
        points.append(
            dg.StarPoint(
                f"BX-{i:05d}",
                str(kind),
                "suggestion",
                period=period,
                amplitude_by_band={"V": amp},
                mean_mag_by_band={"V": v, "I": v - 0.6},
                R21=r21 + rng.normal(0, 0.02),
                phi31=features["phi31"],
                features=features,
            )
        )
    return points


def time_core(points: list[dg.StarPoint]) -> tuple[float, float]:
    start = time.perf_counter()
    planes = [
        dg.period_amplitude(points, "V"),
        dg.phi31_logp(points),
        dg.r21_logp(points),
        dg.period_ratio(points),
        dg.period_luminosity(points, "V"),
        dg.colour_magnitude(points),
    ]
    dg.find_outliers(planes)
    diagrams = time.perf_counter() - start
    start = time.perf_counter()
    dg.field_state(points, pl_relation="benedict07_pl_v")
    summary = time.perf_counter() - start
    return diagrams, summary


def time_gui(points: list[dg.StarPoint]) -> float:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6 import QtWidgets

    import app  # noqa: F401  (guards None against the PySide6 6.12 leak)
    from app.population import PopulationView

    qt = QtWidgets.QApplication.instance() or QtWidgets.QApplication([])
    view = PopulationView()
    view._start_summary = lambda *a, **k: None  # the summary is timed above
    view.resize(1500, 850)
    view.show()
    qt.processEvents()
    start = time.perf_counter()
    view.set_points(points)
    qt.processEvents()
    elapsed = time.perf_counter() - start
    view.close()
    return elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=1000)
    parser.add_argument("--gui", action="store_true", help="also time the view's redraw")
    args = parser.parse_args()
    small = invented_points(args.stars)
    large = [replace(p, star_id=f"{p.star_id}-{k}") for k in range(10) for p in small]
    time_core(small[:50])  # warm-up: imports and first calls
    if args.gui:
        time_gui(small[:50])
    rows = []
    for label, points in ((f"{len(small)} stars", small), (f"{len(large)} stars", large)):
        diagrams, summary = time_core(points)
        gui = time_gui(points) if args.gui else float("nan")
        rows.append((label, diagrams, summary, gui))
        print(
            f"{label:>12}: diagrams + outliers {diagrams * 1e3:8.1f} ms   field summary "
            f"{summary * 1e3:9.1f} ms   view redraw {gui * 1e3:8.1f} ms",
            flush=True,
        )
    (_, d1, s1, g1), (_, d2, s2, g2) = rows
    print(
        f"ratio 10x stars: diagrams {d2 / d1:.1f}x, summary {s2 / s1:.1f}x"
        + (f", redraw {g2 / g1:.1f}x" if args.gui else "")
        + "  (10x = linear)"
    )


if __name__ == "__main__":
    main()
