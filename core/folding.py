"""Folding a light curve on a trial period, and picking peaks by hand.

Small pure functions behind the folded-curve and periodogram panels of the
desk: phases, the two-cycle view, the period step of a nudge and the snap of
a click to the periodogram's local maximum.  Inputs are bare float arrays in
days (times, periods) and cycles per day (frequencies).
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass, replace

import numpy as np

from .errors import PhasewiseError

__all__ = [
    "phase_fold",
    "two_cycles",
    "period_step",
    "snap_to_peak",
    "phase_grid_times",
    "fap_power_levels",
    "power_at_fap",
    "FoldModel",
    "fold_model",
    "fold_points",
    "FoldModelCache",
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


def fap_power_levels(
    periodogram, lc, settings, faps: tuple[float, ...] = (0.1, 0.01, 0.001)
) -> tuple[tuple[float, float], ...]:
    """``(fap, power)`` pairs: the power at which a peak's false-alarm
    probability equals each of ``faps``, by the same rule the candidates'
    FAPs use (GLS and multi-harmonic periodograms only; others give ``()``).
    """
    if periodogram.method not in ("gls", "mhgls"):
        return ()
    from .periodogram.candidates import _faps

    def fap_of_power(power):
        power = np.asarray(power, dtype=float)
        return _faps(periodogram, lc, settings, np.zeros(len(power)), power)[0]

    levels = []
    for fap in faps:
        level = power_at_fap(fap_of_power, fap)
        if level is not None:
            levels.append((fap, level))
    return tuple(levels)


@dataclass(frozen=True)
class FoldModel:
    """The analysis model of one band at one trial period, ready to draw.

    Attributes
    ----------
    period, epoch : float
        Trial period and the time of phase zero (days).
    epoch_kind : str
        ``"maximum"`` (maximum light of the model) or ``"primary_minimum"``
        (eclipsing classes, measured from the points as the final numbers are).
    phase_grid, model_grid : ndarray
        The model over phase 0–2 (for the line).
    time, mag, err : ndarray
        The band's points with a finite time and magnitude, time-sorted.
    index : ndarray of int
        Index of each of those points in the full light curve.
    excluded, set_aside : ndarray of bool
        Excluded by the user; set aside by the analysis (cleaning rules and
        residual outliers of the Fourier fit).  Disjoint.
    residual : ndarray
        ``mag - model`` at every point (nan without a model).
    rms : float or None
        The fit's residual standard deviation (``FourierFit.residual_std``,
        over the points it was fitted to: neither excluded nor set aside).
    order : int or None
        Fourier order chosen at this period (None: no fit possible).
    """

    period: float
    epoch: float
    epoch_kind: str
    phase_grid: np.ndarray
    model_grid: np.ndarray
    time: np.ndarray
    mag: np.ndarray
    err: np.ndarray
    index: np.ndarray
    excluded: np.ndarray
    set_aside: np.ndarray
    residual: np.ndarray
    rms: float | None
    order: int | None

    @property
    def used(self) -> np.ndarray:
        """Points the model was fitted to."""
        return ~(self.excluded | self.set_aside)


def fold_model(
    lc,
    period: float,
    settings=None,
    band: str | None = None,
    eclipsing: bool = False,
    n_grid: int = 400,
    result=None,
) -> FoldModel:
    """Fit the analysis model of ``band`` at a trial period, with the analysis's rules.

    The same steps as ``core.analysis.analyse`` after its period choice:
    the cleaning rules, the points its period choice set aside and the trend
    it removed (both from the stored result: they are decisions of the
    analysis, kept while the period is tried), the per-band Fourier order
    choice and the residual-outlier set-aside (``settings.outlier_sigma``).
    At the analysed period the line is therefore the analysis's own fit.

    Parameters
    ----------
    lc : LightCurve
    period : float
        Trial period in days.
    settings : AnalysisSettings, optional
    band : str, optional
        Default: the light curve's band with most points.
    eclipsing : bool
        Put phase 0 at primary minimum (``core.final.eclipse_shape``, as the
        final numbers do) instead of the model's maximum light, and set no
        points aside (they would be the eclipse).
    result : mapping, optional
        The stored analysis (``AnalysisResult.to_dict()``): its ``set_aside``
        points (less the residual outliers of its Fourier fit, found again
        here at the trial period, ``outlier_times``) and its ``trend``
        (removed before the fit; the points are drawn with it removed too).
    """
    # imported here: the analysis pulls in scipy.stats, not needed to open the window
    from .analysis import AnalysisSettings, _decompose_with_outliers
    from .clean import clean
    from .period_choice import _detrended, trend_values

    if not np.isfinite(period) or period <= 0:
        raise PhasewiseError(f"a period must be positive, got {period!r}", field="period")
    settings = settings or AnalysisSettings()
    band = band if band is not None else (lc.bands[0] if lc.bands else None)
    if band is None:
        raise PhasewiseError("the light curve has no good point to fold", field=lc.star_id)
    if eclipsing:
        # as the final numbers do (core.final): a Fourier residual rule cannot follow
        # a narrow eclipse, so the points it would set aside are mostly the eclipse
        settings = replace(settings, outlier_sigma=None)
    cleaned, _report = clean(lc, settings.clean)
    same_points = cleaned.n_points == lc.n_points  # else no index match
    working = cleaned
    result = result or {}
    trend = result.get("trend")
    refit_times = {round(float(t), 9) for t in result.get("outlier_times") or ()}
    chosen_aside = [
        int(i)
        for i in result.get("set_aside") or ()
        if 0 <= int(i) < lc.n_points and round(float(lc.time[int(i)]), 9) not in refit_times
    ]
    if chosen_aside and same_points and not eclipsing:
        mask = np.array(cleaned.excluded, dtype=bool)
        mask[chosen_aside] = True
        working = cleaned.with_excluded(mask)
    if trend:
        working = _detrended(working, trend)
    fit = None
    kept = working
    if working.n_good >= 3:
        fits, _times, kept = _decompose_with_outliers(working, 1.0 / period, settings)
        fit = fits.get(band)
    if not same_points:
        kept = lc
    index, time, mag, err, excluded = _band_points(lc, band)
    if trend and time.size:
        # every point drawn with the trend removed, on the fitted points' zero
        mag = mag - trend_values(trend, time, band)
        fitted = np.asarray(kept.good, dtype=bool)[index] if same_points else None
        if fitted is not None and fitted.any():
            mag += float(np.mean(np.asarray(kept.mag)[index][fitted] - mag[fitted]))
    aside = np.asarray(kept.excluded, dtype=bool)[index] & ~excluded
    used = ~(excluded | aside)
    if fit is not None:
        residual = mag - np.asarray(fit.model(time))
        epoch = float(fit.epoch_max)
        rms = float(fit.residual_std)  # the same number the star sheet shows as O − C
    else:
        residual = np.full(mag.shape, np.nan)
        epoch = float(time[used][0]) if used.any() else float(time[0]) if time.size else 0.0
        rms = None
    epoch, kind = _epoch_rule(epoch, eclipsing, time, mag, err, used, period)
    phase_grid, grid_times = phase_grid_times(period, epoch, n_grid)
    model_grid = (
        np.asarray(fit.model(grid_times)) if fit is not None else np.full(phase_grid.shape, np.nan)
    )
    return FoldModel(
        period=float(period),
        epoch=epoch,
        epoch_kind=kind,
        phase_grid=phase_grid,
        model_grid=model_grid,
        time=time,
        mag=mag,
        err=err,
        index=index,
        excluded=excluded,
        set_aside=aside,
        residual=residual,
        rms=rms,
        order=None if fit is None else int(fit.order),
    )


def _epoch_rule(epoch, eclipsing, time, mag, err, used, period) -> tuple[float, str]:
    """(epoch, kind): primary minimum from the used points for eclipsing classes (as
    the final numbers, ``core.final.eclipse_shape``), else ``epoch`` (maximum light)."""
    if eclipsing and used.sum() >= 8:
        from .final import eclipse_shape

        return eclipse_shape(time[used], mag[used], err[used], period).epoch, "primary_minimum"
    return epoch, "maximum"


def _band_points(lc, band: str):
    """Index, time, mag, err and excluded mask of every point of ``band`` with a finite
    time and magnitude (excluded ones too), time-sorted."""
    in_band = (np.asarray(lc.band) == band) & np.isfinite(lc.time) & np.isfinite(lc.mag)
    index = np.flatnonzero(in_band)
    index = index[np.argsort(np.asarray(lc.time)[index], kind="stable")]
    return (
        index,
        np.asarray(lc.time, dtype=float)[index],
        np.asarray(lc.mag, dtype=float)[index],
        np.asarray(lc.mag_err, dtype=float)[index],
        np.asarray(lc.excluded, dtype=bool)[index],
    )


def fold_points(lc, period: float, band: str, eclipsing: bool = False, result=None) -> FoldModel:
    """The points :func:`fold_model` would draw, folded with no fit (nothing is fitted).

    What the desk draws of a new star while its model is fitted: phase zero
    at the stored analysis's ``epoch_max`` (the fit moves it to the model's
    own maximum at this period) or, for eclipsing classes, at primary minimum
    measured from the points as :func:`fold_model` does; the analysis's
    ``set_aside`` points marked (none for eclipsing classes, as in
    :func:`fold_model`), its ``trend`` removed.  ``order`` and ``rms`` are
    None, ``residual`` nan.
    """
    if not np.isfinite(period) or period <= 0:
        raise PhasewiseError(f"a period must be positive, got {period!r}", field="period")
    result = result or {}
    index, time, mag, err, excluded = _band_points(lc, band)
    trend = result.get("trend")
    if trend and time.size:
        from .period_choice import trend_values

        mag = mag - trend_values(trend, time, band)
    aside = np.zeros(index.size, dtype=bool)
    if not eclipsing and result.get("set_aside"):
        chosen = np.asarray([int(i) for i in result["set_aside"]], dtype=int)
        aside = np.isin(index, chosen) & ~excluded
    epoch = result.get("epoch_max")
    try:
        epoch = float(epoch)
    except (TypeError, ValueError):
        epoch = float("nan")
    if not np.isfinite(epoch):
        epoch = float(time[0]) if time.size else 0.0
    epoch, kind = _epoch_rule(epoch, eclipsing, time, mag, err, ~(excluded | aside), period)
    return FoldModel(
        period=float(period),
        epoch=float(epoch),
        epoch_kind=kind,
        phase_grid=np.empty(0),
        model_grid=np.empty(0),
        time=time,
        mag=mag,
        err=err,
        index=index,
        excluded=excluded,
        set_aside=aside,
        residual=np.full(mag.shape, np.nan),
        rms=None,
        order=None,
    )


class FoldModelCache:
    """The last few :func:`fold_model` results, so going back to a period is free.

    The key is the star, its exclusion mask, the period, the settings hash,
    the band, the epoch kind and the result's set-aside points and trend.
    """

    def __init__(self, size: int = 64) -> None:
        self.size = int(size)
        self._items: OrderedDict = OrderedDict()

    @staticmethod
    def _key(lc, period, settings, band, eclipsing, result) -> tuple:
        digest = getattr(settings, "hash", None) if settings is not None else None
        return (
            lc.star_id,
            np.asarray(lc.excluded, dtype=bool).tobytes(),
            float(period),
            digest,
            band,
            bool(eclipsing),
            None if result is None else result.get("settings_hash"),
            None if result is None else tuple(result.get("set_aside") or ()),
            None if result is None else repr(result.get("trend")),
        )

    def get(self, lc, period, settings=None, band=None, eclipsing=False, result=None) -> FoldModel:
        key = self._key(lc, period, settings, band, eclipsing, result)
        if key in self._items:
            self._items.move_to_end(key)
            return self._items[key]
        model = fold_model(lc, period, settings, band, eclipsing, result=result)
        self._items[key] = model
        while len(self._items) > self.size:
            self._items.popitem(last=False)
        return model

    def cached(self, lc, period, settings=None, band=None, eclipsing=False, result=None):
        """The model if it was computed already, else None (nothing is fitted)."""
        return self._items.get(self._key(lc, period, settings, band, eclipsing, result))

    def clear(self) -> None:
        self._items.clear()
