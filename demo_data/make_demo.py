"""Write the Phasewise demo survey (seeded; run it again to get the same files).

The scenario is invented: the "Caldera Cluster", a globular cluster observed in
V and I over three seasons from the "Cerro Alto Vigil Observatory".  See
``demo_data/README.md``.

Usage::

    python demo_data/make_demo.py            # rewrites the files next to this script
    python demo_data/make_demo.py OUT_DIR    # writes them somewhere else
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(HERE.parent))

from astropy.table import Table  # noqa: E402

from phasewise.core.synthetic import CLUSTER, SITE, make_survey  # noqa: E402

DEMO_SEED = 20261201
N_STARS = 300
LONG_NAME = "caldera_survey"  # .ecsv and .csv
STARS_DIR = "stars"
TRUTH_NAME = "truth.csv"

DESCRIPTION = (
    f"Invented V and I photometry of {N_STARS} stars in the field of the fictional "
    f"{CLUSTER.name}, observed from the fictional {SITE.name} over three seasons. "
    "Synthetic data written by demo_data/make_demo.py; see demo_data/README.md."
)


def survey_table(survey) -> Table:
    """The long table: one row per point, rounded for a small file."""
    parts = {"star_id": [], "hjd": [], "mag": [], "mag_err": [], "band": [], "ra": [], "dec": []}
    for lc in survey.lightcurves:
        n = lc.n_points
        parts["star_id"].append(np.full(n, lc.star_id))
        parts["hjd"].append(np.round(lc.time, 5))
        parts["mag"].append(np.round(lc.mag, 3))
        parts["mag_err"].append(np.maximum(np.round(lc.mag_err, 3), 0.001))
        parts["band"].append(lc.band.astype(str))
        parts["ra"].append(np.full(n, round(lc.meta.ra, 4)))
        parts["dec"].append(np.full(n, round(lc.meta.dec, 4)))
    table = Table({k: np.concatenate(v) for k, v in parts.items()})
    units = {"hjd": "d", "mag": "mag", "mag_err": "mag", "ra": "deg", "dec": "deg"}
    for name, unit in units.items():
        table[name].unit = unit
    table["star_id"].description = "star identifier"
    table["hjd"].description = "heliocentric Julian date of mid-exposure (HJD, UTC)"
    table["mag"].description = "calibrated magnitude in the band of the row"
    table["mag_err"].description = "one-sigma magnitude error"
    table["band"].description = "Johnson-Cousins band: V or I"
    table["ra"].description = "right ascension (ICRS)"
    table["dec"].description = "declination (ICRS)"
    table.meta.update(
        {
            "description": DESCRIPTION,
            "time_scale": "HJD",
            "observatory": {
                "name": SITE.name,
                "latitude_deg": SITE.latitude,
                "longitude_deg": SITE.longitude,
                "height_m": SITE.height,
            },
            "cluster": {"name": CLUSTER.name, "ra_deg": CLUSTER.ra, "dec_deg": CLUSTER.dec},
            "generator": "demo_data/make_demo.py (core.synthetic.make_survey)",
            "seed": DEMO_SEED,
            "synthetic": True,
        }
    )
    return table


def truth_for_file(survey) -> Table:
    """The truth table rounded to what the files need."""
    truth = survey.truth_table()
    for name in truth.colnames:
        if truth[name].dtype.kind == "f":
            digits = 7 if name in ("period", "period2", "period_mean") else 5
            truth[name] = np.round(truth[name], digits)
    return truth


def write_demo(out_dir: Path | str = HERE, seed: int = DEMO_SEED, n_stars: int = N_STARS) -> dict:
    """Write the demo files into ``out_dir``; returns the paths written."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    survey = make_survey(n_stars=n_stars, seed=seed)
    table = survey_table(survey)
    ecsv = out / f"{LONG_NAME}.ecsv"
    csv = out / f"{LONG_NAME}.csv"
    table.write(ecsv, format="ascii.ecsv", overwrite=True)
    table.write(csv, format="ascii.csv", overwrite=True)
    stars = out / STARS_DIR
    if stars.exists():
        shutil.rmtree(stars)
    stars.mkdir()
    per_star = table["hjd", "mag", "mag_err", "band"]
    ids = np.asarray(table["star_id"])
    starts = np.flatnonzero(np.r_[True, ids[1:] != ids[:-1]])
    stops = np.r_[starts[1:], ids.size]
    for a, b in zip(starts, stops, strict=True):
        per_star[a:b].write(stars / f"{ids[a]}.csv", format="ascii.csv", overwrite=True)
    truth = out / TRUTH_NAME
    truth_for_file(survey).write(truth, format="ascii.csv", overwrite=True)
    return {"ecsv": ecsv, "csv": csv, "stars": stars, "truth": truth}


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    paths = write_demo(Path(argv[0]) if argv else HERE)
    total = sum(
        p.stat().st_size
        for p in Path(paths["stars"]).parent.rglob("*")
        if p.is_file() and p.suffix in (".csv", ".ecsv")
    )
    for name, path in paths.items():
        print(f"{name}: {path}")
    print(f"total size of data files: {total / 1e6:.2f} MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
