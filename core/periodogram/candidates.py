"""Candidate periods: the best distinct peaks, their significance and marks.

Marks (tolerance ``tol = settings.mark_tolerance / T``, T the baseline, so it
scales with the peak width 1/T) relate a candidate to a *stronger* one:

* ``harmonic``: ``|f - n f_other| <= tol`` for n = 2 .. ``max_harmonic``;
* ``subharmonic``: ``|n f - f_other| <= tol``;
* ``alias``: ``|f - (f_other + w)| <= tol`` or ``|f - |f_other - w|| <= tol``
  for a peak w of the spectral window of the sampling.

Local signal-to-noise is a robust z-score of the peak: (power - local
median) / (1.4826 x local MAD), over grid points within +-0.5 c/d (at least
100 grid steps) of the peak, leaving out +-2/T around it.  It applies to
every method alike.

FAP: see :mod:`core.periodogram.fap`; ``fap_method`` says which one:
``"baluev"`` (GLS, one band), ``"f_test"`` (multi-harmonic, multi-band),
``"gls_at_frequency"`` (PDM and CE carry the Baluev FAP of the GLS power at
their frequency), ``"none"`` (a flat periodogram: FAP 1).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .compute import search_bands
from .fap import baluev_fap, f_test_fap
from .kernels.gls import gls_exact
from .result import Periodogram
from .settings import PeriodogramSettings
from .window import WindowPeak, _parabola_offset, candidate_windows

__all__ = ["Candidate", "find_candidates", "candidate_marks"]

MARKS = ("harmonic", "subharmonic", "alias")


@dataclass(frozen=True)
class Candidate:
    """One candidate period.

    ``frequency`` is refined between grid points by a parabola through the
    top three; ``power`` is the grid maximum.  ``marks`` are among
    ``harmonic``, ``subharmonic``, ``alias``; ``mark_details`` say which
    stronger candidate (and window peak) each mark comes from.
    """

    frequency: float
    period: float
    power: float
    fap: float | None
    snr: float
    marks: tuple[str, ...] = ()
    mark_details: tuple[str, ...] = ()
    rank: int = 1
    fap_method: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "rank": self.rank,
            "frequency": self.frequency,
            "period": self.period,
            "power": self.power,
            "fap": self.fap,
            "fap_method": self.fap_method,
            "snr": self.snr,
            "marks": list(self.marks),
            "mark_details": list(self.mark_details),
        }


def _peak_indices(power: np.ndarray, frequency: np.ndarray, k: int, separation: float):
    """Indices of the k highest local maxima at least ``separation`` apart."""
    if power.size < 3:
        return [int(np.argmax(power))]
    inner = np.flatnonzero((power[1:-1] > power[:-2]) & (power[1:-1] >= power[2:])) + 1
    if inner.size == 0:
        return [int(np.argmax(power))]
    chosen: list[int] = []
    pool = 50 * k
    while True:
        if inner.size > pool:
            top = inner[np.argpartition(power[inner], -pool)[-pool:]]
        else:
            top = inner
        top = top[np.argsort(power[top])[::-1]]
        chosen = []
        for i in top:
            f = frequency[i]
            if all(abs(f - frequency[j]) > separation for j in chosen):
                chosen.append(int(i))
                if len(chosen) == k:
                    return chosen
        if top.size == inner.size:
            return chosen
        pool *= 4


def _local_snr(power, frequency, index, baseline, df):
    half = max(0.5, 100 * df)
    lo, hi = np.searchsorted(frequency, [frequency[index] - half, frequency[index] + half])
    around = power[lo:hi]
    near = np.abs(frequency[lo:hi] - frequency[index]) <= 2.0 / baseline
    around = around[~near]
    if around.size < 10:
        return float("nan")
    median = np.median(around)
    mad = 1.4826 * np.median(np.abs(around - median))
    excess = power[index] - median
    if mad > 0:
        return float(excess / mad)
    return float("inf") if excess > 0 else 0.0


def candidate_marks(
    frequencies, windows: tuple[WindowPeak, ...], baseline: float, settings: PeriodogramSettings
):
    """Marks and details for candidates given strongest first."""
    tol = settings.mark_tolerance / baseline
    result = []
    for i, f in enumerate(frequencies):
        marks: list[str] = []
        details: list[str] = []
        for j in range(i):
            other = frequencies[j]
            for n in range(2, settings.max_harmonic + 1):
                if abs(f - n * other) <= tol:
                    marks.append("harmonic")
                    details.append(f"harmonic {n}f of {other:.6g} c/d (candidate {j + 1})")
                if abs(n * f - other) <= tol:
                    marks.append("subharmonic")
                    details.append(f"subharmonic f/{n} of {other:.6g} c/d (candidate {j + 1})")
            for w in windows:
                if (
                    abs(f - (other + w.frequency)) <= tol
                    or abs(f - abs(other - w.frequency)) <= tol
                ):
                    marks.append("alias")
                    details.append(
                        f"alias of {other:.6g} c/d (candidate {j + 1}) "
                        f"via window peak {w.frequency:.6g} c/d"
                    )
        unique = tuple(m for m in MARKS if m in marks)
        result.append((unique, tuple(details)))
    return result


def find_candidates(
    periodogram: Periodogram,
    lc,
    settings: PeriodogramSettings | None = None,
    *,
    windows: tuple[WindowPeak, ...] | None = None,
    n_effective: float | None = None,
) -> tuple[Candidate, ...]:
    """The ``settings.n_candidates`` best distinct peaks, strongest first.

    Peaks closer than ``settings.peak_separation / T`` (T the baseline; at
    least 3 grid steps) count as one.  ``windows`` may pass precomputed
    :func:`~core.periodogram.window.candidate_windows` (stars that share
    their epochs share them); by default they are computed from the light
    curve's good times.  ``n_effective`` (independent points, fewer than
    the points when the noise is correlated; see
    :func:`~core.periodogram.fap.effective_points`) makes the false-alarm
    probabilities count only those.
    """
    settings = periodogram.settings if settings is None else settings
    frequency, power = periodogram.frequency, periodogram.power
    baseline = periodogram.baseline
    df = periodogram.frequency_step
    separation = max(settings.peak_separation / baseline, 3 * df)
    indices = _peak_indices(power, frequency, settings.n_candidates, separation)
    refined = []
    for i in indices:
        if 0 < i < frequency.size - 1 and df > 0:
            refined.append(frequency[i] + df * _parabola_offset(*power[i - 1 : i + 2]))
        else:
            refined.append(float(frequency[i]))
    if windows is None:
        windows = candidate_windows(lc.time[lc.good], settings)
    faps, fap_method = _faps(
        periodogram, lc, settings, np.array(refined), power[indices], n_effective
    )
    marks = candidate_marks(refined, windows, baseline, settings)
    return tuple(
        Candidate(
            frequency=float(f),
            period=float(1.0 / f),
            power=float(power[i]),
            fap=None if fap is None else float(fap),
            snr=_local_snr(power, frequency, i, baseline, df),
            marks=m,
            mark_details=d,
            rank=rank,
            fap_method=fap_method,
        )
        for rank, (f, i, fap, (m, d)) in enumerate(
            zip(refined, indices, faps, marks, strict=True), start=1
        )
    )


def _faps(periodogram, lc, settings, freqs, powers, n_effective=None):
    bands = periodogram.bands or search_bands(lc, settings)
    use_errors = bool(lc.has_errors)
    per_band = [lc.arrays(b) for b in bands] if bands else [lc.arrays()]
    fmax = float(periodogram.frequency[-1])
    fmin = float(periodogram.frequency[0])
    n_total = sum(t.size for t, _, _ in per_band)
    method = periodogram.method
    if not np.any(powers > 0):  # a flat periodogram (constant curve): nothing found
        return np.ones(len(powers)), "none"
    if method == "gls" and len(per_band) == 1:
        t, _, dy = per_band[0]
        fap = baluev_fap(powers, fmax, t, dy if use_errors else None, n_effective)
        return fap, "baluev"
    if method in ("gls", "mhgls"):
        nterms = settings.nterms if method == "mhgls" else 1
        n_bands = len(per_band)
        m_independent = (fmax - fmin) * periodogram.baseline
        n_used = n_total if n_effective is None else min(n_total, n_effective)
        fap = f_test_fap(powers, n_used, 2 * nterms * n_bands, n_bands, m_independent)
        return fap, "f_test"
    # PDM / CE: Baluev FAP of the GLS power of the main band at each candidate.
    t, y, dy = per_band[0]
    dy = dy if use_errors else None
    t0 = 0.5 * (t.min() + t.max())
    gls_power, _ = gls_exact(t - t0, y, dy, freqs)
    return baluev_fap(gls_power, fmax, t, dy, n_effective), "gls_at_frequency"
