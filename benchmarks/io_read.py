"""Reading speed of core.io on a demo-sized long table (about 60,000 rows).

Prints, for each format, the time to open the table and read every star,
and the ratio against astropy's own ``Table.read`` of the same file (which
only parses; it does not group by star or build light curves).  Invented
data; run from the repository root: ``python benchmarks/io_read.py``.
"""

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from astropy.table import Table

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from phasewise.core.io import open_photometry, write_stars  # noqa: E402
from phasewise.core.lightcurve import LightCurve, StarMeta  # noqa: E402

ASTROPY = {".csv": "ascii.csv", ".ecsv": "ascii.ecsv", ".fits": "fits", ".vot": "votable"}


def _curves(n_stars=300, n_points=200):
    rng = np.random.default_rng(42)
    return [
        LightCurve(
            f"CAV-{k:03d}",
            2460000 + np.sort(rng.uniform(0, 900, n_points)),
            rng.normal(15, 0.2, n_points),
            np.full(n_points, 0.02),
            band=np.where(rng.random(n_points) < 0.7, "V", "I"),
            time_scale="HJD",
            meta=StarMeta(ra=201.0, dec=-38.6),
        )
        for k in range(n_stars)
    ]


def _best(fn, repeat=3):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main():
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    curves = _curves(n_stars=5, n_points=20) if args.smoke else _curves()
    with tempfile.TemporaryDirectory() as folder:
        for ending, fmt in ASTROPY.items():
            path = Path(folder) / f"survey{ending}"
            write_stars(curves, path)
            ours = _best(lambda path=path: sum(lc.n_points for lc in open_photometry(path).stars()))
            theirs = _best(lambda path=path, fmt=fmt: Table.read(path, format=fmt))
            print(
                f"{ending:6s} {sum(c.n_points for c in curves)} rows: read all stars {ours:.3f} s, "
                f"astropy Table.read alone {theirs:.3f} s, ratio {ours / theirs:.2f}"
            )


if __name__ == "__main__":
    main()
