"""Median ``analyse`` time per star on the first demo stars (one process).

    OPENBLAS_NUM_THREADS=1 python benchmarks/eclipsing_timing.py [--n 30]

Also counts the stars on which the eclipse search ran.  Run it from two
trees (before/after a change) on a quiet machine to compare; the figures
depend on the machine's load.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.synthetic import make_survey  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=30)
    parser.add_argument("--seed", type=int, default=20261201)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args(argv)
    if args.smoke:
        args.n, args.repeat = 2, 1
    survey = make_survey(n_stars=300, seed=args.seed)
    stars = survey.lightcurves[: args.n]
    settings = AnalysisSettings()
    analyse(stars[0], settings)  # imports and caches outside the timing
    best = []
    searched = 0
    for lc in stars:
        times = []
        for _ in range(args.repeat):
            start = time.perf_counter()
            result = analyse(lc, settings)
            times.append(time.perf_counter() - start)
        best.append(min(times))
        searched += getattr(result, "eclipse_search", None) is not None
    print(
        f"{len(stars)} stars: median {1000 * np.median(best):.1f} ms, "
        f"mean {1000 * np.mean(best):.1f} ms per star (best of {args.repeat}); "
        f"eclipse search ran on {searched}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
