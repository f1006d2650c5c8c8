"""Speed of the vetting desk: period nudge redraw, star switch, 10,000-star start.

Run offscreen:  QT_QPA_PLATFORM=offscreen python benchmarks/bench_desk.py [--quick]

Targets (DESIGN.md): redraw after a nudge <= 16 ms at 5,000 points and
<= 50 ms at 50,000; star switch <= 100 ms at 50,000 points with the analysis
cached in the ledger (the new star's points painted; its model lines follow
once the star rests); a 10,000-star ledger shows its first star <= 2 s after
start.
Each measurement runs in a process of its own (the program shows one window
per process); figures are medians of repeated runs there, and each line also
prints the ratio to its target.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
import numpy as np  # noqa: E402

from phasewise import core  # noqa: E402, F401  (first, as in the program: it sets one BLAS thread before numpy)

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")


def invented_star(star_id: str, n: int, period: float, seed: int):
    from phasewise.core.lightcurve import LightCurve

    rng = np.random.default_rng(seed)
    t = 2461000.0 + np.sort(rng.uniform(0.0, 900.0, n))
    phase = (t / period) % 1.0
    mag = 16.2 - 0.45 * np.sin(2 * np.pi * phase) - 0.15 * np.sin(4 * np.pi * phase)
    mag += rng.normal(0.0, 0.02, n)
    band = np.where(rng.random(n) < 0.7, "V", "I").astype(object)
    mag = mag + np.where(band == "I", -0.5, 0.0)
    return LightCurve(star_id, t, mag, np.full(n, 0.02), band=band, time_scale="HJD")


_TEMPLATE: dict = {}


def template_result() -> dict:
    """One real core.analysis result (of a 700-point invented star), reused as a template."""
    if not _TEMPLATE:
        from phasewise.app.desk.services import CoreServices

        services = CoreServices()
        lc = invented_star("TEMPLATE", 700, 0.5, 0)
        _TEMPLATE.update(services.analyse(lc, services.default_settings()))
    return dict(_TEMPLATE)


def make_ledger(path: Path, n_stars: int, n_points: int, analyse: bool):
    """Invented stars in a new ledger; each analysed by core.analysis, or (for big
    ledgers and curves, where the analysis is not what is measured) given a copy
    of one real result."""
    from phasewise.app.desk.services import CoreServices
    from phasewise.core.ledger import Ledger

    services = CoreServices()
    settings = services.default_settings()
    ledger = Ledger.create(path)
    services.record_settings(ledger, settings)
    lcs = [invented_star(f"BV-{i:05d}", n_points, 0.5, i) for i in range(n_stars)]
    ledger.add_stars(lcs, source_file="invented.csv")
    items = []
    for lc in lcs:
        result = services.analyse(lc, settings) if analyse else template_result()
        result["star_id"] = lc.star_id
        items.append((lc.star_id, result))
    services.store_results(ledger, items, settings)
    ledger.close()


def window_on(path: Path):
    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    from phasewise.app.desk import MainWindow

    app = QApplication.instance() or QApplication([])
    tmp = tempfile.mkdtemp()
    window = MainWindow(settings=QSettings(f"{tmp}/b.ini", QSettings.Format.IniFormat))
    window.show()
    window.open_ledger(path)
    window.wait_idle()
    return app, window


def dispose(window) -> None:
    from PySide6.QtCore import QCoreApplication, QEvent

    # no fit or periodogram thread left running into the teardown
    if not window.wait_idle(timeout_s=300.0):
        raise SystemExit("bench_desk: the window's workers were still busy after 300 s")
    window.close()
    window.deleteLater()
    QCoreApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete)


def bench_nudge(tmp: Path, n_points: int, repeats: int) -> tuple[float, float, float]:
    """Median wall and process-CPU milliseconds from a nudge to its painted frame (the
    points at the new period), and the CPU milliseconds of the model fitted when the
    period rests (``core.folding.fold_model`` at a new period, the line drawn after)."""
    path = tmp / f"nudge{n_points}.ledger.sqlite"
    make_ledger(path, 1, n_points, analyse=False)
    app, window = window_on(path)
    painted = count_paints(window.fold.main.bins[0])
    times, cpu = [], []
    for _ in range(repeats):
        before = painted[0]
        t0, c0 = time.perf_counter(), time.process_time()
        window.session.nudge(+1)
        # the event loop delivers the scene's update and paints what changed, once
        while painted[0] == before and time.perf_counter() - t0 < 2.0:
            app.processEvents()
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    desk = window.desk
    fold = window.fold.main
    fits = []
    for i in range(max(repeats // 3, 2)):
        period = desk.session.period * (1 + 1e-5 * (i + 1))
        c0 = time.process_time()
        fold_model(desk.lc, period, desk.settings, fold.band, False, result=desk.result)
        fits.append(time.process_time() - c0)
    dispose(window)
    med = statistics.median
    return med(times) * 1000, med(cpu) * 1000, med(fits) * 1000


def count_paints(item) -> list[int]:
    """Count paints of one plot item (to know the frame after a nudge was drawn)."""
    counter = [0]
    original = item.paint

    def paint(*args):
        counter[0] += 1
        return original(*args)

    item.paint = paint
    return counter


def fold_model(*args, **kwargs):
    from phasewise.core.folding import fold_model as fit

    return fit(*args, **kwargs)


def bench_switch(tmp: Path, n_points: int, repeats: int) -> tuple[float, float, float]:
    """Median wall and process-CPU ms from J (next star) to the window painted with the
    new star's points, and the wall ms until its model lines and periodogram are drawn.

    The analysis is cached in the ledger, as when vetting an analysed field: each
    star's own up to 5,000 points, else a copy of one real result (every star is
    the same invented 0.5 d variable; its analysis is not what is measured).
    """
    path = tmp / f"switch{n_points}.ledger.sqlite"
    make_ledger(path, repeats + 2, n_points, analyse=n_points <= 5_000)
    app, window = window_on(path)
    times, cpu, complete = [], [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        window.step_star(+1)
        window.repaint()  # every panel painted: the frame the person sees first
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
        window.wait_idle()  # the folds' model lines (fitted once the star rests), periodogram
        window.repaint()
        complete.append(time.perf_counter() - t0)
    dispose(window)
    med = statistics.median
    return med(times) * 1000, med(cpu) * 1000, med(complete) * 1000


FIRST_STAR = r"""
import sys, time
t_start = float(sys.argv[2])
sys.path.insert(0, sys.argv[3])
from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QApplication
app = QApplication([])
from phasewise.app.desk import MainWindow
w = MainWindow(settings=QSettings(sys.argv[4], QSettings.Format.IniFormat))
w.show()
w.open_ledger(sys.argv[1])
app.processEvents()
w.repaint()
shown = time.time() - t_start
print(f"{shown:.3f} {w.current_star} {time.process_time():.3f} {w.ledger.n_stars}")
w.workers.shutdown()
w.close()
"""


def bench_first_star(tmp: Path, n_stars: int, ledger: Path | None = None) -> tuple[float, str, int]:
    """Median wall ms from process start to the first star painted, that star, and the
    ledger's number of stars.

    ``ledger``: an existing ledger, copied (never written), instead of a new one.
    """
    path = tmp / "big.ledger.sqlite"
    t0 = time.perf_counter()
    if ledger is not None:
        shutil.copyfile(ledger, path)
        print(f"  (copied {ledger}, {path.stat().st_size / 1e6:.1f} MB)")
    else:
        make_ledger(path, n_stars, 100, analyse=False)
        print(
            f"  (made a {n_stars:,}-star ledger in {time.perf_counter() - t0:.1f} s, "
            f"{path.stat().st_size / 1e6:.1f} MB)"
        )
    runs, cpu = [], []
    for _ in range(3):  # the first run may read the file from disk, the others from cache
        start = time.time()
        out = subprocess.run(
            [
                sys.executable,
                "-c",
                FIRST_STAR,
                str(path),
                repr(start),
                str(ROOT),
                str(tmp / "f.ini"),
            ],
            capture_output=True,
            text=True,
            cwd=ROOT,
            check=True,
        ).stdout.split()
        runs.append(float(out[0]) * 1000)
        cpu.append(float(out[2]) * 1000)
    print(
        "  (runs: "
        + ", ".join(f"{r:.0f} ms wall / {c:.0f} ms CPU" for r, c in zip(runs, cpu, strict=True))
        + ")"
    )
    return statistics.median(runs), out[1], int(out[3])


def part_main(args) -> None:
    """One measurement, in a process of its own (as the program runs one window)."""
    import json

    tmp = Path(args.dir)
    if args.part == "nudge":
        figures = bench_nudge(tmp, args.points, args.repeats)
    else:
        figures = bench_switch(tmp, args.points, args.repeats)
    print(json.dumps(figures), flush=True)
    from PySide6.QtWidgets import QApplication

    QApplication.instance().quit()


def run_part(part: str, points: int, repeats: int, tmp: Path) -> tuple[float, float, float]:
    """Run one measurement in a child process; its figures, or the reason it failed."""
    import json

    proc = subprocess.run(
        [
            sys.executable,
            "-X",
            "faulthandler",  # a crash prints every thread's Python stack
            __file__,
            "--part",
            part,
            "--points",
            str(points),
            "--repeats",
            str(repeats),
            "--dir",
            str(tmp),
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
    )
    if proc.returncode != 0:
        sys.stderr.write(proc.stderr[-6000:])
        raise SystemExit(
            f"bench_desk: the {part} measurement at {points:,} points ended with exit code "
            f"{proc.returncode} (its output is above)"
        )
    return tuple(json.loads(proc.stdout.strip().splitlines()[-1]))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, 2,000-star ledger")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    parser.add_argument(
        "--stars",
        type=int,
        default=None,
        help="stars in the first-star ledger (default 10,000; 2,000 with --quick; the "
        "target is set at 100,000, a ledger that takes minutes to make)",
    )
    parser.add_argument(
        "--ledger",
        type=Path,
        default=None,
        help="time the first star of a copy of this ledger (never written) instead of a new one",
    )
    parser.add_argument(
        "--first-star-only", action="store_true", help="skip the nudge and star-switch timings"
    )
    # one measurement in a child process (used by the script itself)
    parser.add_argument("--part", choices=("nudge", "switch"), help=argparse.SUPPRESS)
    parser.add_argument("--points", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--repeats", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--dir", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.part:
        part_main(args)
        return
    repeats = 2 if args.smoke else 10 if args.quick else 30
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        load = os.getloadavg()[0]
        print(
            f"Phasewise desk benchmark (median of repeats, offscreen, each measurement in a "
            f"process of its own; load average {load:.1f} on {os.cpu_count()} cores: wall "
            "times stretch when the cores are shared, so the process CPU time is printed "
            "beside them)",
            flush=True,
        )
        for n, target in () if args.first_star_only else ((5_000, 16.0), (50_000, 50.0)):
            ms, cpu, fit = run_part("nudge", n, repeats, tmp)
            print(
                f"nudge redraw, {n:>6,} points: {ms:7.1f} ms wall, {cpu:6.1f} ms CPU  "
                f"(target {target:.0f} ms, ratio {ms / target:.2f} wall, {cpu / target:.2f} CPU); "
                f"the model line when the period rests: {fit:.1f} ms CPU to fit",
                flush=True,
            )
        for n in () if args.first_star_only else (700, 50_000):
            shown, cpu, full = run_part("switch", n, max(repeats // 2, 5), tmp)
            print(
                f"star switch, {n:>6,} points, cached analysis: {shown:7.1f} ms wall, "
                f"{cpu:6.1f} ms CPU  (target 100 ms, ratio {shown / 100:.2f} wall, "
                f"{cpu / 100:.2f} CPU); with its model lines and periodogram: {full:.0f} ms",
                flush=True,
            )
        n_stars = 50 if args.smoke else 2_000 if args.quick else 10_000
        n_stars = args.stars or n_stars
        ms, first, n_stars = bench_first_star(tmp, n_stars, args.ledger)
        print(
            f"{n_stars:,}-star ledger, first star ({first}) shown: {ms:7.0f} ms after start "
            f"(target 2000 ms, ratio {ms / 2000:.2f})"
        )


if __name__ == "__main__":
    main()
    # Every figure is printed and every window closed.  Measurements that show a
    # window run in child processes of their own; a window's process leaves
    # directly, without Qt's teardown at interpreter exit.
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(0)
