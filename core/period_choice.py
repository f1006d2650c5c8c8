"""The choice of period: every search's candidates compete here under one rule.

Steps, in this order (each stated where it is made):

1. **Search.**  The periodogram of the cleaned curve gives candidates; up to
   ``compare_candidates`` of the highest peaks compete by the Bayesian
   information criterion of their multi-harmonic fits (:func:`best_by_bic`);
   harmonics and subharmonics of a stronger peak do not compete.
2. **Points set aside** (:func:`outliers_against`): against the Fourier
   model at the current choice, points whose residual lies further than
   ``set_aside_sigma`` robust sigmas from the residuals of their neighbours
   in phase (:func:`far_from_neighbours`) are set aside and the search is
   repeated, up to ``set_aside_rounds`` rounds, until no new
   point goes.  Outliers are rare by nature: when more than
   ``set_aside_max_share`` of a band's points lie beyond the limit the model
   is wrong, not the points, and none of that band is set aside in that
   round.
3. **Trend** (:func:`fit_trend`), where the data call for it: a polynomial
   in time of degree 1-3, a floating mean per season, or (dense regular
   sampling) a straight drift plus a decaying ramp after each gap, each band
   with its own coefficients.  A trend is *called for* when it lowers the scaled BIC
   (chi-square over the best model's reduced chi-square, plus k ln N) by at
   least ``trend_min_delta_bic``, alone or beside the Fourier model at the
   current choice.  The search is then repeated on the detrended curve from
   2/T up (a polynomial of degree 3 cannot be told from fewer than two
   cycles), and the trend is *adopted* only if trend + Fourier at the new
   choice beats Fourier alone at the old one by the same margin.
4. **Eclipse search** (:func:`with_eclipse_search`) where a sinusoid is weak
   or the curve has a long faint tail; its best period joins the
   competition of step 1.  It sees every cleaned point (its statistic
   resists outliers by itself), so points set aside in step 2 do not hide
   an eclipse.

The result (:class:`PeriodChoice`) records the winner, why it won, the
indices of the points set aside and the trend.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from scipy import linalg, stats

from .errors import PhasewiseError
from .fourier import _basis_rows, _data_key, choose_order, fit_fourier
from .lightcurve import MIN_GOOD_POINTS, LightCurve
from .periodogram import (
    Candidate,
    EclipseSearch,
    Periodogram,
    candidate_windows,
    compute_periodogram,
    eclipse_search,
    effective_points,
    find_candidates,
    sampling_of,
)

__all__ = [
    "PeriodChoice",
    "choose_period",
    "best_by_bic",
    "outliers_against",
    "fit_trend",
    "far_from_neighbours",
    "brighter_than_neighbours",
    "ECLIPSE_FAP_METHOD",
    "MAD_TO_SIGMA",
    "MIN_CYCLES",
    "slow_amplitude",
    "eclipse_timing",
]

#: Median absolute deviation to Gaussian sigma (common practice, no source).
MAD_TO_SIGMA = 1.4826

#: Fewest cycles in the baseline for a period to be adopted: fewer cannot
#: tell a period from a drift or a ramp (the rule of a period the data can
#: determine, core.synthetic.period_determinable).
MIN_CYCLES = 2.0

#: ``fap_method`` of a candidate that comes from the eclipse search.
ECLIPSE_FAP_METHOD = "aov_binned"

#: Gaps longer than this (days) separate observing seasons for the
#: per-season trend (our choice: longer than any run of nights, shorter than
#: the months a field is out of reach).
SEASON_GAP = 60.0


@dataclass(frozen=True, eq=False)
class PeriodChoice:
    """What :func:`choose_period` decided.

    ``lc`` is the curve the later steps measure: the trend removed and the
    set-aside points excluded.  ``set_aside`` are indices into the input
    light curve's points; ``trend`` is a JSON-able description or None.
    """

    periodogram: Periodogram
    candidates: tuple[Candidate, ...]
    chosen: int | None
    search: EclipseSearch | None
    lc: LightCurve
    set_aside: tuple[int, ...] = ()
    trend: dict[str, Any] | None = None
    reasons: tuple[str, ...] = ()
    windows: tuple = ()

    @property
    def candidate(self) -> Candidate | None:
        return None if self.chosen is None else self.candidates[self.chosen]


def choose_period(lc: LightCurve, settings, pgram: Periodogram | None = None) -> PeriodChoice:
    """Choose the period of a cleaned light curve (see the module notes).

    Parameters
    ----------
    lc : LightCurve
        Cleaned curve with at least ``MIN_GOOD_POINTS`` good points.
    settings : AnalysisSettings
    pgram : Periodogram, optional
        The periodogram of ``lc`` already computed with ``settings.periodogram``.
    """
    pg = settings.periodogram
    pgram = compute_periodogram(lc, pg) if pgram is None else pgram
    # one window for every search here: setting a few points aside barely changes it
    windows = candidate_windows(lc.time[lc.good], pg)
    candidates = find_candidates(pgram, lc, pg, windows=windows)
    if not candidates:
        return PeriodChoice(pgram, (), None, None, lc, windows=windows)
    chosen = choose_candidate(lc, candidates, settings)
    reasons: list[str] = []

    working, set_aside = lc, np.zeros(lc.n_points, dtype=bool)
    if settings.set_aside_sigma is not None:
        for _ in range(settings.set_aside_rounds):
            new = outliers_against(working, candidates[chosen].frequency, settings) & ~set_aside
            if not new.any() or working.n_good - new.sum() < MIN_GOOD_POINTS:
                break
            set_aside |= new
            working = lc.with_excluded(lc.excluded | set_aside)
            pgram = compute_periodogram(working, pg)
            candidates = find_candidates(pgram, working, pg, windows=windows)
            chosen = choose_candidate(working, candidates, settings)
        if set_aside.any():
            reasons.append(
                f"{int(set_aside.sum())} point(s) beyond {settings.set_aside_sigma:g} robust "
                "sigmas of the model set aside before the candidates competed"
            )

    trend = None
    if settings.trend == "auto":
        outcome = _trend_step(working, pgram, candidates, chosen, settings, windows)
        if outcome is not None:
            working, pgram, candidates, chosen, trend = outcome
            reasons.append(f"trend removed ({trend['description']}): {trend['rule']}")

    # correlated noise (nightly zero points, drifts, ramps) makes fewer points
    # independent than there are: the false-alarm probabilities count those
    n_eff = _effective_points(working, candidates[chosen].frequency, settings)
    if n_eff is not None:
        candidates = find_candidates(
            pgram, working, pgram.settings, windows=windows, n_effective=n_eff
        )
        reasons.append(
            f"residuals correlated in time: false-alarm probabilities from {n_eff:.0f} "
            f"independent points of {working.n_good}"
        )

    # the eclipse search sees every cleaned point (detrended if a trend was adopted)
    everything = _detrended(lc, trend) if trend else lc
    candidates, chosen, search = with_eclipse_search(
        everything, working, candidates, chosen, settings
    )
    if candidates[chosen].fap_method == ECLIPSE_FAP_METHOD:
        set_aside = np.zeros(lc.n_points, dtype=bool)
        if settings.set_aside_sigma is not None:
            set_aside = brighter_than_neighbours(
                everything,
                candidates[chosen].frequency,
                settings.set_aside_sigma,
                settings.set_aside_max_share,
            )
        working = everything.with_excluded(everything.excluded | set_aside)
        reasons.append(
            f"period from the phase-binned eclipse search (candidate {chosen + 1}); "
            "the periodogram's peaks were weaker; "
            + (
                f"{int(set_aside.sum())} point(s) brighter than maximum light or their "
                "neighbours in phase by "
                f"more than {settings.set_aside_sigma:g} robust sigmas set aside"
                if set_aside.any()
                else "no points set aside"
            )
        )
    elif chosen != 0:
        reasons.append(
            f"period from candidate {chosen + 1} (multi-harmonic fit preferred it "
            "over the highest peak)"
        )
    step = sampling_of(lc.time[lc.good])
    period = candidates[chosen].period
    if np.isfinite(step.step) and period < 2.0 * step.step:
        reasons.append(
            f"period {period:.6g} d is shorter than twice the typical sampling step "
            f"({step.step:.3g} d): check it against the window and its reflections"
        )
    return PeriodChoice(
        periodogram=pgram,
        candidates=candidates,
        chosen=chosen,
        search=search,
        lc=working,
        set_aside=tuple(int(i) for i in np.flatnonzero(set_aside)),
        trend=trend,
        reasons=tuple(reasons),
        windows=windows,
    )


# ------------------------------------------------------------ competition
def choose_candidate(lc: LightCurve, candidates: tuple[Candidate, ...], settings) -> int:
    """Index of the candidate whose multi-harmonic fit has the lowest BIC.

    Each band gets its own mean and harmonics (order chosen per band and
    frequency); the information criterion adds them up over the bands.
    Harmonic and subharmonic candidates of a stronger peak do not compete:
    at f/2 a curve fits as well with twice the parameters, and the choice
    between P and 2P for eclipsing binaries is the classifier's.
    """
    n = min(settings.compare_candidates, len(candidates))
    if n == 1:
        return 0
    competing = [
        i
        for i in range(n)
        if i == 0 or not ({"harmonic", "subharmonic"} & set(candidates[i].marks))
    ]
    return best_by_bic(lc, candidates, competing, settings)


def best_by_bic(lc: LightCurve, candidates, competing, settings) -> int:
    """The competing candidate whose multi-harmonic fit has the lowest BIC."""
    competing = list(competing)
    best, best_bic = competing[0], np.inf
    for index in competing:
        bic = _fourier_bic(lc, candidates[index].frequency, settings)
        # the frequency itself is one more parameter, the same for every candidate
        if bic < best_bic:
            best, best_bic = index, bic
    return best


def _band_fits(lc: LightCurve, frequency: float, settings) -> list | None:
    """Per band ``(t, m, e, order, fit)`` of the chosen-order Fourier fit; None if one fails."""
    fits = []
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        try:
            order = choose_order(t, m, e, frequency, settings.fourier).order
            fit = fit_fourier(t, m, e, frequency, order, form=settings.fourier.form)
        except PhasewiseError:
            return None
        fits.append((t, m, e, order, fit))
    return fits


def _fourier_bic(lc: LightCurve, frequency: float, settings) -> float:
    bic = 0.0
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        try:
            # the order choice's own factorisation gives the chi-square of the
            # chosen order: no second fit for a candidate that may lose
            choice = choose_order(t, m, e, frequency, settings.fourier)
        except PhasewiseError:
            return np.inf
        bic += choice.chi2 + (2 * choice.order + 1) * np.log(t.size)
    return bic


def _effective_points(lc: LightCurve, frequency: float, settings) -> float | None:
    """Independent points of the residuals from an adequate model, if clearly fewer.

    Residuals in units of their errors, all bands in time order
    (:func:`core.periodogram.effective_points`); None when they are at
    least 90% of the points (white noise within its scatter).  The model is
    the Fourier fit at ``frequency``; where that leaves correlated
    residuals and the curve has two or more seasons, the same series fitted
    season by season (:func:`_seasonal_residuals`) is taken instead when it
    is called for (scaled BIC lower by ``trend_min_delta_bic``): a Mira's
    cycle-to-cycle changes of amplitude and phase are signal, not noise,
    and counted as noise they made a 4-magnitude, many-cycle signal "not
    significant".  Night-to-night zero points and drifts within a season
    stay in the residuals of either model.
    """
    fits = _band_fits(lc, frequency, settings)
    if fits is None:
        return None
    times = [t for t, *_ in fits]
    scaled = [(m - fit.model(t)) / e for t, m, e, _, fit in fits]
    t_all = np.concatenate(times)
    order = np.argsort(t_all, kind="stable")
    r_all = np.concatenate(scaled)[order]
    # correlation between neighbours only: averaging over longer times
    # (Pont, Zucker & Queloz 2006) also counts a strong signal's model
    # error (modulation) as noise and buried modulated RRab in the demo
    n_eff = effective_points(r_all)
    if n_eff >= 0.9 * r_all.size:
        return None
    seasonal = _seasonal_residuals(fits, frequency, settings)
    if seasonal is not None:
        r_seasonal = np.concatenate(seasonal)[order]
        n_eff = max(n_eff, effective_points(r_seasonal))
    return n_eff if n_eff < 0.9 * r_all.size else None


def _seasonal_residuals(fits, frequency: float, settings) -> list[np.ndarray] | None:
    """Scaled residuals of the Fourier series fitted season by season, if called for.

    Each season (gaps over :data:`SEASON_GAP`) of each band gets its own
    mean and harmonics at ``frequency``, mean and harmonic coefficients
    changing linearly through the season (a Mira's amplitude and phase
    drift within a season as well as between them).  The band's order is
    lowered so that a season keeps two points per coefficient; a season
    too short for one harmonic keeps the fixed model.  None with fewer than two seasons,
    or when the seasonal model does not lower the scaled BIC (as the trend
    test scales it) by ``settings.trend_min_delta_bic``.
    """
    scaled, chi2_fixed, chi2_seasonal, k_fixed, k_seasonal, n = [], 0.0, 0.0, 0, 0, 0
    for t, m, e, band_order, fit in fits:
        seasons = _seasons(t)
        labels = np.unique(seasons)
        if labels.size < 2:
            return None
        r = np.empty(t.size)
        for label in labels:
            sel = seasons == label
            ts = t[sel]
            order = min(band_order, max((int(sel.sum()) - 4) // 8, 0))
            if order < 1:
                # too short a season for a fit of its own: the fixed model's residuals
                r[sel] = (m[sel] - fit.model(ts)) / e[sel]
                continue
            x = (ts - ts.mean()) / max(float(np.ptp(ts)), 1e-9)
            harmonics = _basis_rows(2.0 * np.pi * frequency * (ts - ts.mean()), order)[1:]
            design = np.stack([np.ones(ts.size), x, *harmonics, *(x * harmonics)], axis=1)
            coef, *_ = linalg.lstsq(
                design / e[sel, None], m[sel] / e[sel], lapack_driver="gelsy", check_finite=False
            )
            r[sel] = (m[sel] - design @ coef) / e[sel]
            k_seasonal += design.shape[1]
        scaled.append(r)
        chi2_seasonal += float(r @ r)
        chi2_fixed += float(np.sum(((m - fit.model(t)) / e) ** 2))
        k_fixed += 1 + 2 * band_order
        n += t.size
    bics = _scaled_bics(
        {"fixed": (chi2_fixed, k_fixed), "seasonal": (chi2_seasonal, k_seasonal)}, n
    )
    if bics["fixed"] - bics["seasonal"] < settings.trend_min_delta_bic:
        return None
    return scaled


# ------------------------------------------------------------- set aside
def outliers_against(lc: LightCurve, frequency: float, settings) -> np.ndarray:
    """Good points that stand apart from the Fourier model at ``frequency``.

    Per band: residuals from the Fourier fit (order by the usual choice),
    judged by :func:`far_from_neighbours` with ``set_aside_sigma``.  A band
    where more than ``set_aside_max_share`` of the points would go gives
    none (the model is wrong there, not the points).
    """
    out = np.zeros(lc.n_points, dtype=bool)
    for band in lc.bands:
        sel = np.flatnonzero(lc.band_mask(band))
        t, m, e = lc.time[sel], lc.mag[sel], lc.mag_err[sel]
        try:
            order = choose_order(t, m, e, frequency, settings.fourier).order
            fit = fit_fourier(t, m, e, frequency, order, form=settings.fourier.form)
        except PhasewiseError:
            continue
        far = far_from_neighbours(t * frequency, m - fit.model(t), settings.set_aside_sigma)
        if far.sum() <= settings.set_aside_max_share * t.size:
            out[sel[far]] = True
    return out


def brighter_than_neighbours(
    lc: LightCurve, frequency: float, limit: float, max_share: float
) -> np.ndarray:
    """Good points far brighter than their neighbours in phase, for an eclipse period.

    The folded magnitudes themselves are judged by :func:`far_from_neighbours`
    (the neighbours' median stands for the model, which a Fourier series of
    a narrow eclipse is not), and so is their distance above the median
    (at an eclipse's edge the neighbours scatter widely, but nothing is
    brighter than maximum light); only points on the bright side go: an
    eclipse only ever makes a star fainter, so a point brighter than the
    light around it in phase is no part of one, while a lone faint point may
    be the one observation inside a narrow eclipse and stays.  A band with
    more than ``max_share`` of its points beyond gives none.
    """
    out = np.zeros(lc.n_points, dtype=bool)
    for band in lc.bands:
        sel = np.flatnonzero(lc.band_mask(band))
        t, m = lc.time[sel], lc.mag[sel]
        # brighter than maximum light: the median is on the flat maximum of
        # a detached binary, and its robust sigma is the noise there
        centre = np.median(m)
        sigma = MAD_TO_SIGMA * np.median(np.abs(m - centre))
        far = far_from_neighbours(t * frequency, m, limit, side=-1) | (m < centre - limit * sigma)
        if far.sum() <= max_share * t.size:
            out[sel[far]] = True
    return out


#: Neighbours in phase whose residuals give a point's local scale in
#: :func:`far_from_neighbours` (our choice: enough for a median absolute
#: deviation that two or three other bad points do not move).
PHASE_NEIGHBOURS = 10


def far_from_neighbours(
    cycles: np.ndarray, residual: np.ndarray, limit: float, side: int = 0
) -> np.ndarray:
    """Points whose residual stands more than ``limit`` robust sigmas from their neighbours'.

    A point is judged against the :data:`PHASE_NEIGHBOURS` points nearest to
    it in phase (itself left out): its residual minus their median, over
    the larger of the whole band's robust sigma (1.4826 x MAD) and the
    largest robust sigma of the neighbourhoods of the points within a
    quarter of that number of it in phase.
    Where the model underfits a steep branch, or the shape changes from
    cycle to cycle (modulation, an eclipse the series cannot follow), the
    neighbours' residuals are as large and as scattered, so genuine points
    there stay; a bad point stands alone in its part of the phase.

    Parameters
    ----------
    cycles : ndarray
        Time times frequency (the phase is its fractional part).
    residual : ndarray
        Magnitude minus model, same length.
    limit : float
        In robust sigmas.
    side : {0, -1, 1}
        0: either way; -1: only points below their neighbours (brighter, in
        magnitudes); 1: only points above.
    """
    n = residual.size
    out = np.zeros(n, dtype=bool)
    centre = np.median(residual) if n else 0.0
    whole = MAD_TO_SIGMA * np.median(np.abs(residual - centre)) if n else 0.0
    if n < 3 or not whole > 0:
        return out
    k = min(PHASE_NEIGHBOURS, n - 1)
    order = np.argsort(np.mod(cycles, 1.0), kind="stable")
    r = residual[order]
    # the k/2 points before and after each point in phase, wrapping round the cycle
    half_before = k // 2
    offsets = np.concatenate([np.arange(-half_before, 0), np.arange(1, k - half_before + 1)])
    neighbours = r[(np.arange(n)[:, None] + offsets[None, :]) % n]
    local_centre = _row_medians(neighbours)
    local = MAD_TO_SIGMA * _row_medians(np.abs(neighbours - local_centre[:, None]))
    # at the edge of a scattered stretch of phase half the neighbours lie
    # outside it: the stretch's scale also holds two points beyond its end
    spread = max(1, k // 4)
    local = np.max([np.roll(local, shift) for shift in range(-spread, spread + 1)], axis=0)
    scale = np.maximum(local, whole)
    deviation = r - local_centre
    if side:
        deviation = np.where(np.sign(deviation) == side, deviation, 0.0)
    out[order] = np.abs(deviation) > limit * scale
    return out


def _row_medians(values: np.ndarray) -> np.ndarray:
    """``np.median(values, axis=1)``, from a sort of the short rows (several
    times faster than the median's partition on many rows of ten)."""
    k = values.shape[1]
    ordered = np.sort(values, axis=1)
    return 0.5 * (ordered[:, (k - 1) // 2] + ordered[:, k // 2])


# ----------------------------------------------------------------- trend
def _seasons(t: np.ndarray) -> np.ndarray:
    """Season number of each time (gaps longer than :data:`SEASON_GAP` split seasons)."""
    order = np.argsort(t)
    breaks = np.zeros(t.size, dtype=int)
    breaks[order[1:]] = np.cumsum(np.diff(t[order]) > SEASON_GAP)
    return breaks


#: Decay times (d) of the ramps after gaps in dense regular sampling, one
#: trend option each (our choice, spanning the 0.3-1 d scattered-light and
#: thermal settling of space photometry after a data downlink; common
#: practice, no source).
RAMP_SCALES = (0.3, 1.0)

#: A gap longer than this (d) in regular sampling starts a new ramp.
RAMP_GAP = 0.5


def _ramp_starts(t: np.ndarray) -> list[float]:
    """The start of the series and of every stretch after a gap over :data:`RAMP_GAP`."""
    ts = np.sort(t)
    return [float(ts[0]), *(float(x) for x in ts[1:][np.diff(ts) > RAMP_GAP])]


def _trend_columns(kind: str, degree: int, t: np.ndarray, t_ref: float, t_scale: float, starts=()):
    """Design columns of a trend (without the constant, which each model has)."""
    if kind == "polynomial":
        x = (t - t_ref) / t_scale
        return np.stack([x**k for k in range(1, degree + 1)], axis=1)
    if kind == "ramps":
        # a straight drift, and a step decaying from the start of each stretch
        scale = RAMP_SCALES[degree]
        cols = [(t - t_ref) / t_scale]
        for start in starts:
            after = t >= start
            cols.append(np.where(after, np.exp(-np.clip(t - start, 0.0, None) / scale), 0.0))
        return np.stack(cols, axis=1)
    season = _seasons(t)
    labels = np.unique(season)
    return np.stack([(season == s).astype(float) for s in labels[1:]], axis=1)


#: Harmonic columns kept per thread for the last few (times, frequency,
#: order): the trend test fits the same harmonics beside every trend option.
_harmonics = threading.local()


def _harmonic_columns(t: np.ndarray, frequency: float, order: int) -> np.ndarray:
    """Columns cos k theta, sin k theta (k = 1..order) of theta = 2 pi f (t - mean t)."""
    kept = getattr(_harmonics, "kept", None)
    if kept is None:
        kept = _harmonics.kept = {}
    key = (_data_key(t), float(frequency), int(order))
    columns = kept.get(key)
    if columns is None:
        columns = _basis_rows(2.0 * np.pi * frequency * (t - t.mean()), order)[1:].T
        columns.flags.writeable = False
        # a few entries, and a bounded size for long curves (the newest is kept)
        while kept and (len(kept) >= 8 or sum(c.nbytes for c in kept.values()) > 2**25):
            kept.pop(next(iter(kept)))
        kept[key] = columns
    return columns


def _wls(columns: np.ndarray, m: np.ndarray, e: np.ndarray) -> tuple[float, np.ndarray]:
    design = np.concatenate([np.ones((m.size, 1)), columns], axis=1)
    # QR with column pivoting: the least-squares solution of the SVD driver
    # (the minimum-norm one where columns are dependent) at a fraction of its cost
    coef, *_ = linalg.lstsq(design / e[:, None], m / e, lapack_driver="gelsy", check_finite=False)
    return float(np.sum(((m - design @ coef) / e) ** 2)), coef


def _trend_options(lc: LightCurve) -> list[tuple[str, int]]:
    options = [("polynomial", d) for d in (1, 2, 3)]
    t = lc.time[lc.good]
    if t.size and sampling_of(t).regular and len(_ramp_starts(t)) <= 10:
        # dense regular sampling (space-like): ramps after the gaps
        options += [("ramps", k) for k in range(len(RAMP_SCALES))]
    n_seasons = int(_seasons(t).max()) + 1 if t.size else 0
    if 2 <= n_seasons and all(
        np.min(np.bincount(_seasons(lc.arrays(b)[0]))) >= 5 for b in lc.bands
    ):
        options.append(("seasons", n_seasons - 1))
    return options


def _model_chi2(lc, trend_option, frequency, orders, t_ref, t_scale):
    """Chi-square and parameter count of trend (optional) + harmonics (optional), all bands."""
    return _models_chi2(lc, [trend_option], frequency, orders, t_ref, t_scale)[trend_option]


def _models_chi2(lc, trend_options, frequency, orders, t_ref, t_scale) -> dict:
    """:func:`_model_chi2` of each of ``trend_options`` (None: no trend), from one
    Gram matrix per band of every column they use (:class:`_SharedColumns`)."""
    out = {option: (0.0, 0) for option in trend_options}
    starts = _ramp_starts(lc.time[lc.good])
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        blocks, where = [], {}
        if frequency is not None:
            blocks.append(_harmonic_columns(t, frequency, orders[band]))
        base = sum(b.shape[1] for b in blocks)
        for option in trend_options:
            if option is None:
                where[option] = np.arange(base)
                continue
            block = _trend_columns(*option, t, t_ref, t_scale, starts)
            first = sum(b.shape[1] for b in blocks)
            where[option] = np.concatenate([np.arange(base), first + np.arange(block.shape[1])])
            blocks.append(block)
        shared = _SharedColumns(np.concatenate([np.zeros((t.size, 0)), *blocks], axis=1), m, e)
        for option in trend_options:
            c2, _ = shared.fit(where[option])
            chi2, k = out[option]
            out[option] = (chi2 + c2, k + 1 + where[option].size)
    return out


#: Largest condition number of the column-scaled normal matrix that
#: :meth:`_SharedColumns.fit` solves by Cholesky; above it (nearly dependent
#: columns) the model is fitted by QR as :func:`_wls` does.  At 1e8 the
#: coefficients are good to ~1e-8 relative, and the chi-square, minimal
#: there, to far better (our choice).
GRAM_MAX_CONDITION = 1e8


class _SharedColumns:
    """Weighted least squares of ``m`` on a constant and subsets of ``columns``.

    The normal equations of every column are formed once (one pass over
    the points); each subset's fit solves its block of them by Cholesky and
    takes its chi-square from the explicit residuals, so the cost per model
    is one product with its columns instead of a QR factorisation.
    """

    def __init__(self, columns: np.ndarray, m: np.ndarray, e: np.ndarray):
        # C order: the harmonic columns are a transposed view, and a product
        # of Fortran-ordered operands here ran 10x slower than BLAS
        design = np.concatenate([np.ones((m.size, 1)), columns], axis=1) / e[:, None]
        self.design = np.ascontiguousarray(design)
        self.target = m / e
        self.gram = self.design.T @ self.design
        self.rhs = self.design.T @ self.target
        self.columns, self.m, self.e = columns, m, e

    def fit(self, subset: np.ndarray) -> tuple[float, np.ndarray]:
        """Chi-square and coefficients (constant first) on ``columns[:, subset]``."""
        index = np.concatenate([[0], 1 + np.asarray(subset, dtype=int)])
        gram = self.gram[np.ix_(index, index)]
        norms = np.sqrt(np.diag(gram))
        coef = None
        if np.all(norms > 0):
            scaled = gram / np.outer(norms, norms)
            if np.linalg.cond(scaled) <= GRAM_MAX_CONDITION:
                try:
                    factor = linalg.cho_factor(scaled, check_finite=False)
                    coef = linalg.cho_solve(factor, self.rhs[index] / norms, check_finite=False)
                    coef = coef / norms
                except np.linalg.LinAlgError:
                    coef = None
        if coef is None:
            return _wls(self.columns[:, index[1:] - 1], self.m, self.e)
        # the product with every column (zeros outside the subset) is cheaper
        # than gathering the subset's columns
        full = np.zeros(self.design.shape[1])
        full[index] = coef
        residual = self.target - self.design @ full
        return float(residual @ residual), coef


def _scaled_bics(fits: dict, n: int) -> dict:
    """Scaled BIC of each (chi2, k): chi2 / s2 + k ln n, s2 the best model's reduced chi2."""
    best = min(fits.values(), key=lambda ck: ck[0] / max(n - ck[1], 1))
    s2 = max(1.0, best[0] / max(n - best[1], 1))
    return {key: c / s2 + k * np.log(n) for key, (c, k) in fits.items()}


def _orders(lc: LightCurve, frequency: float, settings) -> dict[str, int] | None:
    orders = {}
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        try:
            orders[band] = choose_order(t, m, e, frequency, settings.fourier).order
        except PhasewiseError:
            return None
    return orders


def fit_trend(lc: LightCurve, frequency: float | None, settings) -> dict[str, Any] | None:
    """The trend the data call for beside the Fourier model at ``frequency``, or None.

    Options: polynomials of degree 1-3 in time and, with two or more
    seasons, a floating mean per season.  The option with the lowest scaled
    BIC is called for when it is lower than without a trend by
    ``settings.trend_min_delta_bic``, either alone or together with the
    Fourier model at ``frequency`` (whichever test passes first).
    Returns a JSON-able description with per-band coefficients.
    """
    t_all = lc.time[lc.good]
    n = t_all.size
    t_ref = float(0.5 * (t_all.min() + t_all.max()))
    t_scale = float(max(0.5 * np.ptp(t_all), 1e-9))
    options = _trend_options(lc)
    orders = _orders(lc, frequency, settings) if frequency is not None else None
    tests = [None] if orders is None else [None, frequency]
    for f in tests:
        fits = _models_chi2(lc, [None, *options], f, orders, t_ref, t_scale)
        bics = _scaled_bics(fits, n)
        best = min(options, key=lambda o: bics[o])
        delta = bics[None] - bics[best]
        if delta >= settings.trend_min_delta_bic:
            return _trend_description(lc, best, f, orders, t_ref, t_scale, delta)
    return None


def _trend_description(lc, option, frequency, orders, t_ref, t_scale, delta_bic):
    kind, degree = option
    coefficients = {}
    starts = _ramp_starts(lc.time[lc.good]) if kind == "ramps" else []
    for band in lc.bands:
        t, m, e = lc.arrays(band)
        trend_cols = _trend_columns(kind, degree, t, t_ref, t_scale, starts)
        cols = [trend_cols]
        if frequency is not None:
            cols.append(_harmonic_columns(t, frequency, orders[band]))
        columns = np.concatenate(cols, axis=1)
        # normal equations where well conditioned, else _wls (_SharedColumns.fit)
        _, coef = _SharedColumns(columns, m, e).fit(np.arange(columns.shape[1]))
        coefficients[band] = [float(c) for c in coef[1 : 1 + trend_cols.shape[1]]]
    if kind == "polynomial":
        text = f"polynomial of degree {degree} in time"
    elif kind == "ramps":
        text = (
            f"a straight drift and a ramp decaying over {RAMP_SCALES[degree]:g} d after "
            f"each of {len(starts)} starts of observing"
        )
    else:
        text = f"a floating mean for each of {degree + 1} seasons"
    return {
        "kind": kind,
        "degree": degree if kind == "polynomial" else None,
        "n_seasons": degree + 1 if kind == "seasons" else None,
        "ramp_scale": RAMP_SCALES[degree] if kind == "ramps" else None,
        "ramp_starts": starts if kind == "ramps" else None,
        "t_ref": t_ref,
        "t_scale": t_scale,
        "season_gap": SEASON_GAP,
        "coefficients": coefficients,
        "delta_bic": float(delta_bic),
        "description": text,
    }


def trend_values(trend: dict[str, Any], time: np.ndarray, band: str) -> np.ndarray:
    """The trend at ``time`` in ``band``, with zero mean over those times."""
    coef = np.asarray(trend["coefficients"].get(band, []), dtype=float)
    if coef.size == 0 or time.size == 0:
        return np.zeros(time.size)
    if trend["kind"] == "polynomial":
        cols = _trend_columns("polynomial", trend["degree"], time, trend["t_ref"], trend["t_scale"])
    elif trend["kind"] == "ramps":
        k = RAMP_SCALES.index(trend["ramp_scale"])
        starts = trend["ramp_starts"]
        cols = _trend_columns("ramps", k, time, trend["t_ref"], trend["t_scale"], starts)
    else:
        cols = _trend_columns("seasons", 0, time, 0.0, 1.0)
        cols = cols[:, : coef.size]
    values = cols @ coef[: cols.shape[1]]
    return values - values.mean()


def slow_amplitude(lc: LightCurve, band: str, trend: dict[str, Any] | None, fit=None) -> float:
    """Peak-to-peak, at ``band``'s observed times, of the variation slower than the data time.

    The trend (if any) plus ``fit``'s model (pass the Fourier fit of a
    significant period that repeats fewer than :data:`MIN_CYCLES` times in
    the baseline, else None).  0 when there is neither.
    """
    t = lc.arrays(band)[0]
    if t.size == 0:
        return 0.0
    values = np.zeros(t.size)
    if trend:
        values += trend_values(trend, t, band)
    if fit is not None:
        values += fit.model(t)
    return float(np.ptp(values))


def _detrended(lc: LightCurve, trend: dict[str, Any]) -> LightCurve:
    mag = np.array(lc.mag, dtype=float)
    for band in lc.bands:
        sel = lc.band_mask(band)
        mag[sel] -= trend_values(trend, lc.time[sel], band)
    return replace(lc, mag=mag, mag_err=lc._err_arg())


def _option_of(trend: dict[str, Any]) -> tuple[str, int]:
    if trend["kind"] == "ramps":
        return "ramps", RAMP_SCALES.index(trend["ramp_scale"])
    return trend["kind"], trend["degree"] or (trend["n_seasons"] or 1) - 1


def _trend_step(working, pgram, candidates, chosen, settings, windows):
    """Adopt a trend when it is called for and wins (see the module notes), else None."""
    f_old = candidates[chosen].frequency
    trend = fit_trend(working, f_old, settings)
    if trend is None:
        return None
    detrended = _detrended(working, trend)
    pg = settings.periodogram
    baseline = working.baseline
    fmin = max(pg.fmin or 0.0, 2.0 / baseline)
    fmax_default = pgram.frequency[-1]
    if fmin >= fmax_default:
        return None
    pg2 = replace(pg, fmin=fmin, fmax=pg.fmax if pg.fmax is not None else float(fmax_default))
    pgram2 = compute_periodogram(detrended, pg2)
    candidates2 = find_candidates(pgram2, detrended, pg2, windows=windows)
    if not candidates2:
        return None
    chosen2 = choose_candidate(detrended, candidates2, settings)
    f_new = candidates2[chosen2].frequency
    # trend + Fourier at the new choice against Fourier alone at the old one
    orders_old = _orders(working, f_old, settings)
    orders_new = _orders(working, f_new, settings)
    if orders_old is None or orders_new is None:
        return None
    t_ref, t_scale = trend["t_ref"], trend["t_scale"]
    option = _option_of(trend)
    fits = {
        "plain": _model_chi2(working, None, f_old, orders_old, t_ref, t_scale),
        "trend": _model_chi2(working, option, f_new, orders_new, t_ref, t_scale),
    }
    bics = _scaled_bics(fits, working.n_good)
    delta = bics["plain"] - bics["trend"]
    if delta < settings.trend_min_delta_bic:
        return None
    trend = {
        **_trend_description(working, option, f_new, orders_new, t_ref, t_scale, delta),
        "rule": (
            f"trend + Fourier at {1 / f_new:.6g} d beats Fourier alone at {1 / f_old:.6g} d "
            f"by a scaled BIC of {delta:.3g} (at least {settings.trend_min_delta_bic:g})"
        ),
    }
    return _detrended(working, trend), pgram2, candidates2, chosen2, trend


# ---------------------------------------------------------- eclipse search
def with_eclipse_search(
    everything: LightCurve,
    working: LightCurve,
    candidates: tuple[Candidate, ...],
    chosen: int,
    settings,
) -> tuple[tuple[Candidate, ...], int, EclipseSearch | None]:
    """Run the eclipse search where it matters; its best period may take over.

    * The periodogram's chosen peak is not significant: the search's best
      peak is taken when it is significant.
    * The magnitudes (points not set aside) are strongly skewed to the
      faint side (most of the time at maximum light, short fadings): the
      search's best peak joins the multi-harmonic competition, unless it is
      the chosen peak, its harmonic or its subharmonic.

    Two searches were made, so the search's false-alarm probability is
    doubled (Bonferroni) before it is compared or reported.
    """
    if settings.eclipse_search is None:
        return candidates, chosen, None
    weak = not _significant(candidates[chosen].fap, settings.fap_threshold)
    _, mag, _ = working.arrays(working.bands[0])
    skewed = mag.size > 2 and float(stats.skew(mag)) >= settings.eclipse_skewness
    if not (weak or skewed):
        return candidates, chosen, None
    search = eclipse_search(everything, settings.eclipse_search, periodogram=settings.periodogram)
    if search is None or not search.frequencies:
        return candidates, chosen, search
    fap = min(1.0, 2.0 * search.faps[0])
    if not _significant(fap, settings.fap_threshold):
        return candidates, chosen, search
    f = eclipse_timing(everything, search.frequencies[0], settings.eclipse_search)
    f, orbit_note = _orbit_of(everything, f, settings)
    extra = Candidate(
        frequency=f,
        period=1.0 / f,
        power=search.f_values[0],
        fap=fap,
        snr=search.snrs[0],
        marks=tuple(search.marks[0]) if search.marks else (),
        mark_details=(
            f"phase-binned eclipse search: statistic {search.f_values[0]:.3g} with "
            f"{search.n_bins} bins; FAP doubled for the two searches",
            *orbit_note,
            *(search.mark_details[0] if search.mark_details else ()),
        ),
        rank=len(candidates) + 1,
        fap_method=ECLIPSE_FAP_METHOD,
    )
    joined = (*candidates, extra)
    if weak:
        return joined, len(joined) - 1, search
    if _harmonically_related(
        f, candidates[chosen].frequency, working.baseline, settings, max_ratio=2
    ):
        # at f/2 a curve fits as well with twice the parameters: the choice
        # between P and 2P is the eclipse test's and the classifier's (a
        # ratio of 3 or more is no such choice: the two compete below)
        return joined, chosen, search
    best = best_by_bic(everything, joined, (chosen, len(joined) - 1), settings)
    return joined, best, search


def _orbit_of(lc: LightCurve, frequency: float, settings) -> tuple[float, tuple[str, ...]]:
    """The eclipse search's frequency, or the one the fold repeats at.

    The search peaks at half the orbit (primary and secondary eclipses
    folded together) or at twice the period (one eclipse seen twice a
    cycle) about as strongly as at the period, and which of them it reports
    first is chance.  Odd and even cycles of the band with most points are
    compared in phase bins (:func:`core.eclipse.alternate_cycles_differ`):
    where they differ at ``frequency``, the orbit is half of it; where, with
    points enough for the comparison to decide, they do not differ at twice
    ``frequency`` and the search's statistic is as significant there
    (:func:`_as_significant`), the fold repeats at half the period and that is taken
    (the plainer answer; whether it is half an orbit of two equal eclipses
    is the eclipse test's and the classifier's).  The frequency taken is
    timed by the eclipse statistic itself: twice a period timed at half the
    orbit is off by as much as the secondary eclipse is off phase 0.5 (an
    eccentric orbit), which no later step can undo.
    """
    from .eclipse import alternate_cycles_bins, alternate_cycles_decide, alternate_cycles_differ

    t, m, e = lc.arrays(lc.bands[0])

    def differ(f):
        return alternate_cycles_differ(
            t,
            m,
            e,
            f,
            alternate_cycles_bins(t.size),
            settings.eclipse.significance,
            settings.eclipse.min_depth_fraction,
        )

    if differ(frequency) is True:
        orbit = eclipse_timing(lc, 0.5 * frequency, settings.eclipse_search)
        return orbit, (
            f"alternate cycles at {1 / frequency:.6g} d differ: the orbit {1 / orbit:.6g} d "
            "taken and timed",
        )
    if (
        alternate_cycles_decide(t.size)
        and differ(2.0 * frequency) is False
        and _as_significant(lc, 2.0 * frequency, frequency, settings.eclipse_search)
    ):
        half = eclipse_timing(lc, 2.0 * frequency, settings.eclipse_search)
        return half, (
            f"the fold at {1 / frequency:.6g} d repeats at half of it: {1 / half:.6g} d "
            "taken and timed",
        )
    return frequency, ()


def _as_significant(lc: LightCurve, f_new: float, f_old: float, search_settings) -> bool:
    """Whether the search's statistic at ``f_new`` is as significant as at ``f_old``.

    "As significant": its single-trial probability at most
    ``1 / SUBHARMONIC_FACTOR`` times the other's, the factor by which the
    search itself calls one frequency clearly better than another.
    """
    from scipy import special

    from .periodogram.eclipse_search import SUBHARMONIC_FACTOR, _prepare, aov_binned

    t, y, w = _prepare(lc, search_settings.clip)
    values, filled = aov_binned(t, y, w, np.array([f_new, f_old]), search_settings.n_bins)
    p_new, p_old = special.fdtrc(filled - 1, t.size - filled, values)
    return bool(p_new * SUBHARMONIC_FACTOR <= p_old)


#: Steps of the eclipse timing grid per step of the search's fine grid.
TIMING_STEPS = 20

#: Points per phase bin of the eclipse timing, and the most bins (our
#: choice: a bin of five points still has a mean; 200 bins resolve an
#: eclipse of 1% of the orbit).
TIMING_POINTS_PER_BIN = 5
TIMING_MAX_BINS = 200


def eclipse_timing(lc: LightCurve, frequency: float, search_settings) -> float:
    """The eclipse search's frequency refined by its own statistic.

    The search's fine grid lets the phase drift by up to half a bin over the
    baseline; a Fourier series cannot time a narrow eclipse at all.  The
    phase-binned statistic (four bin offsets) is evaluated on
    :data:`TIMING_STEPS` steps per fine-grid step within one fine step
    either side, and its maximum taken.  The bins are as narrow as the
    points allow (:data:`TIMING_POINTS_PER_BIN` a bin on average, never
    wider than the search's): with bins wider than the eclipse the
    statistic is flat across every frequency that keeps the eclipse's
    points inside one bin (the search's 20 bins over 27 days of an
    eclipse of 1-3% of the orbit left periods 2e-3 off), while narrow bins
    follow the eclipse's edges.  The search pulls every magnitude in to
    ``clip`` robust sigmas of the median, which on precise photometry cuts
    an eclipse to a shallow box; here only points far from their neighbours
    in phase at ``frequency`` (:func:`far_from_neighbours`, ``clip`` robust
    sigmas: outliers, and in sparse data the lone points inside an eclipse)
    are pulled in, so an eclipse sampled densely keeps its depth and shape.
    """
    from .periodogram.eclipse_search import _prepare, aov_binned

    t, clipped, w = _prepare(lc, search_settings.clip)
    _, y, _ = _prepare(lc, np.inf)
    y = np.where(far_from_neighbours(t * frequency, y, search_settings.clip), clipped, y)
    baseline = float(np.ptp(t))
    if baseline <= 0:
        return frequency
    step = 1.0 / (2.0 * search_settings.n_bins * baseline)
    grid = frequency + np.linspace(-step, step, 2 * TIMING_STEPS + 1)
    grid = grid[grid > 0]
    n_bins = int(np.clip(t.size // TIMING_POINTS_PER_BIN, search_settings.n_bins, TIMING_MAX_BINS))
    values, _ = aov_binned(t, y, w, grid, n_bins, shifts=(0.0, 0.25, 0.5, 0.75))
    return float(grid[int(np.argmax(values))])


def _harmonically_related(
    f: float, other: float, baseline: float, settings, max_ratio: int | None = None
) -> bool:
    """Whether ``f`` is n or 1/n times ``other`` (n = 1 .. ``max_ratio``, by
    default the periodogram's ``max_harmonic``) within the candidates' mark
    tolerance."""
    pg = settings.periodogram
    tol = pg.mark_tolerance / baseline if baseline > 0 else 0.0
    for n in range(1, (max_ratio or pg.max_harmonic) + 1):
        if abs(f - n * other) <= tol or abs(n * f - other) <= tol:
            return True
    return False


def _significant(fap: float | None, threshold: float) -> bool:
    return fap is not None and bool(np.isfinite(fap)) and fap <= threshold
