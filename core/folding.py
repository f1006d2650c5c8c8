"""Folding a light curve on a trial period, and picking peaks by hand.

Small pure functions behind the folded-curve and periodogram panels of the
desk: phases, the two-cycle view, the period step of a nudge and the snap of
a click to the periodogram's local maximum.  Inputs are bare float arrays in
days (times, periods) and cycles per day (frequencies).
"""

from __future__ import annotations

import numpy as np

from .errors import PhasewiseError

__all__ = [
    "phase_fold",
    "two_cycles",
    "period_step",
    "snap_to_peak",
    "phase_grid_times",
    "power_at_fap",
]


def phase_fold(time, period: float, epoch: float = 0.0) -> np.ndarray:
    """Phase of each time on ``period``, in [0, 1), zero at ``epoch``.

    Parameters
    ----------
    time : array of float
        Times in days.
    period : float
        Trial period in days (> 0).
    epoch : float
        Time of phase zero in days; the desk passes the epoch of maximum
        light so that phase 0 is maximum (common practice, no source).

    Returns
    -------
    ndarray
        ``((time - epoch) / period) mod 1``.
    """
    if not np.isfinite(period) or period <= 0:
        raise PhasewiseError(f"a period must be positive, got {period!r}", field="period")
    cycles = (np.asarray(time, dtype=float) - float(epoch)) / float(period)
    phase = cycles - np.floor(cycles)
    # floating round-off can give exactly 1.0 for tiny negative cycles
    phase[phase >= 1.0] = 0.0
    return phase


def two_cycles(phase, *values):
    """Repeat folded data over phase 0–2.

    Returns ``(phase2, *values2)`` where ``phase2`` is ``phase`` followed by
    ``phase + 1`` and each of ``values`` is repeated once, so the shape near
    phase 0/1 is seen whole.
    """
    phase = np.asarray(phase, dtype=float)
    out = [np.concatenate([phase, phase + 1.0])]
    for v in values:
        v = np.asarray(v)
        out.append(np.concatenate([v, v]))
    return tuple(out)


def phase_grid_times(period: float, epoch: float, n: int = 400, cycles: float = 2.0):
    """Evenly spaced phases over ``cycles`` and the times they stand for.

    Used to draw a smooth model over a folded curve: evaluate the model at
    the returned times, plot it against the returned phases.
    """
    phase = np.linspace(0.0, cycles, int(n))
    return phase, float(epoch) + phase * float(period)


def period_step(period: float, baseline: float, cycles: float = 0.01) -> float:
    """Period change that shifts the phase of the last point by ``cycles``.

    Over a baseline ``T`` a change ``dP`` of the period moves the phase of
    the last observation by ``T dP / P**2`` cycles, so
    ``dP = cycles * P**2 / T``.  With no baseline the step is
    ``cycles * P``.
    """
    if not np.isfinite(period) or period <= 0:
        raise PhasewiseError(f"a period must be positive, got {period!r}", field="period")
    if baseline is None or not np.isfinite(baseline) or baseline <= 0:
        return float(cycles) * float(period)
    return float(cycles) * float(period) ** 2 / float(baseline)


def snap_to_peak(frequency, power, f_click: float, half_width: int | None = None) -> int:
    """Index of the periodogram peak nearest a click.

    Looks for the highest power within ``half_width`` grid points of the
    clicked frequency, then climbs to the local maximum from there, so a
    click on the flank of a peak lands on its top.

    Parameters
    ----------
    frequency, power : array of float
        The periodogram (frequency increasing; larger power = better).
    f_click : float
        Clicked frequency, same unit as ``frequency``.
    half_width : int, optional
        Search half-width in grid points (default: 0.2 % of the grid, at
        least 3 points).
    """
    frequency = np.asarray(frequency, dtype=float)
    power = np.asarray(power, dtype=float)
    n = frequency.size
    if n == 0 or power.size != n:
        raise PhasewiseError("a periodogram needs matching, non-empty frequency and power")
    if half_width is None:
        half_width = max(3, n // 500)
    i0 = int(np.clip(np.searchsorted(frequency, f_click), 0, n - 1))
    if i0 > 0 and abs(frequency[i0 - 1] - f_click) < abs(frequency[i0] - f_click):
        i0 -= 1
    lo, hi = max(0, i0 - half_width), min(n, i0 + half_width + 1)
    window = np.where(np.isfinite(power[lo:hi]), power[lo:hi], -np.inf)
    i = lo + int(np.argmax(window))
    # climb: the window may have cut a peak on its flank
    while True:
        left = power[i - 1] if i > 0 else -np.inf
        right = power[i + 1] if i < n - 1 else -np.inf
        if right > power[i] and right >= left:
            i += 1
        elif left > power[i]:
            i -= 1
        else:
            return i


def power_at_fap(fap_of_power, fap: float, lo: float = 0.0, hi: float = 1.0, tol: float = 1e-6):
    """Periodogram power at which the false-alarm probability equals ``fap``.

    Bisection on a FAP that falls as the power grows (as every FAP of a
    normalised power does); used to draw FAP levels as lines.

    Parameters
    ----------
    fap_of_power : callable
        ``fap_of_power(power_array) -> fap_array``.
    fap : float
        Target probability in (0, 1).
    lo, hi : float
        Power interval searched.

    Returns
    -------
    float or None
        The power level, or None if ``fap`` is not reached inside [lo, hi].
    """
    if not 0.0 < fap < 1.0:
        raise PhasewiseError(f"a false-alarm probability lies in (0, 1), got {fap!r}", field="fap")

    def f(p: float) -> float:
        return float(np.asarray(fap_of_power(np.array([p])), dtype=float).ravel()[0])

    if f(hi) > fap or f(lo) < fap:
        return None
    while hi - lo > tol:
        mid = 0.5 * (lo + hi)
        if f(mid) > fap:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)
