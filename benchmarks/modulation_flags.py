"""Modulation flags on four survey cadences: how often they are right.

    python benchmarks/modulation_flags.py [--seeds 20] [--first-seed 800] [--smoke] [--verbose]

``--smoke`` runs one modulated and one unmodulated RRab per cadence.

Stars come from ``core.synthetic.battery_star`` (seeded, invented): RRab
with a forced modulation (``"modulated"``) and without (``"plain"``) on the
battery's four cadences, with its nightly zero points, drifts, ramps and
outliers.  Per cadence it prints

* ``mod flagged``: modulated stars flagged as modulated (any kind);
* ``plain flagged``: unmodulated stars flagged (a wrong statement);
* ``with period``: flagged modulated stars that carry a modulation period,
  and among those the median and worst error of the modulation frequency
  ``|1/P - 1/P_true|`` in units of the resolution ``1/T`` (T the baseline),
  and how many are within 2/T;
* ``ms/star``: median CPU time of one analysis.

With ``--verbose`` every flagged unmodulated star and every missed modulated
one is listed with the flag's description.  Everything is measured in this
run; nothing is tuned to a seed or a cadence.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402

from phasewise.core.analysis import analyse  # noqa: E402
from phasewise.core.synthetic import BATTERY_CADENCES, battery_star  # noqa: E402
from phasewise.core.threads import limit_blas_threads  # noqa: E402


def _one(kind: str, option: str, seed: int) -> dict:
    lc, truth = battery_star(kind, "RRab", "", option, seed=seed)
    start = time.process_time()
    result = analyse(lc)
    cpu = time.process_time() - start
    mod = result.modulation
    row = {
        "seed": seed,
        "cpu": cpu,
        "flagged": mod is not None,
        "kind": None if mod is None else mod["kind"],
        "description": None if mod is None else mod["description"],
        "period": None if mod is None else mod.get("period"),
        "true_period": truth.blazhko_period,
        "resolution": 1.0 / lc.baseline,
        "period_right": abs(result.frequency * truth.period - 1.0) < 1e-3
        if result.frequency
        else False,
    }
    if row["period"] and np.isfinite(truth.blazhko_period):
        row["error_res"] = abs(1 / row["period"] - 1 / truth.blazhko_period) * lc.baseline
    return row


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=20, help="stars per cadence and option")
    parser.add_argument("--first-seed", type=int, default=800)
    parser.add_argument("--cadences", default=",".join(BATTERY_CADENCES))
    parser.add_argument("--smoke", action="store_true", help="one star per cadence and option")
    parser.add_argument("--options", default="modulated,plain", help="which RRab to run")
    parser.add_argument("--verbose", action="store_true", help="list the wrong ones")
    args = parser.parse_args(argv)
    n = 1 if args.smoke else args.seeds
    seeds = range(args.first_seed, args.first_seed + n)
    cadences = [c for c in args.cadences.split(",") if c]
    header = (
        f"{'cadence':<9} {'mod flagged':>11} {'plain flagged':>13} {'with period':>11} "
        f"{'err med/max [1/T]':>17} {'<=2/T':>6} {'ms/star':>8}"
    )
    print(f"RRab, seeds {seeds.start}..{seeds.stop - 1}")
    print(header)
    totals = np.zeros(5, int)
    wrong = []
    limit_blas_threads()  # one BLAS thread, as the batch workers run
    if True:
        for kind in cadences:
            options = args.options.split(",")
            mod = [_one(kind, "modulated", s) for s in seeds] if "modulated" in options else []
            plain = [_one(kind, "plain", s) for s in seeds] if "plain" in options else []
            errors = [r["error_res"] for r in mod if r["flagged"] and "error_res" in r]
            n_mod, n_plain = sum(r["flagged"] for r in mod), sum(r["flagged"] for r in plain)
            within = sum(e <= 2.0 for e in errors)
            err_text = f"{np.median(errors):.2f}/{max(errors):.2f}" if errors else "-"
            cpu = np.median([r["cpu"] for r in mod + plain]) * 1e3 if mod + plain else np.nan
            print(
                f"{kind:<9} {n_mod:>5}/{len(mod):<5} {n_plain:>7}/{len(plain):<5} "
                f"{len(errors):>11} {err_text:>17} {within:>6} {cpu:>8.0f}"
            )
            totals += [n_mod, len(mod), n_plain, len(plain), len(errors)]
            wrong += [(kind, "plain", r) for r in plain if r["flagged"]]
            wrong += [(kind, "modulated", r) for r in mod if not r["flagged"]]
            wrong += [(kind, "modulated", r) for r in mod if r.get("error_res", 0) > 2.0]
    print(f"{'all':<9} {totals[0]:>5}/{totals[1]:<5} {totals[2]:>7}/{totals[3]:<5} {totals[4]:>11}")
    if args.verbose:
        for kind, option, r in wrong:
            print(
                f"  {kind:<9} {option:<9} seed {r['seed']}: {r['description']} "
                f"(true P_mod {r['true_period']:.4g} d, period right {r['period_right']}, "
                f"error {r.get('error_res', float('nan')):.2f}/T)"
            )
    return 0


if __name__ == "__main__":
    sys.exit(main())
