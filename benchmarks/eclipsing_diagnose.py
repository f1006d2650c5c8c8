"""Per-star diagnosis of misclassified stars, and per-class accuracy.

For every star whose top suggestion differs from the injected class, prints
the injected and found period, the candidates with their marks and
false-alarm probabilities, the eclipse-test numbers and the top three
suggestions with their reasons.  Also prints the per-class accuracy and the
median analysis time per star (one process; set OPENBLAS_NUM_THREADS=1).

    python benchmarks/eclipsing_diagnose.py [--seed S] [--n-stars N]
        [--cadence default|dense|sparse] [--classes EA,EB,EW] [--quiet]
        [--json OUT]

A report, not a test: the survey is invented, and the numbers only show
where the methods fail.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from collections import Counter, defaultdict
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.classify_demo import _true_classes  # noqa: E402
from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.synthetic import CadenceSettings, make_survey  # noqa: E402

DEMO_SEED = 20261201

CADENCES = {
    "default": CadenceSettings(),
    # twice the visits per night, V and I
    "dense": CadenceSettings(v_per_night=4.5, i_per_night=2.0),
    # fewer runs and visits: ~half the points
    "sparse": CadenceSettings(runs_per_season=3, v_per_night=1.6, i_per_night=0.7),
}


def _ratio_text(found: float | None, true: float) -> str:
    if not found:
        return "none"
    r = found / true
    for name, value in (("P", 1.0), ("P/2", 0.5), ("2P", 2.0), ("P/3", 1 / 3)):
        if abs(r - value) < 0.002 * value:
            return name
    return f"{r:.4f}P"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEMO_SEED)
    parser.add_argument("--n-stars", type=int, default=300)
    parser.add_argument("--cadence", choices=sorted(CADENCES), default="default")
    parser.add_argument("--classes", default="", help="comma list: only diagnose these")
    parser.add_argument("--quiet", action="store_true", help="accuracy table only")
    parser.add_argument("--json", default="", help="write per-star rows here")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args(argv)
    if args.smoke:
        args.n_stars, args.quiet = 12, True

    survey = make_survey(n_stars=args.n_stars, seed=args.seed, cadence=CADENCES[args.cadence])
    truth_code = _true_classes(survey.truth)
    truth = {t.star_id: t for t in survey.truth}
    only = {c for c in args.classes.split(",") if c}
    settings = AnalysisSettings()
    confusion: dict[str, Counter] = defaultdict(Counter)
    times, rows = [], []
    for lc in survey.lightcurves:
        start = time.perf_counter()
        result = analyse(lc, settings)
        times.append(time.perf_counter() - start)
        d = result.to_dict()
        sugg = d["suggestions"] or []
        top = sugg[0]["class"] if sugg else "UNKNOWN"
        top_period = sugg[0].get("period") if sugg else None
        code = truth_code[lc.star_id]
        confusion[code][top] += 1
        tr = truth[lc.star_id]
        rows.append(
            {
                "star_id": lc.star_id,
                "truth": code,
                "top": top,
                "true_period": tr.period,
                "period": d["period"],
                "top_period": top_period,
                "n": d["n_good"],
                "features": {k: v for k, v in d["features"].items() if isinstance(v, (int, float))},
                "eclipse": d["eclipse"],
            }
        )
        if top == code or args.quiet or (only and code not in only):
            continue
        print(
            f"\n== {lc.star_id} truth {code} P={tr.period:.5f} A_V={tr.amplitude_V:.3f}"
            f" n={d['n_good']} status={d['status']} found P={d['period'] or 0:.5f}"
            f" ({_ratio_text(d['period'], tr.period)}) fap={d['fap'] or float('nan'):.2g}"
            f" top={top} P_top={top_period or 0:.5f}"
            f" ({_ratio_text(top_period, tr.period)})"
        )
        for i, c in enumerate(d["candidates"]):
            mark = "*" if i == d["chosen_candidate"] else " "
            print(
                f"  {mark}cand P={c['period']:.5f} ({_ratio_text(c['period'], tr.period)})"
                f" pow={c['power']:.3f} fap={c['fap']:.2g} snr={c['snr']:.1f}"
                f" marks={','.join(c['marks'])}"
            )
        e = d["eclipse"] or {}
        if e:
            print(
                "  eclipse: d1={depth_primary:.3f} d2={depth_secondary:.3f} "
                "diff={depth_difference:.3f}±{depth_difference_err:.3f} "
                "sep={phase_separation:.3f} odd={odd_harmonic_fraction:.2f} "
                "asym={asymmetry:.3f} order2P={order_doubled} unequal={unequal_minima} "
                "second_at_p={depth_secondary_at_p}".format(**e)
            )
        f = d["features"]
        print(
            "  feat: "
            + " ".join(
                f"{k}={f.get(k):.3g}" if isinstance(f.get(k), float) else f"{k}={f.get(k)}"
                for k in (
                    "amplitude",
                    "R21",
                    "skewness",
                    "rise_time",
                    "depth_difference_fraction",
                    "second_harmonic_weight",
                    "amplitude_to_noise",
                )
            )
        )
        for s in sugg[:3]:
            print(f"  -> {s['class']} {s['score']:.3f} P={s.get('period')} note={s.get('note')}")
            print(f"     for: {'; '.join(s['reasons'][:6])}")
            print(f"     against: {'; '.join(s.get('against', [])[:4])}")

    print(f"\nseed {args.seed} cadence {args.cadence} n={args.n_stars}")
    print(f"{'class':<9}{'n':>4}{'right':>8}  wrong as")
    for code in sorted(confusion):
        row = confusion[code]
        n = sum(row.values())
        wrong = ", ".join(f"{k}:{v}" for k, v in row.most_common() if k != code)
        print(f"{code:<9}{n:>4}{row[code] / n:>8.0%}  {wrong}")
    print(
        f"median time per star: {1000 * np.median(times):.1f} ms (mean {1000 * np.mean(times):.1f})"
    )
    if args.json:
        Path(args.json).write_text(json.dumps(rows))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
