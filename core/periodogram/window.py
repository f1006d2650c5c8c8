"""The spectral window of the sampling and its peaks.

The window at frequency f is ``|sum_i w_i exp(2 pi i f t_i)|^2 / (sum_i w_i)^2``
(1 at f = 0).  A strong window peak at w means a signal at f also shows at
f +- w: the alias the candidate marks point to (common practice, e.g. the
1 c/d of nightly sampling, 1/yr of seasons, the lunar month).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .grid import regular_grid_of
from .kernels.nufft import trig_sums

__all__ = ["WindowPeak", "spectral_window", "window_peaks", "candidate_windows", "WINDOW_FMAX"]

#: Highest frequency (c/d) searched for window peaks: covers 1, 2 and 3 c/d.
WINDOW_FMAX = 3.5


@dataclass(frozen=True)
class WindowPeak:
    """A peak of the spectral window: frequency (c/d) and window power in [0, 1]."""

    frequency: float
    power: float

    @property
    def period(self) -> float:
        return 1.0 / self.frequency

    def to_dict(self) -> dict:
        return {"frequency": self.frequency, "period": self.period, "power": self.power}


def spectral_window(time, frequency, weights=None) -> np.ndarray:
    """Spectral window of the sampling ``time`` at ``frequency`` (c/d).

    Parameters
    ----------
    time : array of float
        Observation times, days.
    frequency : array of float
        Frequencies, cycles/day (any spacing).
    weights : array of float, optional
        Point weights (e.g. 1/err**2); equal weights by default.
    """
    t = np.asarray(time, dtype=float)
    t = t - 0.5 * (t.min() + t.max())
    frequency = np.asarray(frequency, dtype=float)
    w = np.ones(t.size) if weights is None else np.asarray(weights, dtype=float)
    if frequency.size == 0:
        return np.zeros(0)
    grid = regular_grid_of(frequency) if frequency.ndim == 1 else None
    if grid is not None:  # a uniform grid: a type-1 transform with a reused plan
        total = trig_sums(t, w, grid.fmin, grid.df, grid.n)
    else:
        import finufft

        total = finufft.nufft1d3(
            2.0 * np.pi * t, w.astype(complex), frequency, eps=1e-10, nthreads=1
        )
    return (total.real**2 + total.imag**2) / w.sum() ** 2


def window_peaks(
    time,
    *,
    fmax: float = WINDOW_FMAX,
    threshold: float = 0.25,
    max_peaks: int = 8,
    oversampling: float = 10.0,
    weights=None,
) -> tuple[WindowPeak, ...]:
    """Strongest distinct peaks of the spectral window above ``threshold``.

    The central lobe (f < 1.5/T) is skipped; peaks are at least 1/T apart,
    strongest first, their frequency refined by a parabola through the top
    three grid points.
    """
    t = np.asarray(time, dtype=float)
    baseline = float(t.max() - t.min()) if t.size > 1 else 0.0
    if not baseline > 0:
        return ()
    df = 1.0 / (oversampling * baseline)
    fmin = 1.5 / baseline
    if fmin >= fmax:
        return ()
    frequency = fmin + df * np.arange(int((fmax - fmin) / df) + 1)
    window = spectral_window(t, frequency, weights)
    inner = np.flatnonzero(
        (window[1:-1] > window[:-2]) & (window[1:-1] >= window[2:]) & (window[1:-1] >= threshold)
    )
    peaks: list[WindowPeak] = []
    for i in (inner + 1)[np.argsort(window[inner + 1])[::-1]]:
        f = frequency[i] + df * _parabola_offset(window[i - 1], window[i], window[i + 1])
        if all(abs(f - p.frequency) > 1.0 / baseline for p in peaks):
            peaks.append(WindowPeak(float(f), float(window[i])))
            if len(peaks) >= max_peaks:
                break
    return tuple(peaks)


def candidate_windows(time, settings) -> tuple[WindowPeak, ...]:
    """Window peaks the candidates' alias marks use.

    The peaks of :func:`window_peaks` up to :data:`WINDOW_FMAX`, and for
    regular sampling the window's peak at the sampling frequency 1/step
    (power 1 there): a candidate at ``1/step - f`` is the reflection of
    ``f`` about the pseudo-Nyquist frequency (Eyer & Bartholdi 1999, from
    memory) and is marked ``alias`` like any other.
    """
    from .grid import sampling_of

    t = np.asarray(time, dtype=float)
    peaks = window_peaks(t, threshold=settings.window_threshold, oversampling=settings.oversampling)
    sampling = sampling_of(t)
    if sampling.nyquist is not None and 2.0 * sampling.nyquist > WINDOW_FMAX:
        peaks = (*peaks, WindowPeak(2.0 * sampling.nyquist, 1.0))
    return peaks


def _parabola_offset(left: float, centre: float, right: float) -> float:
    """Offset (in grid steps, within +-0.5) of a parabola's top through three points."""
    denom = left - 2.0 * centre + right
    if denom >= 0:
        return 0.0
    return float(np.clip(0.5 * (left - right) / denom, -0.5, 0.5))
