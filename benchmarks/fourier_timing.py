"""Time the Fourier-side steps of the per-star analysis on an invented star.

700 points of an RRab-like curve over 300 days.  Prints the median of
repeated runs of each step, measured in this one run.  The residual search of
prewhitening is a direct nifty-ls call on 100,000 frequencies, timed apart so
our own share shows.

One-core figures: the script pins BLAS and OpenMP to one thread before numpy
loads (small QR factorisations and NUFFTs are many times slower when their
threads fight other processes for two cores).
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import statistics  # noqa: E402
import time  # noqa: E402

import nifty_ls  # noqa: E402
import numpy as np  # noqa: E402

from phasewise.core.eclipse import eclipse_test  # noqa: E402
from phasewise.core.fourier import choose_order, decompose, fit_fourier, refine_frequency  # noqa: E402
from phasewise.core.lightcurve import LightCurve  # noqa: E402
from phasewise.core.prewhiten import PrewhitenSettings, prewhiten  # noqa: E402

N_FREQ = 100_000
#: repeats per timed step (1 with --smoke)
REPEAT = 30


def star():
    rng = np.random.default_rng(2026)
    t = np.sort(rng.uniform(0, 300, 700))
    f = 1 / 0.5731
    amps, phases = (0.35, 0.17, 0.11, 0.07, 0.04), (1.0, 2.6, 3.5, 0.3, 5.0)
    mag = 15 + sum(
        a * np.sin(2 * np.pi * (i + 1) * f * t + p)
        for i, (a, p) in enumerate(zip(amps, phases, strict=True))
    )
    mag = mag + 0.02 * np.sin(2 * np.pi * 1.31 * t)  # a weak second signal
    mag = mag + rng.normal(0, 0.02, t.size)
    return LightCurve("bench-rr", t, mag, np.full(t.size, 0.02)), f


def nifty_search(lc):
    t, m, e = lc.arrays()
    res = nifty_ls.lombscargle(t, m, e, fmin=0.01, fmax=20.0, Nf=N_FREQ)
    return res.freq(), res.power


def median_ms(fn, repeat=None):
    repeat = REPEAT if repeat is None else min(repeat, REPEAT)
    fn()
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return 1e3 * statistics.median(times)


def main() -> None:
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--smoke", action="store_true", help="a tiny run that only checks the script works"
    )
    global REPEAT
    if parser.parse_args().smoke:
        REPEAT = 1
    lc, f = star()
    t, m, e = lc.arrays()
    order = choose_order(t, m, e, f).order
    rows = {
        "choose_order": median_ms(lambda: choose_order(t, m, e, f)),
        f"fit_fourier (order {order})": median_ms(lambda: fit_fourier(t, m, e, f, order)),
        "decompose (order choice + fit)": median_ms(lambda: decompose(lc, f)),
        "refine_frequency": median_ms(lambda: refine_frequency(lc, f * (1 + 2e-6), order)),
        "eclipse_test": median_ms(lambda: eclipse_test(lc, f)),
        "nifty-ls search alone": median_ms(lambda: nifty_search(lc)),
    }
    settings = PrewhitenSettings(max_frequencies=5)
    total, own, n_search = [], [], []
    for _ in range(2 if REPEAT == 1 else 11):
        spent = []

        def timed(lc_, spent=spent):
            begin = time.perf_counter()
            out = nifty_search(lc_)
            spent.append(time.perf_counter() - begin)
            return out

        begin = time.perf_counter()
        prewhiten(lc, f, settings, timed)
        elapsed = time.perf_counter() - begin
        total.append(elapsed)
        own.append(elapsed - sum(spent))
        n_search.append(len(spent))
    rows[f"prewhiten (up to 5, {n_search[-1]} searches)"] = 1e3 * statistics.median(total[1:])
    rows["prewhiten without its searches"] = 1e3 * statistics.median(own[1:])
    rows["prewhiten, default search"] = median_ms(lambda: prewhiten(lc, f, settings), repeat=10)
    for name, ms in rows.items():
        print(f"{name:40s} {ms:8.2f} ms")


if __name__ == "__main__":
    main()
