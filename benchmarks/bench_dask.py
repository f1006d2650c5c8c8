"""CPU per star: the local process pool against a Dask LocalCluster, in one run.

Each engine analyses the same seeded field (``core.synthetic``) in a fresh
child process; the CPU time of that child and all its reaped descendants
(pool workers, Dask nanny workers) is divided by the stars analysed.  Three
rows: the local pool, a LocalCluster with distributed's default worker
environment, and a LocalCluster with :data:`core.batch.DASK_WORKER_CONFIG`
(what Phasewise sets).  Target: project Dask / local pool <= 1.15.

Each engine runs twice, on a small field and on the full one, so the
fixed start-up (imports and numba compilation in every worker process,
the cluster's scheduler and nannies) is told apart from the cost of one
more star: ``marginal = (CPU(full) - CPU(small)) / (n_full - n_small)``.
The marginal CPU is what a survey of 10^5 stars pays per star; the ratio
of the marginal costs is the one held to the target.  Both are printed.

    python benchmarks/bench_dask.py [--stars 128] [--workers 2]
    python benchmarks/bench_dask.py --smoke
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench_export import child_json  # noqa: E402

MODES = ("local", "dask-default", "dask-project")


def child(mode: str, path: str, workers: int) -> None:
    """Run in a fresh process: analyse every star of the ledger with one engine."""
    from phasewise.core.analysis import AnalysisSettings
    from phasewise.core.batch import DASK_WORKER_CONFIG, analyse_ledger

    settings = AnalysisSettings()
    start = time.perf_counter()
    if mode == "local":
        summary = analyse_ledger(path, settings, workers=workers)
    else:
        import dask
        from distributed import LocalCluster

        config = DASK_WORKER_CONFIG if mode == "dask-project" else {}
        if os.environ.get("BENCH_DASK_EXTRA"):  # experiments: extra config as JSON
            config = {**config, **json.loads(os.environ["BENCH_DASK_EXTRA"])}
        with (
            dask.config.set(config),
            LocalCluster(
                n_workers=workers,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
            ) as cluster,
        ):
            summary = analyse_ledger(path, settings, scheduler=cluster.scheduler_address)
    print(json.dumps({"n": summary.analysed + summary.failed, "wall": time.perf_counter() - start}))


def run(mode: str, path: Path, workers: int) -> dict:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    got = child_json(__file__, mode, path, workers)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    got["cpu"] = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    got["faults"] = after.ru_minflt - before.ru_minflt
    return got


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=128)
    parser.add_argument("--points", type=int, default=700)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--smoke", action="store_true", help="a tiny run")
    parser.add_argument("--modes", default=",".join(MODES), help="comma-separated engines")
    parser.add_argument("--child", nargs=3, metavar=("MODE", "LEDGER", "WORKERS"), help="internal")
    args = parser.parse_args()
    if args.child:
        child(args.child[0], args.child[1], int(args.child[2]))
        return
    if args.smoke:
        args.stars, args.points = 8, 100
    os.environ.pop("MALLOC_TRIM_THRESHOLD_", None)  # the children start clean
    from phasewise.core.ledger import Ledger
    from phasewise.core.synthetic import synthetic_field

    folder = Path(tempfile.mkdtemp(prefix="bench_dask_"))
    lcs = synthetic_field(args.stars, n_epochs=args.points, seed=17).lightcurves()
    print(f"Dask cost: {args.stars} stars x {args.points} points, {args.workers} workers")
    print(
        "  load average (1, 5, 15 min) at the start: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg())
    )
    print(
        f"  {'engine':14s} {'stars':>6s} {'wall s':>7s} {'CPU ms/star':>12s} {'faults':>10s} ratio"
    )
    small_n = max(4, args.stars // 8)
    base = base_marginal = None
    for mode in args.modes.split(","):
        runs = []
        for n in (small_n, args.stars):
            path = folder / f"{mode}.ledger.sqlite"
            with Ledger.create(path) as ledger:
                ledger.add_stars(lcs[:n])
            runs.append(run(mode, path, args.workers))
            for item in folder.glob(f"{mode}.ledger.sqlite*"):
                item.unlink()
        small, got = runs
        per_star = 1000 * got["cpu"] / max(got["n"], 1)
        marginal = 1000 * (got["cpu"] - small["cpu"]) / max(got["n"] - small["n"], 1)
        fixed = small["cpu"] - marginal * small["n"] / 1000
        base = base or per_star
        base_marginal = base_marginal or marginal
        print(
            f"  {mode:14s} {got['n']:6d} {got['wall']:7.1f} {per_star:12.1f} "
            f"{got['faults']:10d} {per_star / base:5.2f}x   marginal {marginal:6.1f} ms/star "
            f"{marginal / base_marginal:5.2f}x, start-up {fixed:5.1f} s CPU"
        )
    print("  load average (1, 5, 15 min) at the end: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))
    print(
        "  (CPU ms/star includes each child's start-up: imports, cluster or pool start;\n"
        f"   marginal: CPU of the last {args.stars - small_n} stars, from a second run on "
        f"{small_n} stars; the target holds for the marginal ratio)"
    )
    folder.rmdir()


if __name__ == "__main__":
    main()
