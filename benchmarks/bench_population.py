"""Population view at survey scale: diagrams, outliers, field summary, redraw.

Prints, from one run, for a small and a large invented field (N and 10 N
stars): the time to compute the six diagrams and the outlier rule
(core.diagrams), the field summary (core.diagrams.field_state, which calls
core.physics.derive per star and core.physics.population_summary), and, with
``--gui``, the population view's redraw of all six diagrams (offscreen).  The
ratio large/small shows how each part scales (10 = linear).  The large field
is ten copies of the small one, so each outlier comes ten times over, and the
rejection takes ten rounds for it.  Each time is the best of ``--repeat`` runs.

It then times the field summary, and core.physics.population_summary alone,
at 2,000 stars with the outlier rejection replaced by the former quadratic
rule (the reference kept in tests/core/test_physics_population.py), against
the current one, in the same run, and checks that both give the same summary.
Usage::

    python benchmarks/bench_population.py [--stars 1000] [--repeat 3] [--gui]
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

from phasewise.core import diagrams as dg  # noqa: E402
from phasewise.core.physics import population  # noqa: E402


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


def time_summary(
    points: dg.PointTable | list[dg.StarPoint], repeat: int
) -> tuple[float, dg.FieldState]:
    best, state = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        state = dg.field_state(points, pl_relation="benedict07_pl_v")
        best = min(best, time.perf_counter() - start)
    return best, state


def time_core(points: dg.PointTable | list[dg.StarPoint], repeat: int = 1) -> tuple[float, float]:
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
    summary, _ = time_summary(points, repeat)
    return diagrams, summary


def old_vs_new(points: list[dg.StarPoint], repeat: int) -> None:
    """Field summary, and population_summary alone, with the former rejection and the current."""
    from tests.core.test_physics_population import reference_class_distance

    stars = dg.star_physics(dg.summary_members(points), dg.physics_settings_from(None, 0.0))

    def time_physics() -> float:
        best = float("inf")
        for _ in range(repeat):
            start = time.perf_counter()
            population.population_summary(stars)
            best = min(best, time.perf_counter() - start)
        return best

    new, new_state = time_summary(points, repeat)
    new_physics = time_physics()
    current = population.class_distance
    population.class_distance = reference_class_distance
    try:
        old, old_state = time_summary(points, repeat)
        old_physics = time_physics()
    finally:
        population.class_distance = current
    same = new_state.summary.to_dict() == old_state.summary.to_dict()
    rejected = sum(len(d.outliers) for d in new_state.summary.distances)
    print(
        f"{len(points)} stars, former rule vs current: field summary {old * 1e3:7.1f} ms vs "
        f"{new * 1e3:6.1f} ms ({old / new:.0f}x), population_summary alone "
        f"{old_physics * 1e3:7.1f} ms vs {new_physics * 1e3:5.1f} ms "
        f"({old_physics / new_physics:.0f}x); same summary: {same} ({rejected} rejected)"
    )


def time_gui(points: dg.PointTable | list[dg.StarPoint]) -> float:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6 import QtWidgets

    from phasewise import app  # noqa: F401  (guards None against the PySide6 6.12 leak)
    from phasewise.app.population import PopulationView

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
    parser.add_argument("--repeat", type=int, default=3, help="best of this many runs")
    parser.add_argument("--gui", action="store_true", help="also time the view's redraw")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.stars, args.repeat = 20, 1
    small = invented_points(args.stars)
    large = [replace(p, star_id=f"{p.star_id}-{k}") for k in range(10) for p in small]
    time_core(small[:50])  # warm-up: imports and first calls
    if args.gui:
        time_gui(small[:50])
    rows = []
    for label, points in ((f"{len(small)} stars", small), (f"{len(large)} stars", large)):
        points = dg.PointTable.from_points(points)  # the columns the view reads from a ledger
        diagrams, summary = time_core(points, args.repeat)
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
    old_vs_new(invented_points(2000), args.repeat)


if __name__ == "__main__":
    main()
