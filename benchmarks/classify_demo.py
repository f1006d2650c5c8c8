"""Confusion matrix of the rulebook's top suggestion on the demo survey.

Runs the whole per-star analysis on the seeded demo survey and compares the
top suggestion with the injected class.  This is a report, not a pass/fail
test: the target (top suggestion right for >= 90 % of RRab, RRc, DCEP, DSCT
and EW stars) is printed beside the measured accuracy.

    python benchmarks/classify_demo.py [--n-stars N] [--seed S]

Suggestions come from empirical boundaries with overlaps and scatter; the
astronomer decides.
"""

from __future__ import annotations

import argparse
import inspect
import sys
from collections import Counter, defaultdict
from collections.abc import Iterable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from core.analysis import AnalysisSettings, analyse  # noqa: E402
from core.synthetic import make_survey  # noqa: E402

TARGET_CLASSES = ("RRab", "RRc", "DCEP", "DSCT", "EW")
TARGET = 0.90

# Injected names that mean the same class code (subtypes count as their class).
SYNONYMS = {
    "HADS": "DSCT",
    "DCEP_F": "DCEP",
    "DCEPF": "DCEP",
    "DCEP_1O": "DCEP(1O)",
    "DCEP1O": "DCEP(1O)",
    "MIRA": "LPV",
    "SR": "LPV",
    "NONVAR": "CONST",
    "CST": "CONST",
}


def _normalise(code: str) -> str:
    code = str(code).strip()
    return SYNONYMS.get(code.upper().replace(" ", ""), code)


def _truth_rows(truth) -> Iterable[dict]:
    """Rows of the truth table as dicts, whatever container it came in."""
    if hasattr(truth, "colnames"):  # astropy Table
        return [dict(zip(truth.colnames, row, strict=True)) for row in truth]
    if isinstance(truth, dict):
        first = next(iter(truth.values()))
        if isinstance(first, dict):
            return [{"star_id": k, **v} for k, v in truth.items()]
        if isinstance(first, str):
            return [{"star_id": k, "class": v} for k, v in truth.items()]
        keys = list(truth)
        return [
            dict(zip(keys, values, strict=True)) for values in zip(*truth.values(), strict=True)
        ]
    rows = []
    for row in truth:
        if isinstance(row, dict):
            rows.append(row)
        elif hasattr(row, "to_dict"):
            rows.append(row.to_dict())
        else:
            rows.append(vars(row))
    return rows


def _true_classes(truth) -> dict[str, str]:
    out = {}
    for row in _truth_rows(truth):
        code = next(
            (row[k] for k in ("class_code", "class", "true_class", "cls") if k in row), None
        )
        out[str(row["star_id"])] = _normalise(code) if code is not None else "UNKNOWN"
    return out


def _survey(n_stars: int | None, seed: int):
    params = inspect.signature(make_survey).parameters
    kwargs = {}
    if "seed" in params:
        kwargs["seed"] = seed
    if n_stars is not None:
        for name in ("n_stars", "n", "size"):
            if name in params:
                kwargs[name] = n_stars
                break
    survey = make_survey(**kwargs)
    if isinstance(survey, tuple):
        return survey[0], survey[1]
    return survey.lightcurves, survey.truth


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n-stars", type=int, default=None)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)

    lightcurves, truth = _survey(args.n_stars, args.seed)
    truth_by_star = _true_classes(truth)
    settings = AnalysisSettings()
    confusion: dict[str, Counter] = defaultdict(Counter)
    for lc in lightcurves:
        result = analyse(lc, settings).to_dict()
        suggestions = result.get("suggestions") or []
        top = suggestions[0]["class"] if suggestions else "UNKNOWN"
        confusion[truth_by_star.get(str(lc.star_id), "UNKNOWN")][top] += 1

    predicted = sorted({p for row in confusion.values() for p in row})
    width = max(8, *(len(c) for c in predicted + list(confusion)))
    print("rows: injected class; columns: top suggestion")
    print(" " * width + "".join(f"{p:>{width}}" for p in predicted) + f"{'n':>6}{'right':>8}")
    for true in sorted(confusion):
        row = confusion[true]
        n = sum(row.values())
        right = row[true] / n if n else 0.0
        cells = "".join(f"{row[p]:>{width}}" for p in predicted)
        print(f"{true:<{width}}{cells}{n:>6}{right:>8.1%}")
    print()
    print(f"target: top suggestion right for >= {TARGET:.0%} of {', '.join(TARGET_CLASSES)}")
    for code in TARGET_CLASSES:
        row = confusion.get(code)
        if not row:
            print(f"  {code:<8} no stars of this class in the survey")
            continue
        accuracy = row[code] / sum(row.values())
        verdict = "meets" if accuracy >= TARGET else "BELOW"
        print(f"  {code:<8} {accuracy:6.1%}  {verdict} target")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
