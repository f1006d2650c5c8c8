"""The whole per-star analysis: one light curve in, one frozen result out.

Steps, each a pure function of its own module::

    clean → periodogram → candidates → period choice (with the phase-binned
          eclipse search where the periodogram is weak) → refinement
          → Fourier decomposition (per band, residual outliers set aside)
          → prewhitening → eclipse test → features → suggestions → physics

:func:`analyse` never raises on bad data.  Too few points, no variability
or no significant period give a result whose ``status`` and ``reason`` say
so; an input the methods cannot handle gives ``status = "failed"`` with the
message.  ``AnalysisResult.to_dict()`` has stable keys (listed in
DEVELOPERS.md); the ledger, the exports and ``phasewise inspect --json`` use
it as it is.

Class suggestions and physical values come from empirical relations with
known scatter and calibration ranges; they are suggestions, and the
astronomer decides.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Any

import numpy as np
from scipy import optimize, special, stats

from . import __version__
from .classify import features_from_result, load_rulebook, suggest
from .clean import CleanReport, CleanSettings, clean
from .eclipse import EclipseSettings, EclipseTest, eclipse_test
from .errors import PhasewiseError, plain_reason
from .final import suggested_final_dict
from .fourier import (
    FourierFit,
    FourierSettings,
    RefinedFrequency,
    choose_order,
    decompose,
    fit_fourier,
    refine_frequency,
)
from .lightcurve import MIN_GOOD_POINTS, LightCurve
from .period_choice import (
    ECLIPSE_FAP_METHOD,
    MIN_CYCLES,
    choose_period,
    far_from_neighbours,
    slow_amplitude,
)
from .periodogram import (
    Candidate,
    EclipseSearch,
    EclipseSearchSettings,
    Periodogram,
    PeriodogramSettings,
)
from .physics import PhysicalValue, PhysicsSettings, derive
from .prewhiten import Prewhitening, PrewhitenSettings, prewhiten, residual_search
from .settings import settings_hash, settings_to_dict
from .validation import (
    finite_or_none,
    require_choice,
    require_int,
    require_positive,
    require_range,
)

__all__ = ["STATUSES", "AnalysisSettings", "AnalysisResult", "analyse"]

#: Result states. ``ok``: a significant period was found and measured.
STATUSES = ("ok", "no_significant_period", "no_variability", "too_few_points", "failed")


@dataclass(frozen=True)
class AnalysisSettings:
    """Everything that decides an analysis result (its hash marks staleness).

    Parameters
    ----------
    clean, periodogram, fourier, prewhiten, eclipse, physics
        Settings of each step.
    fap_threshold : float
        A period whose false-alarm probability is above this is reported
        with status ``no_significant_period``.
    compare_candidates : int
        How many of the highest periodogram peaks compete in a
        multi-harmonic fit for the period (1: the highest peak wins).  A
        single-harmonic periodogram can put a non-sinusoidal star's highest
        peak at an alias; the Fourier fit at the right period has the lower
        Bayesian information criterion.
    outlier_sigma : float or None
        Points whose residual from the Fourier model stands more than this
        many robust sigmas from their neighbours' in phase
        (:func:`core.period_choice.far_from_neighbours`) are set aside for
        the Fourier fit (reported, never deleted).
    rulebook : str or None
        Path of a user rulebook; None uses the user copy if present, else the
        shipped one.
    eclipse_search : EclipseSearchSettings or None
        The phase-binned search for narrow eclipses
        (:func:`core.periodogram.eclipse_search`), run only where a
        sinusoid-based periodogram is weak: when its chosen peak is not
        significant, or when the magnitudes have the long faint tail of a
        star that is constant but for short fadings (skewness at least
        ``eclipse_skewness``).  None switches it off.
    eclipse_skewness : float
        Skewness of the primary band's magnitudes above which the eclipse
        search also runs for a significant periodogram peak (its best
        period then competes with the periodogram's candidates).
    set_aside_sigma : float or None
        Before candidates compete, points further than this many robust
        sigmas from the Fourier model at the current choice are set aside
        (recorded, never deleted) and the search repeated; None switches it
        off.  See :mod:`core.period_choice`.
    set_aside_max_share : float
        A band with more than this share of its points beyond the limit
        sets none aside in that round (the model is wrong, not the points).
    set_aside_rounds : int
        Most rounds of setting aside and searching again.
    trend : {"auto", "none"}
        ``"auto"``: a polynomial in time (degree 1-3) or a floating mean per
        season is fitted where the data call for it (scaled BIC lower by
        ``trend_min_delta_bic``; see :mod:`core.period_choice`).
    trend_min_delta_bic : float
        Smallest drop in the scaled BIC that calls for and adopts a trend
        (10: "very strong" evidence on the scale of Kass & Raftery 1995,
        from memory).
    """

    clean: CleanSettings = field(default_factory=CleanSettings)
    periodogram: PeriodogramSettings = field(default_factory=PeriodogramSettings)
    fourier: FourierSettings = field(default_factory=FourierSettings)
    prewhiten: PrewhitenSettings = field(default_factory=PrewhitenSettings)
    eclipse: EclipseSettings = field(default_factory=EclipseSettings)
    physics: PhysicsSettings = field(default_factory=PhysicsSettings)
    fap_threshold: float = 1e-3
    compare_candidates: int = 3
    outlier_sigma: float | None = 5.0
    rulebook: str | None = None
    eclipse_search: EclipseSearchSettings | None = field(default_factory=EclipseSearchSettings)
    eclipse_skewness: float = 1.0
    set_aside_sigma: float | None = 5.0
    set_aside_max_share: float = 0.03
    set_aside_rounds: int = 3
    trend: str = "auto"
    trend_min_delta_bic: float = 10.0

    def __post_init__(self) -> None:
        require_range("fap_threshold", self.fap_threshold, 0.0, 1.0)
        if self.set_aside_sigma is not None:
            require_positive("set_aside_sigma", self.set_aside_sigma)
        require_range("set_aside_max_share", self.set_aside_max_share, 0.0, 0.5)
        require_int("set_aside_rounds", self.set_aside_rounds, 0, 10)
        require_choice("trend", self.trend, ("auto", "none"))
        require_positive("trend_min_delta_bic", self.trend_min_delta_bic)
        require_int("compare_candidates", self.compare_candidates, 1, 20)
        if self.outlier_sigma is not None:
            require_positive("outlier_sigma", self.outlier_sigma)

    def to_dict(self) -> dict[str, Any]:
        return settings_to_dict(self)

    @cached_property
    def hash(self) -> str:
        """Stable short hash; stored with every result to detect staleness."""
        return settings_hash(self)


_num = finite_or_none  # a finite float or None, for JSON-able results


@dataclass(frozen=True, eq=False)
class AnalysisResult:
    """The result of :func:`analyse` for one star.  See :meth:`to_dict`."""

    star_id: str
    status: str
    reason: str
    settings_hash: str
    n_points: int
    n_good: int
    time_scale: str
    bands: tuple[str, ...] = ()
    primary_band: str | None = None
    method: str | None = None
    frequency: float | None = None
    frequency_err: float | None = None
    period_err_analytic: float | None = None
    fap: float | None = None
    candidates: tuple[Candidate, ...] = ()
    chosen_candidate: int | None = None
    eclipse_search: EclipseSearch | None = None
    fits: dict[str, FourierFit] = field(default_factory=dict)
    refined: RefinedFrequency | None = None
    prewhitening: Prewhitening | None = None
    eclipse: EclipseTest | None = None
    features: dict[str, Any] = field(default_factory=dict)
    suggestions: tuple[Any, ...] = ()
    physics: tuple[PhysicalValue, ...] = ()
    clean_report: CleanReport | None = None
    outlier_times: tuple[float, ...] = ()
    set_aside: tuple[int, ...] = ()
    trend: dict[str, Any] | None = None
    modulation: dict[str, Any] | None = None
    relation_band_reason: str = ""
    flags: tuple[str, ...] = ()
    final: dict[str, Any] | None = None

    # ------------------------------------------------------------- numbers
    @property
    def period(self) -> float | None:
        return None if not self.frequency else 1.0 / self.frequency

    @property
    def period_err(self) -> float | None:
        if not self.frequency or self.frequency_err is None:
            return None
        return self.frequency_err / self.frequency**2

    @property
    def primary_fit(self) -> FourierFit | None:
        return self.fits.get(self.primary_band) if self.primary_band else None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-able dict with the stable keys of DEVELOPERS.md."""
        fit = self.primary_fit
        fits = {band: _fit_dict(f) for band, f in self.fits.items()}
        pw = self.prewhitening
        # only secondaries that are reported: independent, significant, strongest first
        secondary = [] if pw is None else [f.to_dict() for f in pw.secondaries]
        return {
            "star_id": self.star_id,
            "phasewise_version": __version__,
            "n_points": self.n_points,
            "n_good": self.n_good,
            "status": self.status,
            "reason": self.reason,
            "settings_hash": self.settings_hash,
            "time_scale": self.time_scale,
            "bands": list(self.bands),
            "primary_band": self.primary_band,
            "method": self.method,
            "period": _num(self.period),
            "period_err": _num(self.period_err),
            "period_err_analytic": _num(self.period_err_analytic),
            "frequency": _num(self.frequency),
            "frequency_err": _num(self.frequency_err),
            "fap": _num(self.fap),
            "candidates": [c.to_dict() for c in self.candidates],
            "chosen_candidate": self.chosen_candidate,
            "eclipse_search": self.eclipse_search.to_dict() if self.eclipse_search else None,
            "fourier": fits.get(self.primary_band) if fit is not None else None,
            "fourier_by_band": fits,
            "mean_mag": _num(fit.mean_mag) if fit else None,
            "mean_mag_by_band": {b: _num(f.mean_mag) for b, f in self.fits.items()},
            "intensity_mean_mag_by_band": {
                b: _num(f.intensity_mean_mag) for b, f in self.fits.items()
            },
            "amplitude": _num(fit.peak_to_peak) if fit else None,
            "amplitude_by_band": {b: _num(f.peak_to_peak) for b, f in self.fits.items()},
            "epoch_max": _num(fit.epoch_max) if fit else None,
            "rise_time": _num(fit.rise_time) if fit else None,
            "residual_std": _num(fit.residual_std) if fit else None,
            "secondary_periods": secondary,
            "period_ratio": _ratio(self.period, secondary),
            "prewhitening": pw.to_dict() if pw else None,
            "eclipse": self.eclipse.to_dict() if self.eclipse else None,
            "features": {k: _feature_value(v) for k, v in self.features.items()},
            "suggestions": [s.to_dict() for s in self.suggestions],
            "physics": [p.to_dict() for p in self.physics],
            "clean": self.clean_report.to_dict() if self.clean_report else None,
            "outlier_times": [float(t) for t in self.outlier_times],
            "set_aside": [int(i) for i in self.set_aside],
            "trend": self.trend,
            "modulation": self.modulation,
            "relation_band": self.primary_band if fit is not None else None,
            "relation_band_reason": self.relation_band_reason or None,
            "flags": list(self.flags),
            "final": self.final,
        }


def _significant_fap(fap: float | None, threshold: float) -> bool:
    return fap is not None and bool(np.isfinite(fap)) and fap <= threshold


def _ratio(period: float | None, secondary: list[dict[str, Any]]) -> float | None:
    """Shorter / longer of the period and the reported (first) secondary period."""
    if not period or not secondary:
        return None
    other = secondary[0]["period"]
    return _num(min(period, other) / max(period, other))


def _fit_dict(fit: FourierFit) -> dict[str, Any]:
    out = fit.to_dict()
    return {k: (_num(v) if isinstance(v, float) else v) for k, v in out.items()}


def _feature_value(value: Any) -> Any:
    return value if isinstance(value, str) else _num(value)


# ------------------------------------------------------------------ pipeline
def analyse(
    lc: LightCurve,
    settings: AnalysisSettings | None = None,
    *,
    periodogram: Periodogram | None = None,
) -> AnalysisResult:
    """Analyse one star.

    Parameters
    ----------
    lc : LightCurve
    settings : AnalysisSettings, optional
    periodogram : Periodogram, optional
        A periodogram already computed for this star with
        ``settings.periodogram`` (shared-epoch batches compute many at once).

    Returns
    -------
    AnalysisResult
        Never raises for bad data: see ``status`` and ``reason``.
    """
    settings = settings or AnalysisSettings()
    base = {
        "star_id": lc.star_id,
        "settings_hash": settings.hash,
        "n_points": lc.n_points,
        "time_scale": lc.time_scale,
    }
    try:
        return _analyse(lc, settings, base, periodogram)
    except (PhasewiseError, ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return AnalysisResult(
            status="failed",
            reason=plain_reason(exc),  # our own sentence, never the raw exception text
            n_good=lc.n_good,
            bands=lc.bands,
            **base,
        )


def _analyse(
    lc: LightCurve, settings: AnalysisSettings, base: dict, pgram: Periodogram | None
) -> AnalysisResult:
    cleaned, report = clean(lc, settings.clean)
    bands = cleaned.bands
    flags: list[str] = []
    common = {**base, "n_good": cleaned.n_good, "bands": bands, "clean_report": report}
    if cleaned.n_good < MIN_GOOD_POINTS:
        return AnalysisResult(
            status="too_few_points",
            reason=f"{cleaned.n_good} good points; at least {MIN_GOOD_POINTS} are needed",
            flags=("too few points",),
            **common,
        )
    if all(np.ptp(cleaned.arrays(b)[1]) == 0 for b in bands):
        return AnalysisResult(
            status="no_variability",
            reason="every magnitude is the same",
            suggestions=_suggest(
                {"n_points": cleaned.n_good, "fap": 1.0, "significant": 0.0, "slow_amplitude": 0.0},
                settings,
            ),
            **common,
        )

    choice = choose_period(cleaned, settings, pgram)
    pgram, candidates, chosen, search = (
        choice.periodogram,
        choice.candidates,
        choice.chosen,
        choice.search,
    )
    if not candidates:
        return AnalysisResult(
            status="no_significant_period",
            reason="the periodogram has no peak",
            method=pgram.method,
            **common,
        )
    flags.extend(choice.reasons)
    working = choice.lc
    f0 = candidates[chosen].frequency

    measured = _measure(working, f0, candidates[chosen].fap_method, settings)
    if not measured[1] and candidates[chosen].fap_method == ECLIPSE_FAP_METHOD:
        # never fail where a plainer answer exists: the periodogram's best peak
        flags.append(
            "the eclipse search's period supports no Fourier fit; "
            "the periodogram's best candidate is used instead"
        )
        chosen = 0
        f0 = candidates[0].frequency
        measured = _measure(working, f0, candidates[0].fap_method, settings)
    refined, fits, outlier_times, analysed = measured
    frequency = refined.frequency if refined.converged else f0
    if not refined.converged:
        flags.append(f"period refinement did not converge: {refined.message}")
    if not fits:
        raise PhasewiseError("no band supports even a first-order Fourier fit", field=lc.star_id)
    set_aside = sorted(
        set(choice.set_aside) | set(np.flatnonzero(analysed.excluded & cleaned.good))
    )
    if outlier_times:
        flags.append(f"{len(outlier_times)} outlier(s) set aside for the Fourier fit")
    if _significant_fap(candidates[chosen].fap, settings.fap_threshold):
        primary, band_reason = relation_band(fits, settings)
    else:
        # no period to measure: the quality of a fit to noise says nothing,
        # and the features of non-variables stay those of the calibration band
        primary = _calibration_band() if _calibration_band() in fits else next(iter(fits))
        band_reason = f"{primary}: no significant period; the relations' calibration band"

    # reuse the decomposition: its order for prewhitening, its fit for the eclipse test
    pw_settings = settings.prewhiten
    if pw_settings.main_order is None:
        pw_settings = replace(pw_settings, main_order=fits[primary].order)
    # the residuals are searched on the main search's range
    residuals = residual_search(pw_settings.search_oversampling, settings.periodogram)
    pw = prewhiten(analysed, frequency, pw_settings, search=residuals, windows=choice.windows)
    # the seasonal test in the band with most points, which tells changes best
    modulation = find_modulation(
        analysed, frequency, pw, analysed.bands[0], fits.get(analysed.bands[0])
    )
    if modulation is not None:
        flags.append(f"modulated: {modulation['description']}")
    try:
        ecl = eclipse_test(
            analysed, frequency, settings.eclipse, fit_at_period=fits.get(analysed.bands[0])
        )
    except PhasewiseError as exc:
        ecl = None
        flags.append(f"eclipse test not possible: {exc.reason}")

    fap = candidates[chosen].fap
    status, reason = "ok", ""
    if fap is None or not np.isfinite(fap) or fap > settings.fap_threshold:
        status = "no_significant_period"
        fap_text = "unknown" if fap is None else f"{fap:.2g}"
        reason = f"false-alarm probability {fap_text} above {settings.fap_threshold:g}"
    few_cycles = working.baseline < MIN_CYCLES / frequency
    if status == "ok" and few_cycles:
        # fewer cycles cannot tell a period from a drift or a ramp
        status = "no_significant_period"
        reason = (
            f"period {1 / frequency:.6g} d repeats fewer than {MIN_CYCLES:g} times in the "
            f"baseline of {working.baseline:.6g} d"
        )
    measured = AnalysisResult(
        status=status,
        reason=reason,
        primary_band=primary,
        method=pgram.method,
        frequency=frequency,
        frequency_err=refined.frequency_err if refined.converged else None,
        period_err_analytic=refined.frequency_err_mo / frequency**2,
        fap=fap,
        candidates=candidates,
        chosen_candidate=chosen,
        eclipse_search=search,
        fits=fits,
        refined=refined,
        prewhitening=pw,
        eclipse=ecl,
        features={
            # shape from the points of the band with most of them: a sparse
            # calibration band (50 V beside 400 I) cannot tell a plateau
            **_extra_features(analysed, analysed.bands[0]),
            "cycles": working.baseline * frequency,
            # a strong variation the data cannot time still tells the class;
            # measured in the band with most points, which determines it best
            "slow_amplitude": slow_amplitude(
                analysed,
                analysed.bands[0],
                choice.trend,
                fits.get(analysed.bands[0])
                if few_cycles and _significant_fap(fap, settings.fap_threshold)
                else None,
            ),
        },
        outlier_times=outlier_times,
        set_aside=tuple(int(i) for i in set_aside),
        trend=choice.trend,
        modulation=modulation,
        relation_band_reason=band_reason,
        flags=tuple(flags),
        **common,
    )
    # one place turns results into features: the same function reads stored results
    # the rulebook's significance gate is the status decided above (one
    # threshold, fap_threshold; a period that does not repeat twice is none)
    features = features_from_result(measured.to_dict())
    slow = features.get("slow_amplitude") or 0.0
    periodic = (features.get("amplitude") or 0.0) if status == "ok" else 0.0
    # how much of the variation is slower than the data can time
    features["slow_share"] = slow / (slow + periodic) if slow + periodic > 0 else 0.0
    suggestions = _suggest(features, settings)
    physics: tuple[PhysicalValue, ...] = ()
    if suggestions:
        physics = derive(suggestions[0].class_code, features, settings.physics)
    result = replace(measured, features=features, suggestions=suggestions, physics=physics)
    # the top suggestion's final numbers (class and period, e.g. an eclipsing
    # binary at its orbital period): what an unreviewed row exports
    return replace(result, final=suggested_final_dict(lc, result.to_dict(), settings))


def _suggest(features: dict[str, Any], settings: AnalysisSettings) -> tuple[Any, ...]:
    rulebook = load_rulebook(settings.rulebook) if settings.rulebook else None
    return suggest(features, rulebook)


def _measure(working: LightCurve, f0: float, fap_method: str, settings: AnalysisSettings):
    """Refined frequency and per-band Fourier fits at the chosen candidate."""
    refined = refine_frequency(working, f0, settings=settings.fourier)
    # a Fourier series cannot follow a narrow eclipse: it would move the
    # search's period (timed by the search's own statistic), and its
    # residuals would set the eclipse points aside as outliers
    from_search = fap_method == ECLIPSE_FAP_METHOD
    if from_search and refined.converged:
        refined = replace(refined, frequency=f0)
    frequency = refined.frequency if refined.converged else f0
    decompose_settings = replace(settings, outlier_sigma=None) if from_search else settings
    fits, outlier_times, analysed = _decompose_with_outliers(working, frequency, decompose_settings)
    return refined, fits, outlier_times, analysed


#: A calibration band's Fourier parameters are used for the relations when
#: their phi31 error is at most this many times the best band's (our choice).
GOOD_ENOUGH_FACTOR = 2.0


def _fourier_quality(fit: FourierFit) -> float:
    """Error of the parameter the relations use most: phi31, else A1 relative."""
    if fit.phi31_err is not None and np.isfinite(fit.phi31_err):
        return float(fit.phi31_err)
    amp = fit.amplitudes[0] if len(fit.amplitudes) else 0.0
    err = fit.amplitudes_err[0] if len(fit.amplitudes_err) else np.inf
    return float(err / amp) if amp > 0 else np.inf


def relation_band(fits: dict[str, FourierFit], settings: AnalysisSettings) -> tuple[str, str]:
    """The band whose Fourier parameters are reported and fed to relations, and why.

    The relations' calibration band (:func:`_calibration_band`) when it was observed and its phi31 error (A1's relative error where
    phi31 is not measured) is within :data:`GOOD_ENOUGH_FACTOR` of the best
    band's; otherwise the band that determines them best.  Relations check
    the band themselves (:mod:`core.physics.derive`): a band they were not
    calibrated in gets no value, only a flag.
    """
    quality = {band: _fourier_quality(fit) for band, fit in fits.items()}
    best = min(quality, key=lambda b: (quality[b], b))
    calibrated = _calibration_band()
    text = ", ".join(f"{b} {q:.3g}" for b, q in quality.items())
    if calibrated in fits and quality[calibrated] <= GOOD_ENOUGH_FACTOR * quality[best]:
        if calibrated == best or len(fits) == 1:
            return (
                calibrated,
                f"{calibrated}: the relations' calibration band and the best determined",
            )
        return calibrated, (
            f"{calibrated}: the relations' calibration band, good enough "
            f"(error within {GOOD_ENOUGH_FACTOR:g}x the best; {text})"
        )
    if calibrated in fits:
        return best, (
            f"{best}: determines the Fourier parameters best ({text}); {calibrated} is more "
            f"than {GOOD_ENOUGH_FACTOR:g}x worse, and relations calibrated in {calibrated} "
            f"are not applied to {best}"
        )
    return best, f"{best}: determines the Fourier parameters best ({text}); no {calibrated} data"


#: Inputs that are Fourier parameters of the light curve.
FOURIER_INPUTS = frozenset({"phi31", "phi31_cos", "A1", "A3", "R21", "R31", "phi21"})


def _calibration_band() -> str:
    """The band the registry's light-curve (Fourier-parameter) relations were calibrated in."""
    from collections import Counter

    from .physics import RELATIONS

    bands = Counter(r.band for r in RELATIONS.values() if FOURIER_INPUTS & set(r.inputs) and r.band)
    return bands.most_common(1)[0][0] if bands else "V"


#: Probability below which amplitude or phase changes between seasons count
#: as modulation (our choice; an F test of the per-season shape, below).
MODULATION_P = 1e-3

#: Free parameters of each season in the seasonal test: level, drift,
#: amplitude scale, phase shift.
SEASON_PARAMETERS = 4

#: Refinements of the period inside the seasonal test, and the phase drift
#: over the baseline (cycles) below which it stops (our choice).
SEASON_REFINE_STEPS = 3
SEASON_REFINE_CYCLES = 1e-3

#: Fewest good points a season needs in the seasonal test: five for each of
#: its free parameters (common practice, no source).
MIN_SEASON_POINTS = 5 * SEASON_PARAMETERS
#: Points of highest leverage left out in turn before a seasonal change is
#: claimed (our choice: on sparse data about half the points; the rest of a
#: survey's points each carry a small share of a season).
LEAVE_ONE_OUT_POINTS = 40


def find_modulation(
    lc: LightCurve, frequency: float, pw, band: str, fit: FourierFit | None = None
) -> dict[str, Any] | None:
    """Modulation of the main mode: side peaks, or changes between seasons.

    Side peaks ``k f1 +- delta`` found by prewhitening give the modulation
    period 1/delta (their mean); side peaks closer to ``k f1`` than the data
    can time (:data:`core.prewhiten.MIN_MODULATION_CYCLES`) flag the star
    with no period.  Otherwise, with two or more seasons (gaps over 60 d)
    of at least :data:`MIN_SEASON_POINTS` points in ``band``, the seasonal
    test of :func:`seasonal_change` decides, with no period (a few seasons
    cannot give one): its probability must be below :data:`MODULATION_P`
    with every point and with any one point left out.

    Parameters
    ----------
    lc : LightCurve
        The analysed light curve (outliers excluded).
    frequency : float
        The main frequency (cycles/day).
    pw : Prewhitening or None
    band : str
        Band of the seasonal test.
    fit : FourierFit, optional
        The main mode's fit in ``band`` (its shape); fitted here if not given.
    """
    if pw is not None:
        peaks = [f for f in pw.frequencies if f.kind == "side peak"]
        if peaks:
            period = pw.modulation_period
            text = (
                f"side peaks, modulation period {period:.4g} d"
                if period is not None
                else "side peaks too close to the main mode to time: the amplitude or phase "
                "changes more slowly than the baseline can tell (no modulation period)"
            )
            return {
                "kind": "side peaks",
                "period": None if period is None else float(period),
                "side_peaks": [f.label for f in peaks],
                "snr": [float(f.snr) for f in peaks],
                "description": text,
            }
    t, m, e = lc.arrays(band)
    if t.size == 0:
        return None
    if fit is None:
        try:
            fit = fit_fourier(t, m, e, frequency, choose_order(t, m, e, frequency).order)
        except PhasewiseError:
            return None
    change = seasonal_change(t, m, e, fit)
    if change is None or not change["p"] < MODULATION_P:  # NaN: no evidence
        return None
    # on sparse data one point on the steep branch can carry a season's
    # phase, through the shape as much as through the seasons' terms: a
    # change that does not survive leaving out any one point is not claimed
    # only a point of high leverage can carry a season alone: the
    # LEAVE_ONE_OUT_POINTS of highest leverage are left out in turn (all of
    # them on sparse data; a dense survey's points each weigh little)
    for i in np.argsort(change["leverage"])[::-1][:LEAVE_ONE_OUT_POINTS]:
        keep = np.arange(t.size) != i
        again = seasonal_change(t[keep], m[keep], e[keep], fit)
        if again is None or not again["p"] < MODULATION_P:
            return None
    n = change["n_seasons"]
    return {
        "kind": "seasonal change",
        "period": None,
        "n_seasons": n,
        "p": change["p"],
        "amplitude_scale": change["amplitude_scale"],
        "phase_shift": change["phase_shift"],
        "description": (
            f"the amplitude or phase of the main mode changes between {n} seasons "
            f"(F test, p = {change['p']:.2g}; no modulation period from so few seasons)"
        ),
    }


def seasonal_change(t: np.ndarray, m: np.ndarray, e: np.ndarray, fit: FourierFit) -> dict | None:
    """F test of a change of amplitude or phase of the light-curve shape between seasons.

    Each season (gaps over 60 d) of at least :data:`MIN_SEASON_POINTS`
    points is modelled as its own level and linear drift (a survey's zero
    point moves from season to season and within one) plus the whole
    Fourier shape ``S`` of ``fit`` scaled and shifted in time, linearised:
    ``a_s S(t) + b_s S'(t)``, with one common term ``c (t - tmean) S'(t)``
    (a slightly wrong period drifts the phase steadily; that is no
    modulation).  The test is that all ``a_s`` and all ``b_s`` are equal.
    It is judged against the scatter of the model's own residuals (an F
    test), with a scatter common to all points added to the errors in
    quadrature first (nightly zero points, a noise floor): against the
    formal errors, or with a first-order fit that leaves the harmonics in
    the residuals, unmodulated stars passed as modulated.

    Returns
    -------
    dict or None
        ``p`` (the F test's probability), ``n_seasons``, ``amplitude_scale``
        and ``phase_shift`` (cycles, later than the mean shape) per season,
        ``leverage`` (each point's hat-matrix diagonal; 0 for points of
        seasons too short to count); None with fewer than two seasons of
        enough points.
    """
    from .period_choice import _seasons

    seasons = _seasons(t)
    labels, counts = np.unique(seasons, return_counts=True)
    kept = labels[counts >= MIN_SEASON_POINTS]
    if kept.size < 2:
        return None
    sel = np.isin(seasons, kept)
    t, m, e = t[sel], m[sel], e[sel]
    index = np.searchsorted(kept, seasons[sel])
    one_hot = np.eye(kept.size)[index]
    k = kept.size
    span = np.ptp(t) or 1.0
    for _ in range(SEASON_REFINE_STEPS):
        design = _season_design(t, fit, one_hot)
        coef, *_ = np.linalg.lstsq(design / e[:, None], m / e, rcond=None)
        # a S(t) + c (t - tmean) S'(t) ~ a S((1 + c/a) t + const): the period
        # the data prefer; the shape is refitted there (a period error of
        # 3e-5 drifts an RRab by 0.04 cycles over three seasons, beyond
        # what the linearised shift follows)
        rate = coef[-1] / np.mean(coef[2 * k : 3 * k])
        drift = abs(rate) * span * fit.frequency  # cycles over the seasons
        if not np.isfinite(rate) or drift < SEASON_REFINE_CYCLES:
            break
        if drift > 1.0:
            # a cycle or more: no small period error (a shape the seasons do
            # not share, as for a constant star); refitting there is meaningless
            break
        try:
            fit = fit_fourier(t, m, e, fit.frequency * (1.0 + rate), fit.order, form=fit.form)
        except PhasewiseError:
            return None
    period = 1.0 / fit.frequency
    design = _season_design(t, fit, one_hot)
    dof = t.size - design.shape[1]
    if dof < 2 * k:
        return None
    # the survey's zero-point noise adds about the same variance to every
    # point: added in quadrature to the errors (chi-square per degree of
    # freedom one), so that the weights say how well each point is known
    coef, *_ = np.linalg.lstsq(design / e[:, None], m / e, rcond=None)
    sigma = np.hypot(e, _extra_scatter(m - design @ coef, e, dof))
    xw = design / sigma[:, None]
    coef, *_ = np.linalg.lstsq(xw, m / sigma, rcond=None)
    residual = (m - design @ coef) / sigma
    normal_inverse = np.linalg.pinv(xw.T @ xw)
    cov = normal_inverse * float(residual @ residual) / dof
    # each point's leverage (hat-matrix diagonal), at the points' own indices
    leverage = np.zeros(sel.size)
    leverage[sel] = np.einsum("ij,jk,ik->i", xw, normal_inverse, xw)

    # every season's scale and shift against the first's
    contrast = np.zeros((2 * (k - 1), design.shape[1]))
    for j in range(1, k):
        for block in (2, 3):
            row = (block - 2) * (k - 1) + j - 1
            contrast[row, block * k] = -1.0
            contrast[row, block * k + j] = 1.0
    diff = contrast @ coef
    extra = contrast.shape[0]
    f_value = float(diff @ np.linalg.pinv(contrast @ cov @ contrast.T) @ diff) / extra
    scale, shift = coef[2 * k : 3 * k], coef[3 * k : 4 * k]
    with np.errstate(divide="ignore", invalid="ignore"):
        # a S(t) + b S'(t) ~ a S(t + b/a): the shape arrives b/a days early
        phase = -shift / scale / period
    return {
        "p": float(special.fdtrc(extra, dof, f_value)),
        "n_seasons": int(k),
        "amplitude_scale": [finite_or_none(x) for x in scale],
        "phase_shift": [finite_or_none(x) for x in phase],
        "leverage": leverage,
    }


def _season_design(t: np.ndarray, fit: FourierFit, one_hot: np.ndarray) -> np.ndarray:
    """Columns of :func:`seasonal_change`'s model: levels, drifts, scales, shifts, period drift."""
    step = 1e-3 / fit.frequency
    now, later, earlier = np.split(fit.model(np.concatenate([t, t + step, t - step])), 3)
    shape = now - fit.A0
    slope = (later - earlier) / (2.0 * step)
    centred = t - t.mean()
    span = np.ptp(t) or 1.0
    return np.hstack(
        [
            one_hot,
            one_hot * (centred / span)[:, None],
            one_hot * shape[:, None],
            one_hot * slope[:, None],
            (slope * centred)[:, None],
        ]
    )


def _extra_scatter(residual: np.ndarray, e: np.ndarray, dof: int) -> float:
    """Scatter that, added in quadrature to ``e``, makes the residuals' chi-square ``dof``.

    The residuals are those of the fit weighted by ``e`` alone (one step of
    reweighting; the refit with the new errors moves them little).
    """
    r2 = residual**2

    def excess(extra: float) -> float:
        return float(np.sum(r2 / (e**2 + extra**2))) / dof - 1.0

    if excess(0.0) <= 0:
        return 0.0
    # with that scatter alone the chi-square is at most dof
    top = float(np.sqrt(np.sum(r2) / dof))
    return float(optimize.brentq(excess, 0.0, top, xtol=1e-5))


def _decompose_with_outliers(
    lc: LightCurve, frequency: float, settings: AnalysisSettings
) -> tuple[dict[str, FourierFit], tuple[float, ...], LightCurve]:
    """Fourier fits per band, refitted once without residual outliers."""
    fits = decompose(lc, frequency, settings.fourier)
    if settings.outlier_sigma is None or not fits:
        return fits, (), lc
    good = lc.good
    residual = np.full(lc.n_points, np.nan)
    for band, fit in fits.items():
        sel = lc.band_mask(band)
        residual[sel] = lc.mag[sel] - fit.model(lc.time[sel])
    outliers = np.zeros(lc.n_points, dtype=bool)
    for band in fits:
        # the same rule as the period choice's: a point must stand apart from
        # its neighbours in phase, not only from a model that underfits
        sel = np.flatnonzero(lc.band_mask(band))
        far = far_from_neighbours(lc.time[sel] * frequency, residual[sel], settings.outlier_sigma)
        outliers[sel[far]] = True
    if not outliers.any():
        return fits, (), lc
    kept = lc.with_excluded(lc.excluded | outliers)
    if kept.n_good < MIN_GOOD_POINTS:
        return fits, (), lc
    refit = decompose(kept, frequency, settings.fourier)
    times = tuple(float(t) for t in lc.time[outliers & good])
    return (refit or fits), times, kept


#: Points within this share of their range of maximum light count as the
#: plateau (our choice: well above the noise of a clear detection, well below
#: the depth of an eclipse).
PLATEAU_LEVEL = 0.15


def _extra_features(lc: LightCurve, band: str) -> dict[str, Any]:
    """Features of the points of ``band`` not read off the result dict.

    The analysis passes the band with most points: the shape of the points
    needs many of them.  ``plateau_fraction`` comes from the points, not the Fourier model: a
    Fourier series of a narrow eclipse rings across the flat maximum.  With
    sampling that is random in phase, the share of points near maximum
    light is the share of the cycle spent there.
    """
    _, mag, _ = lc.arrays(band)
    if mag.size <= 2:
        return {}
    bright, faint = np.percentile(mag, [5.0, 99.0])
    out: dict[str, Any] = {"skewness": float(stats.skew(mag))}
    if faint > bright:
        out["plateau_fraction"] = float(np.mean(mag <= bright + PLATEAU_LEVEL * (faint - bright)))
    return out
