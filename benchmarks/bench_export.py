"""The vetted catalogue at survey scale: 100,000 stars, time and peak memory per format.

Builds a ledger of invented stars whose stored results are real analysis
results of a pool of seeded stars (``core.synthetic`` + ``core.analysis``,
star ids changed), nine in ten confirmed with their final numbers; then
writes the catalogue in each format in a fresh child process and prints its
wall time, CPU time (the machine is shared: wall time depends on the load)
and its peak resident memory (``resource.getrusage`` of the child), beside the peak of a child that only imports, opens the ledger and
lists its stars (the floor).  Usage::

    python benchmarks/bench_export.py [--stars 100000] [--points 100] [--keep DIR]
    python benchmarks/bench_export.py --smoke
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.ledger import Ledger  # noqa: E402
from phasewise.core.lightcurve import LightCurve, StarMeta  # noqa: E402
from phasewise.core.synthetic import make_survey  # noqa: E402

FORMATS = {"ecsv": ".ecsv", "csv": ".csv", "fits": ".fits", "votable": ".vot"}
#: Every star is written: the decided ones from their verdicts, the rest from results.
STATUSES = ("unreviewed", "confirmed")


def result_pool(n: int, settings: AnalysisSettings) -> list[dict]:
    """Stored results of ``n`` seeded stars of every class (JSON round-tripped)."""
    survey = make_survey(n, seed=2026)
    return [json.loads(json.dumps(analyse(lc, settings).to_dict())) for lc in survey.lightcurves]


def curves(n_stars: int, n_points: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    time_ = np.sort(rng.uniform(2460000.0, 2460400.0, n_points))
    band = np.where(np.arange(n_points) % 3 == 0, "I", "V")
    err = np.full(n_points, 0.02)
    for i in range(n_stars):
        mag = 15 + rng.normal(0, 0.02, n_points)
        yield LightCurve(
            f"CAV-{i:06d}",
            time_,
            mag,
            err,
            band=band,
            time_scale="HJD",
            meta=StarMeta(ra=210.0 + i * 1e-5, dec=-45.0),
        )


def build(path: Path, n_stars: int, n_points: int, pool_size: int) -> None:
    settings = AnalysisSettings()
    start = time.perf_counter()
    pool = result_pool(pool_size, settings)
    print(f"  analyse {pool_size} seeded stars for the pool  {time.perf_counter() - start:7.1f} s")
    start = time.perf_counter()
    with Ledger.create(path) as ledger:
        ledger.add_stars(curves(n_stars, n_points), source_file="invented.csv")
        ledger.set_analysis_settings(settings.to_dict(), settings.hash)
        ids = ledger.star_ids()
        batch = 2000
        for k in range(0, n_stars, batch):
            ledger.store_results(
                [
                    (s, settings.hash, {**pool[(k + j) % len(pool)], "star_id": s})
                    for j, s in enumerate(ids[k : k + batch])
                ]
            )
        confirmed = []
        for i, star in enumerate(ids):
            if i % 10 == 9:
                continue  # one star in ten stays unreviewed (its row reads the full result)
            result = pool[i % len(pool)]
            top = result["suggestions"][0] if result["suggestions"] else None
            if top is None:
                continue
            # what record_verdicts stores for a confirmation: the suggestion's numbers
            confirmed.append(
                (star, "confirmed", top["class"], top["period"], None, result["final"])
            )
        ledger.set_verdicts(confirmed, label="bulk confirm")
    print(
        f"  build ledger of {n_stars} stars                {time.perf_counter() - start:7.1f} s "
        f"({path.stat().st_size / 1e6:.0f} MB)"
    )


def child(path: str, fmt: str, out: str) -> None:
    """Run in a fresh process: one export (or, for fmt 'floor', open and list the stars).

    A large export builds its rows in several processes: the CPU time counts
    theirs, and the peak memory is that of this process and its children
    together (sampled every 20 ms), not of this process alone.
    """
    from phasewise.core.export import write_catalogue

    usage = resource.getrusage(resource.RUSAGE_SELF)
    cpu_start = usage.ru_utime + usage.ru_stime  # after the imports
    sampler = _TreeMemory()
    start = time.perf_counter()
    with Ledger.open(path, readonly=True) as ledger:
        if fmt == "floor":
            n = len(ledger.star_ids())
        else:
            n = write_catalogue(ledger, out, format=fmt, statuses=STATUSES)
    elapsed = time.perf_counter() - start
    tree_peak = sampler.stop()
    usage = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = usage.ru_utime + usage.ru_stime - cpu_start + kids.ru_utime + kids.ru_stime
    peak = max(_peak_mb(usage), tree_peak)
    print(json.dumps({"n": n, "seconds": elapsed, "cpu": cpu, "peak_mb": peak}))


class _TreeMemory:
    """The largest resident memory of this process plus its descendants, sampled."""

    def __init__(self, every_s: float = 0.02) -> None:
        import threading

        self.peak = 0.0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, args=(every_s,), daemon=True)
        self._thread.start()

    @staticmethod
    def _rss_mb(pid: int) -> float:
        try:
            for line in Path(f"/proc/{pid}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024
        except OSError:
            pass
        return 0.0

    @staticmethod
    def _children(pid: int) -> list[int]:
        out = []
        for task in Path(f"/proc/{pid}/task").glob("*"):
            try:
                out += [int(c) for c in (task / "children").read_text().split()]
            except OSError:
                pass
        return out

    def _run(self, every_s: float) -> None:
        if not Path("/proc/self/status").exists():
            return  # no /proc: the process's own peak is printed
        while not self._stop.wait(every_s):
            pids, total = [os.getpid()], 0.0
            while pids:
                pid = pids.pop()
                total += self._rss_mb(pid)
                pids += self._children(pid)
            self.peak = max(self.peak, total)

    def stop(self) -> float:
        self._stop.set()
        self._thread.join()
        return self.peak


def _peak_mb(usage) -> float:
    """This process's own peak resident memory.

    Linux carries ``ru_maxrss`` over an exec from the forking parent (a
    parent that just built a 1.2 GB ledger shows as the child's peak), so
    the per-address-space ``VmHWM`` is read where there is one.
    """
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return usage.ru_maxrss / 1024


def child_json(script: str, *args) -> dict:
    """Run ``script --child ARGS...`` in a fresh process; its last line of JSON."""
    proc = subprocess.run(
        [sys.executable, script, "--child", *map(str, args)],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(proc.stdout.strip().splitlines()[-1])


def run_child(path: Path, fmt: str, out: Path) -> dict:
    return child_json(__file__, path, fmt, out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=100_000)
    parser.add_argument("--points", type=int, default=100)
    parser.add_argument("--pool", type=int, default=60, help="seeded stars analysed")
    parser.add_argument("--keep", type=Path, help="folder to keep the ledger in")
    parser.add_argument("--smoke", action="store_true", help="a tiny run")
    parser.add_argument("--formats", default=",".join(FORMATS), help="comma-separated formats")
    parser.add_argument("--child", nargs=3, metavar=("LEDGER", "FORMAT", "OUT"), help="internal")
    args = parser.parse_args()
    if args.child:
        child(*args.child)
        return
    if args.smoke:
        args.stars, args.points, args.pool = 200, 30, 12
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench_export_"))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "bench.ledger.sqlite"
    print(f"export benchmark: {args.stars} stars x {args.points} points -> {folder}")
    print(
        "  load average (1, 5, 15 min) at the start: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg())
    )
    if not path.exists():
        build(path, args.stars, args.points, args.pool)
    floor = run_child(path, "floor", folder / "none")
    print(
        f"  floor: imports, open, star ids  {floor['seconds']:7.1f} s  {floor['peak_mb']:7.0f} MB"
    )
    with Ledger.open(path, readonly=True) as ledger:
        start = time.perf_counter()
        ledger.checksum()
        print(
            f"  of which the ledger checksum     {time.perf_counter() - start:7.1f} s (provenance)"
        )
    print(
        f"  {'format':8s} {'rows':>8s} {'seconds':>8s} {'CPU s':>8s} {'peak MB':>8s} {'file MB':>8s}"
    )
    for fmt in args.formats.split(","):
        out = folder / f"vetted{FORMATS[fmt]}"
        got = run_child(path, fmt, out)
        size = out.stat().st_size / 1e6
        print(
            f"  {fmt:8s} {got['n']:8d} {got['seconds']:8.1f} {got['cpu']:8.1f} "
            f"{got['peak_mb']:8.0f} {size:8.1f}   ({got['peak_mb'] / floor['peak_mb']:.2f}x the "
            "floor's memory)"
        )
        out.unlink()
    print("  load average (1, 5, 15 min) at the end: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))
    if not args.keep:
        for item in folder.iterdir():
            item.unlink()
        folder.rmdir()


if __name__ == "__main__":
    main()
