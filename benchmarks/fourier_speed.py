"""Fourier fitting per star: this tree's core.fourier against an older one.

    python benchmarks/fourier_speed.py [--stars 60] [--ref main] [--repeat 7] [--analyse]

Runs ``analyse`` once on a synthetic field (700 epochs, a grid of about
100,000 frequencies, as in bench_analysis.py) and records every call it
makes to the Fourier fitting functions (``choose_order``, ``fit_fourier``,
``decompose``, ``refine_frequency``, ``multi_frequency_fit``; the names the
analysis, prewhitening and eclipse modules import).  It then replays exactly
those calls through this tree's ``core.fourier`` and through the
``core/fourier.py`` of git revision ``--ref`` (loaded into a temporary
module), alternating, and prints the best-of-``--repeat`` time per star of
each function, their ratio, and how far the results of the two agree.
``--analyse`` also times the whole ``analyse`` per star with either module
in place.

One core: BLAS and OpenMP are pinned to one thread before numpy loads.
Figures are a report of this run on this machine, not a test.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import importlib.util  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from phasewise import core  # noqa: E402
from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.errors import PhasewiseError  # noqa: E402
from phasewise.core.periodogram import PeriodogramSettings  # noqa: E402
from phasewise.core.synthetic import synthetic_field  # noqa: E402

#: where each fitting function is looked up by the per-star analysis
IMPORTERS = {
    core.analysis: ("choose_order", "decompose", "fit_fourier", "refine_frequency"),
    core.prewhiten: ("choose_order", "multi_frequency_fit", "_unpack_input"),
    core.eclipse: ("_basis", "choose_order", "fit_fourier"),
}
RECORDED = ("choose_order", "fit_fourier", "decompose", "refine_frequency", "multi_frequency_fit")


def load_reference(rev: str):
    """``core/fourier.py`` of git revision ``rev`` as module ``core._fourier_ref``."""
    source = subprocess.run(
        ["git", "-C", str(ROOT), "show", f"{rev}:core/fourier.py"],
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    spec = importlib.util.spec_from_loader("phasewise.core._fourier_ref", loader=None)
    module = importlib.util.module_from_spec(spec)
    module.__package__ = "phasewise.core"  # its relative imports resolve in this tree
    sys.modules[spec.name] = module
    exec(compile(source, f"{rev}:core/fourier.py", "exec"), module.__dict__)
    return module


def use(module) -> None:
    """Point the importing modules at ``module``'s fitting functions."""
    for importer, names in IMPORTERS.items():
        for name in names:
            setattr(importer, name, getattr(module, name))


def field_and_settings(n_stars: int):
    field = synthetic_field(n_stars, n_epochs=700, seed=7)
    span = float(np.nanmax(field.time) - np.nanmin(field.time))
    fmax = 1 / span + (100_000 - 0.5) / (5 * span)
    return field.lightcurves(), AnalysisSettings(periodogram=PeriodogramSettings(fmax=fmax))


def record(lightcurves, settings) -> list[tuple[str, tuple, dict]]:
    """Every top-level fitting call one analysis of each star makes."""
    calls: list[tuple[str, tuple, dict]] = []

    def recording(name, fn):
        def wrapper(*args, **kwargs):
            calls.append((name, args, kwargs))
            return fn(*args, **kwargs)

        return wrapper

    for importer, names in IMPORTERS.items():
        for name in names:
            if name in RECORDED:
                setattr(importer, name, recording(name, getattr(core.fourier, name)))
    try:
        for lc in lightcurves:
            analyse(lc, settings)
    finally:
        use(core.fourier)
    return calls


def replay(module, calls):
    out = []
    for name, args, kwargs in calls:
        try:
            out.append(getattr(module, name)(*args, **kwargs))
        except PhasewiseError as exc:
            out.append(exc.reason)
    return out


def best_seconds(module, calls, repeat: int, other=None) -> tuple[float, float]:
    """Best of ``repeat`` replays of ``module`` (and ``other``, alternating)."""
    best = [np.inf, np.inf]
    for _ in range(repeat):
        for i, mod in enumerate((module, other)):
            if mod is None:
                continue
            start = time.perf_counter()
            replay(mod, calls)
            best[i] = min(best[i], time.perf_counter() - start)
    return best[0], best[1]


def agreement(ref_out, new_out, name) -> str:
    """Largest differences between the two modules' results of one function."""
    if name == "choose_order":
        pairs = [(a, b) for a, b in zip(ref_out, new_out, strict=True) if not isinstance(a, str)]
        same = sum(a.order == b.order and a.max_allowed == b.max_allowed for a, b in pairs)
        return f"same order {same}/{len(pairs)}"
    if name in ("fit_fourier", "decompose"):
        fits = []
        for a, b in zip(ref_out, new_out, strict=True):
            if isinstance(a, dict):
                fits += list(zip(a.values(), b.values(), strict=True))
            elif not isinstance(a, str):
                fits.append((a, b))
        amp = max(np.max(np.abs(np.subtract(a.amplitudes, b.amplitudes))) for a, b in fits)
        phase = max(
            np.max(np.abs(np.angle(np.exp(1j * np.subtract(a.phases, b.phases))))) for a, b in fits
        )
        same = sum(a.order == b.order for a, b in fits)
        return f"same order {same}/{len(fits)}, amplitudes {amp:.1e} mag, phases {phase:.1e} rad"
    if name == "refine_frequency":
        pairs = list(zip(ref_out, new_out, strict=True))
    else:
        pairs = [(a, b) for a, b in zip(ref_out, new_out, strict=True)]
    rel = [np.max(np.abs(_freqs(a) - _freqs(b)) / _freqs(b)) for a, b in pairs]
    sig = max(np.max(np.abs(_freqs(a) - _freqs(b)) / _ferrs(b)) for a, b in pairs)
    return (
        f"frequencies {max(rel):.1e} relative (median {np.median(rel):.1e}),"
        f" {sig:.1e} of their errors"
    )


def converged_reference(reference, calls):
    """The reference's joint fits with least_squares run to machine tolerance.

    Shows how far the reference itself stops from the minimum; None when the
    reference does not use scipy's least_squares.
    """
    scipy_optimize = getattr(reference, "optimize", None)
    if scipy_optimize is None:
        return None

    class Tight:
        @staticmethod
        def least_squares(*args, **kwargs):
            kwargs.update(ftol=1e-15, xtol=1e-15, gtol=1e-15)
            return scipy_optimize.least_squares(*args, **kwargs)

    subset = [c for c in calls if c[0] == "multi_frequency_fit"]
    reference.optimize = Tight
    try:
        tight = replay(reference, subset)
    finally:
        reference.optimize = scipy_optimize
    return subset, tight


def _freqs(result):
    return np.atleast_1d(getattr(result, "frequencies", getattr(result, "frequency", None)))


def _ferrs(result):
    return np.atleast_1d(getattr(result, "frequencies_err", getattr(result, "frequency_err", None)))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=60)
    parser.add_argument("--ref", default="main", help="git revision to compare with")
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--analyse", action="store_true", help="also time analyse() per star")
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    args = parser.parse_args()
    if args.smoke:
        args.stars, args.repeat, args.ref = 2, 1, "HEAD"

    reference = load_reference(args.ref)
    lightcurves, settings = field_and_settings(args.stars)
    calls = record(lightcurves, settings)
    n = len(lightcurves)
    print(
        f"{n} stars, {len(calls)} fitting calls recorded; reference core/fourier.py of {args.ref}"
    )
    print(
        f"{'function':22s} {'calls/star':>10s} {'ref ms/star':>12s} {'new ms/star':>12s} {'ratio':>6s}"
    )
    totals = [0.0, 0.0]
    lines = []
    for name in RECORDED:
        subset = [c for c in calls if c[0] == name]
        new_s, ref_s = best_seconds(core.fourier, subset, args.repeat, reference)
        totals[0] += ref_s
        totals[1] += new_s
        print(
            f"{name:22s} {len(subset) / n:10.1f} {1e3 * ref_s / n:12.2f} {1e3 * new_s / n:12.2f}"
            f" {ref_s / new_s:6.2f}"
        )
        lines.append(
            f"  {name}: {agreement(replay(reference, subset), replay(core.fourier, subset), name)}"
        )
    print(
        f"{'all fitting calls':22s} {len(calls) / n:10.1f} {1e3 * totals[0] / n:12.2f}"
        f" {1e3 * totals[1] / n:12.2f} {totals[0] / totals[1]:6.2f}"
    )
    print("agreement, reference against new:")
    print("\n".join(lines))
    converged = converged_reference(reference, calls)
    if converged is not None:
        subset, tight = converged
        print("joint fits against the reference's least_squares run to ftol=xtol=gtol=1e-15:")
        for tag, module in (("reference", reference), ("new", core.fourier)):
            print(f"  {tag:9s}: {agreement(replay(module, subset), tight, 'multi_frequency_fit')}")
    if args.analyse:
        best = {}
        for _ in range(max(1, args.repeat // 3)):
            for tag, module in (("ref", reference), ("new", core.fourier)):
                use(module)
                start = time.perf_counter()
                for lc in lightcurves:
                    analyse(lc, settings)
                best[tag] = min(best.get(tag, np.inf), time.perf_counter() - start)
        use(core.fourier)
        print(
            f"analyse per star: ref {1e3 * best['ref'] / n:.1f} ms, new {1e3 * best['new'] / n:.1f} ms"
        )


if __name__ == "__main__":
    main()
