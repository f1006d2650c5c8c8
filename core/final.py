"""A star's final numbers for a class and a period: what the vetted catalogue exports.

A verdict is an input: when the person's class or period differs from the
analysed one, the numbers a paper table needs are recomputed for that class
and period (pure functions of the light curve, the stored result and the
settings):

* a Fourier fit at that period, after a local refinement of the period with
  its error (bands share the frequency);
* the epoch: maximum light for pulsators, primary minimum for eclipsing
  binaries (from the folded curve, not the Fourier model, which rings across
  a narrow eclipse);
* for eclipsing binaries the amplitude and both depths from the folded curve
  itself (not a Fourier peak-to-peak);
* physics from the relations of that class only (``core.physics.derive``);
* a class without a period (CONST) and a rejected star carry no period,
  Fourier terms, epoch or physics; only mean magnitudes.

The points the analysis set aside as outliers and the person's excluded
points are left out.  :func:`finalise_stars` computes and stores the numbers
with the verdicts, so the export never recomputes or guesses.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .classes import CLASSES, canonical_code, class_info
from .errors import PhasewiseError
from .results import FourierTerms, StarResult, number

if TYPE_CHECKING:  # pragma: no cover
    from .analysis import AnalysisSettings
    from .lightcurve import LightCurve

__all__ = [
    "FinalNumbers",
    "BandNumbers",
    "PERIOD_SOURCES",
    "final_numbers",
    "suggested_final",
    "suggested_final_dict",
    "verdict_final",
    "finalise_stars",
    "record_verdict",
    "record_verdicts",
    "matches_verdict",
    "result_key",
    "EclipseShape",
    "eclipse_shape",
]

#: Where a final period comes from.
PERIOD_SOURCES = ("analysis", "suggestion", "person")

#: Statuses whose verdict fixes class and period (others follow the suggestion).
_DECIDED = ("confirmed", "relabelled")


@dataclass(frozen=True)
class BandNumbers:
    """Numbers of one band at the final period.

    ``mean_mag`` is the magnitude mean (A0 of the Fourier fit, or the
    weighted mean of the points for a class without a period);
    ``intensity_mean_mag`` is −2.5 log10 of the mean intensity.  The
    intensity mean's error is taken as the magnitude mean's (first order).
    ``amplitude`` is the Fourier peak-to-peak for pulsators and the primary
    depth of the folded curve for eclipsing binaries.
    """

    n_points: int
    mean_mag: float | None = None
    mean_mag_err: float | None = None
    intensity_mean_mag: float | None = None
    intensity_mean_mag_err: float | None = None
    amplitude: float | None = None
    amplitude_err: float | None = None
    depth_primary: float | None = None
    depth_primary_err: float | None = None
    depth_secondary: float | None = None
    depth_secondary_err: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return {f: getattr(self, f) for f in self.__dataclass_fields__}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> BandNumbers:
        values = {f: data.get(f) for f in cls.__dataclass_fields__ if f != "n_points"}
        return cls(n_points=int(data.get("n_points") or 0), **values)


@dataclass(frozen=True)
class FinalNumbers:
    """The final numbers of one star for one class and period (JSON-able via ``to_dict``).

    ``fourier`` is the primary band's fit (``FourierFit.to_dict()``) at
    ``period``; ``period_ratio`` is the shorter over the longer of ``period``
    and ``period2`` (so it is ``period2/period`` or its inverse, whichever is
    below 1).  ``physics`` holds ``PhysicalValue.to_dict()`` items of the
    class's relations only.
    """

    class_code: str
    period: float | None
    period_err: float | None
    period_source: str | None
    period_asked: float | None
    epoch: float | None
    epoch_err: float | None
    epoch_kind: str | None
    time_scale: str | None
    fourier: dict[str, Any] | None
    fourier_band: str | None
    bands: dict[str, BandNumbers]
    baseline: float | None
    period2: float | None
    period2_snr: float | None
    period_ratio: float | None
    physics: tuple[dict[str, Any], ...]
    ebv: float | None
    ebv_err: float | None
    rv: float | None
    flags: tuple[str, ...] = ()
    result_key: str | None = None
    extra: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        out = {f: getattr(self, f) for f in self.__dataclass_fields__ if f != "extra"}
        out["class"] = out.pop("class_code")
        out["bands"] = {b: n.to_dict() for b, n in self.bands.items()}
        out["physics"] = [dict(p) for p in self.physics]
        out["flags"] = list(self.flags)
        out.update(self.extra)
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> FinalNumbers:
        data = dict(data)
        known = set(cls.__dataclass_fields__) - {"class_code", "extra"}
        values = {k: data.pop(k) for k in list(data) if k in known}
        code = data.pop("class", None)
        values["bands"] = {
            str(b): BandNumbers.from_dict(n) for b, n in (values.get("bands") or {}).items()
        }
        values["physics"] = tuple(dict(p) for p in values.get("physics") or ())
        values["flags"] = tuple(str(f) for f in values.get("flags") or ())
        for name in known - set(values):
            values[name] = None
        return cls(class_code=str(code), extra=data, **values)


# ------------------------------------------------------------------ eclipses
@dataclass(frozen=True)
class EclipseShape:
    """The folded curve of an eclipsing binary, measured from the points.

    Magnitudes are the medians of phase bins; ``depth_*`` are below the
    brightest bin (maximum light).  ``epoch`` is the primary minimum nearest
    the middle of the data.
    """

    epoch: float
    epoch_err: float
    depth_primary: float
    depth_primary_err: float
    depth_secondary: float | None
    depth_secondary_err: float | None
    n_bins: int


#: Primary and secondary minima are looked for at least this far apart in
#: phase (eccentric orbits move the secondary off 0.5; our choice).
SECONDARY_MIN_SEPARATION = 0.2


def eclipse_shape(time: Any, mag: Any, err: Any, period: float) -> EclipseShape:
    """Epoch of primary minimum and depths from the points folded at ``period``.

    The points are phase-binned (about four points per bin, 10–100 bins);
    the faintest bin marks the primary minimum, refined by a parabola
    through the points within 1.5 bins of it; the brightest bin is maximum
    light.  Bin errors are the scatter of the points in the bin over the
    square root of their number (the points' own errors for single points).
    """
    t = np.asarray(time, float)
    m = np.asarray(mag, float)
    e = np.asarray(err, float)
    if t.size < 8:
        raise PhasewiseError(f"{t.size} points cannot show an eclipse", field="lightcurve")
    ref = float(t.min())
    phase = ((t - ref) / period) % 1.0
    n_bins = int(np.clip(t.size // 4, 10, 100))
    index = np.minimum((phase * n_bins).astype(int), n_bins - 1)
    counts = np.bincount(index, minlength=n_bins)
    medians = np.full(n_bins, np.nan)
    errors = np.full(n_bins, np.nan)
    order = np.argsort(index, kind="stable")
    starts = np.concatenate(([0], np.cumsum(counts)))
    for b in np.flatnonzero(counts):
        sel = order[starts[b] : starts[b + 1]]
        medians[b] = np.median(m[sel])
        if sel.size >= 3:
            errors[b] = 1.2533 * np.std(m[sel], ddof=1) / math.sqrt(sel.size)
        else:
            errors[b] = float(np.sqrt(np.mean(e[sel] ** 2)) / math.sqrt(sel.size))
    usable = counts >= (2 if np.count_nonzero(counts >= 2) >= 5 else 1)
    idx = np.flatnonzero(usable)
    faint = int(idx[np.argmax(medians[idx])])
    bright = int(idx[np.argmin(medians[idx])])
    width = 1.0 / n_bins
    centre = (faint + 0.5) * width
    vertex = _dip_profile_minimum(phase, m, e, centre, width)
    if vertex is None:
        vertex = _parabola_minimum(phase, m, e, centre, 1.5 * width)
    if vertex is None:
        phase_min, phase_err = centre, width / math.sqrt(12.0)
        faintest, faintest_err = medians[faint], errors[faint]
    else:
        # a bin median dilutes a minimum narrower than the bin; the parabola does not
        phase_min, phase_err, faintest, faintest_err = vertex
    depth1 = float(faintest - medians[bright])
    depth1_err = float(math.hypot(faintest_err, errors[bright]))
    distance = np.abs(((idx + 0.5) * width - phase_min + 0.5) % 1.0 - 0.5)
    far = idx[distance >= SECONDARY_MIN_SEPARATION]
    depth2 = depth2_err = None
    if far.size:
        second = int(far[np.argmax(medians[far])])
        depth2 = float(medians[second] - medians[bright])
        depth2_err = float(math.hypot(errors[second], errors[bright]))
    epoch = ref + phase_min * period
    epoch += round((float(np.mean(t)) - epoch) / period) * period
    return EclipseShape(
        epoch=float(epoch),
        epoch_err=float(phase_err * period),
        depth_primary=depth1,
        depth_primary_err=depth1_err,
        depth_secondary=depth2,
        depth_secondary_err=depth2_err,
        n_bins=n_bins,
    )


#: Half-widths (sigma, in phase) of the Gaussian dips tried by :func:`_dip_profile_minimum`.
DIP_WIDTHS = np.geomspace(0.004, 0.12, 16)
#: Points within this phase of the faintest bin take part in the dip fit.
DIP_WINDOW = 0.25
#: Beyond this many points in the window, the dip is fitted to phase-binned means.
DIP_MAX_POINTS = 400


def _dip_profile_minimum(phase, mag, err, centre: float, bin_width: float):
    """Centre of a symmetric dip fitted to every point near the faintest bin.

    A constant level plus a Gaussian dip (its depth linear; its centre and
    width searched on a grid, within two bins of ``centre``) is fitted by
    weighted least squares to the points within :data:`DIP_WINDOW` of it.
    Ingress and egress points both time the minimum, so a minimum sampled
    by one or two points is timed far better than by a parabola through the
    faintest bin alone (common practice, no source: eclipse timings use the
    symmetry of the whole dip).  The centre's error is where the chi-square,
    scaled to a reduced value of one, rises by one.

    Returns ``(phase, phase_err, mag, mag_err)``, or None when fewer than
    eight points lie in the window or no dip is fitted there.
    """
    offset = (phase - centre + 0.5) % 1.0 - 0.5
    near = np.abs(offset) <= DIP_WINDOW
    if np.count_nonzero(near) < 8:
        return None
    x, y, w = offset[near], mag[near], 1.0 / err[near] ** 2
    n_points = x.size
    within = 0.0  # chi-square inside the bins, when dense points are binned
    if n_points > DIP_MAX_POINTS:
        # weighted means in narrow phase bins: the same fit at a bounded cost
        index = ((x + DIP_WINDOW) / (2 * DIP_WINDOW) * DIP_MAX_POINTS).astype(int)
        index = np.minimum(index, DIP_MAX_POINTS - 1)
        weight = np.bincount(index, w, DIP_MAX_POINTS)
        keep = weight > 0
        wx = np.bincount(index, w * x, DIP_MAX_POINTS)[keep]
        wy = np.bincount(index, w * y, DIP_MAX_POINTS)[keep]
        within = float((w * y * y).sum() - (wy * wy / weight[keep]).sum())
        w = weight[keep]
        x, y = wx / w, wy / w
    step = bin_width / 20.0
    shifts = np.arange(-2.0 * bin_width, 2.0 * bin_width + 1e-12, step)
    # chi2[i, j]: best level and depth for centre shifts[i] and width DIP_WIDTHS[j]
    d = x[None, None, :] - shifts[:, None, None]
    g = np.exp(-0.5 * (d / DIP_WIDTHS[None, :, None]) ** 2)
    sw, swy, swyy = w.sum(), (w * y).sum(), (w * y * y).sum()
    swg = (g * w).sum(-1)
    swgg = (g * g * w).sum(-1)
    swgy = (g * w * y).sum(-1)
    det = sw * swgg - swg * swg
    ok = det > 1e-12 * sw * np.maximum(swgg, 1e-300)
    det = np.where(ok, det, 1.0)
    level = (swgg * swy - swg * swgy) / det
    depth = (sw * swgy - swg * swy) / det
    chi2 = swyy - level * swy - depth * swgy
    chi2 = np.where(ok & (depth > 0), chi2, np.inf)  # magnitudes: a dip is fainter
    if not np.isfinite(chi2).any():
        return None
    i, j = np.unravel_index(int(np.argmin(chi2)), chi2.shape)
    if i in (0, shifts.size - 1):
        return None  # the best centre is at the edge of the search: no dip here
    best = float(chi2[i, j])
    dof = max(n_points - 4, 1)
    scale = max((best + within) / dof, 1.0)
    profile = chi2[:, j]
    inside = shifts[profile <= best + scale]
    phase_err = max(float(inside.max() - inside.min()) / 2.0, step / 2.0)
    # between grid steps: the vertex of the parabola through the three lowest
    lo, mid, hi = profile[i - 1], profile[i], profile[i + 1]
    curvature = lo - 2.0 * mid + hi
    shift = shifts[i] + (0.5 * step * (lo - hi) / curvature if curvature > 0 else 0.0)
    faintest = float(level[i, j] + depth[i, j])
    # variance of level + depth from the 2x2 normal matrix of the linear fit
    mag_err = float(math.sqrt(scale * (swgg[i, j] - 2.0 * swg[i, j] + sw) / det[i, j]))
    return float((centre + shift) % 1.0), phase_err, faintest, mag_err


def _parabola_minimum(phase, mag, err, centre: float, half_width: float):
    """The faintest point of a parabola through the points near ``centre``.

    Returns ``(phase, phase_err, mag, mag_err)``, or None when the points do
    not outline a minimum there (too few, no curvature, vertex outside).
    """
    offset = (phase - centre + 0.5) % 1.0 - 0.5
    near = np.abs(offset) <= half_width
    if np.count_nonzero(near) < 5:
        return None
    x, y, w = offset[near], mag[near], 1.0 / err[near]
    design = np.column_stack([np.ones_like(x), x, x * x]) * w[:, None]
    try:
        coef, *_ = np.linalg.lstsq(design, y * w, rcond=None)
        normal_inverse = np.linalg.inv(design.T @ design)
    except np.linalg.LinAlgError:
        return None
    c0, c1, c2 = coef
    if c2 >= 0:  # magnitudes: the minimum of light is a maximum of the parabola
        return None
    vertex = -c1 / (2 * c2)
    if abs(vertex) > half_width:
        return None
    resid = y - (c0 + c1 * x + c2 * x * x)
    scale = float(np.sum((resid * w) ** 2) / max(x.size - 3, 1))
    cov = normal_inverse * scale
    # first-order errors of the vertex position and height
    grad_x = np.array([0.0, -1.0 / (2 * c2), c1 / (2 * c2 * c2)])
    grad_y = np.array([1.0, -c1 / (2 * c2), c1 * c1 / (4 * c2 * c2)])
    sigma_x = float(math.sqrt(max(grad_x @ cov @ grad_x, 0.0)))
    sigma_y = float(math.sqrt(max(grad_y @ cov @ grad_y, 0.0)))
    height = c0 - c1 * c1 / (4 * c2)
    return float((centre + vertex) % 1.0), sigma_x, float(height), sigma_y


# ------------------------------------------------------------------ helpers
def _settings(settings: AnalysisSettings | None) -> AnalysisSettings:
    if settings is None:
        from .analysis import AnalysisSettings

        return AnalysisSettings()
    return settings


def _kept_points(
    lc: LightCurve, result: StarResult, settings: AnalysisSettings, eclipsing: bool
) -> tuple[LightCurve, tuple[str, ...]]:
    """The analysis's cleaned points without the set-aside ones, and a flag why not.

    The person's exclusions are always left out.  The points the analysis
    set aside are left out too, except for an eclipsing class: they were set
    aside by their residuals from a Fourier series, which cannot follow a
    narrow eclipse, so they are mostly the eclipse itself.
    """
    from .clean import clean

    cleaned, _ = clean(lc, settings.clean)
    if cleaned.n_points != lc.n_points:  # a cleaning rule that drops points: no index match
        return cleaned, ()
    aside = [i for i in result.set_aside_indices(lc.time) if 0 <= i < lc.n_points]
    if not aside:
        return cleaned, ()
    if eclipsing:
        return cleaned, (
            f"{len(aside)} point(s) the analysis set aside kept: a Fourier residual rule "
            "does not apply to eclipses",
        )
    mask = cleaned.excluded.copy()
    mask[aside] = True
    return cleaned.with_excluded(mask), ()


def _aperiodic_bands(lc: LightCurve) -> dict[str, BandNumbers]:
    out = {}
    for band in lc.bands:
        _, m, e = lc.arrays(band)
        if m.size == 0:
            continue
        w = 1.0 / e**2
        mean = float(np.sum(w * m) / np.sum(w))
        scatter = float(np.std(m, ddof=1)) if m.size > 1 else float(e[0])
        err = scatter / math.sqrt(m.size)
        intensity = float(-2.5 * np.log10(np.mean(10 ** (-0.4 * m))))
        out[band] = BandNumbers(m.size, mean, err, intensity, err)
    return out


def _secondary(result: StarResult, frequency: float, baseline: float):
    """The first independent further frequency that is no harmonic of ``frequency``."""
    tol = 1.5 / baseline if baseline > 0 else 1e-6
    for item in result.secondary_list:
        f = number(item.frequency)
        if f is None or f <= 0 or item.kind not in (None, "independent"):
            continue
        k = max(1, round(f / frequency))
        if (
            abs(f - k * frequency) <= tol
            or abs(2 * f - round(2 * f / frequency) * frequency) <= tol
        ):
            continue
        return 1.0 / f, number(item.snr)
    return None, None


def _default_period(result: StarResult, code: str) -> tuple[float | None, str, tuple[str, ...]]:
    """The period a class takes when nobody gave one, where it comes from, and why."""
    top = result.top
    analysed = result.number("period")
    if top is not None and top.class_code == code and number(top.period):
        source = "analysis" if _same(number(top.period), analysed) else "suggestion"
        return number(top.period), source, ()
    if analysed is None:
        return None, "analysis", ()
    if class_info(code).eclipsing and not result.feature_map.get("two_minima_at_p"):
        return (
            2.0 * analysed,
            "suggestion",
            ("orbital period taken as twice the Fourier period (one minimum per Fourier cycle)",),
        )
    return analysed, "analysis", ()


def _same(a: float | None, b: float | None) -> bool:
    return a is not None and b is not None and math.isclose(a, b, rel_tol=1e-9)


# ------------------------------------------------------------------ the numbers
def final_numbers(
    lc: LightCurve,
    result: StarResult | Mapping[str, Any],
    class_code: str | None = None,
    period: float | None = None,
    *,
    settings: AnalysisSettings | None = None,
    periodic: bool | None = None,
) -> FinalNumbers:
    """The final numbers of a star for a class and a period.

    Parameters
    ----------
    lc : LightCurve
        The star's photometry with the person's exclusion mask.
    result : StarResult or dict
        The stored analysis result of ``lc``.
    class_code : str, optional
        Default: the top suggestion's class, else ``"UNKNOWN"``.
    period : float, optional
        The person's period in days.  Default: the top suggestion's period
        when it suggests this class; else the analysed period (twice it for
        an eclipsing class whose minima the analysis did not see both of).
    settings : AnalysisSettings, optional
        The settings of the analysis (Fourier form and orders, physics).
    periodic : bool, optional
        False forces numbers without a period (a rejected star).
    """
    settings = _settings(settings)
    if not isinstance(result, StarResult):
        result = StarResult.from_dict(result)
    top = result.top
    code = canonical_code(class_code) or (
        canonical_code(top.class_code) if top is not None and top.class_code else "UNKNOWN"
    )
    info = CLASSES[code]
    kept, kept_flags = _kept_points(lc, result, settings, info.eclipsing)
    physics = settings.physics
    common = {
        "class_code": code,
        "time_scale": lc.time_scale,
        "baseline": kept.baseline or None,
        "ebv": physics.ebv,
        "ebv_err": physics.ebv_err,
        "rv": physics.rv,
        "result_key": result_key(result),
    }
    if periodic is False or not info.periodic:
        return _aperiodic(kept, common, asked=period)

    asked = number(period)
    flags: list[str] = list(kept_flags)
    if asked is None:
        asked, source, why = _default_period(result, code)
        flags.extend(why)
    else:
        analysed = result.number("period")
        suggested = number(top.period) if top is not None else None
        source = (
            "analysis"
            if _same(asked, analysed)
            else "suggestion"
            if _same(asked, suggested)
            else "person"
        )
    if asked is None or asked <= 0:
        return _aperiodic(kept, common, asked=None, flags=("no period: the analysis found none",))
    return _periodic(kept, result, code, asked, source, flags, common, settings)


def _aperiodic(kept, common, *, asked, flags=()) -> FinalNumbers:
    return FinalNumbers(
        period=None,
        period_err=None,
        period_source=None,
        period_asked=asked,
        epoch=None,
        epoch_err=None,
        epoch_kind=None,
        fourier=None,
        fourier_band=None,
        bands=_aperiodic_bands(kept),
        period2=None,
        period2_snr=None,
        period_ratio=None,
        physics=(),
        flags=tuple(flags),
        **common,
    )


def _periodic(kept, result, code, asked, source, flags, common, settings) -> FinalNumbers:
    from .classify.features import features_from_result
    from .fourier import decompose, refine_frequency
    from .physics import derive

    info = CLASSES[code]
    analysed = result.number("period")
    frequency, frequency_err = 1.0 / asked, None
    analysed_f, analysed_err = result.number("frequency"), result.number("frequency_err")
    if (
        analysed_f is not None
        and analysed_err is not None
        and (_same(asked, analysed) or _same(asked, 2.0 * analysed))
    ):
        # the analysed frequency is refined already; half of it is known to
        # half its error (an eclipsing binary's orbit at twice the Fourier period)
        scale = 1.0 if _same(asked, analysed) else 0.5
        frequency, frequency_err = analysed_f * scale, analysed_err * scale
    else:
        try:
            refined = refine_frequency(kept, frequency, settings=settings.fourier)
        except PhasewiseError as exc:
            flags.append(f"period not refined: {exc.reason}")
        else:
            if refined.converged:
                frequency, frequency_err = refined.frequency, refined.frequency_err
                if not math.isclose(1.0 / frequency, asked, rel_tol=1e-9):
                    flags.append(f"period {asked:.8g} d refined locally to {1.0 / frequency:.8g} d")
            else:
                flags.append(f"period not refined: {refined.message}")
    fits = None
    if _same(1.0 / frequency, analysed) and not info.eclipsing:
        fits = _stored_fits(result)  # the analysis's own fits at this period
        if fits and sum(f.n_points for f in fits.values()) != kept.n_good:
            fits = None  # made from other points than these
    if not fits:
        fits = decompose(kept, frequency, settings.fourier)
    if not fits:
        return _aperiodic(
            kept, common, asked=asked, flags=(*flags, "no band supports a Fourier fit")
        )
    primary = "V" if "V" in fits else next(iter(fits))
    period = 1.0 / frequency
    period_err = None if frequency_err is None else frequency_err / frequency**2
    bands: dict[str, BandNumbers] = {}
    epoch = epoch_err = None
    for band, fit in fits.items():
        numbers = {
            "n_points": int(fit.n_points),
            "mean_mag": number(fit.mean_mag),
            "mean_mag_err": number(fit.A0_err),
            "intensity_mean_mag": number(fit.intensity_mean_mag),
            "intensity_mean_mag_err": number(fit.A0_err),
            "amplitude": number(fit.peak_to_peak),
            "amplitude_err": number(fit.peak_to_peak_err),
        }
        if info.eclipsing:
            try:
                shape = eclipse_shape(*kept.arrays(band), period)
            except PhasewiseError as exc:
                flags.append(f"no eclipse measured in {band}: {exc.reason}")
            else:
                numbers.update(
                    amplitude=shape.depth_primary,
                    amplitude_err=shape.depth_primary_err,
                    depth_primary=shape.depth_primary,
                    depth_primary_err=shape.depth_primary_err,
                    depth_secondary=shape.depth_secondary,
                    depth_secondary_err=shape.depth_secondary_err,
                )
                if band == primary:
                    epoch, epoch_err = shape.epoch, shape.epoch_err
        bands[band] = BandNumbers(**numbers)
    fit = fits[primary]
    if not info.eclipsing:
        epoch, epoch_err = number(fit.epoch_max), number(fit.epoch_max_err)
    period2, snr2 = _secondary(result, frequency, kept.baseline)
    ratio = None
    if period2 is not None:
        ratio = min(period, period2) / max(period, period2)
    physics: tuple[dict[str, Any], ...] = ()
    if info.relations:
        measured = {
            "period": period,
            "period_err": period_err,
            "frequency": frequency,
            "primary_band": primary,
            "fourier": fit.to_dict(),
            "mean_mag_by_band": {b: n.mean_mag for b, n in bands.items()},
            "intensity_mean_mag_by_band": {b: n.intensity_mean_mag for b, n in bands.items()},
            "amplitude_by_band": {b: n.amplitude for b, n in bands.items()},
            "amplitude": bands[primary].amplitude,
            "period_ratio": ratio,
        }
        features = features_from_result(measured)
        for band, n in bands.items():  # mean-magnitude errors feed the distance errors
            features[f"mean_mag_{band}_err"] = n.mean_mag_err
        physics = tuple(p.to_dict() for p in derive(code, features, settings.physics))
    return FinalNumbers(
        period=period,
        period_err=period_err,
        period_source=source,
        period_asked=asked,
        epoch=epoch,
        epoch_err=epoch_err,
        epoch_kind=info.epoch_kind,
        fourier=_json_fit(fit),
        fourier_band=primary,
        bands=bands,
        period2=period2,
        period2_snr=snr2,
        period_ratio=ratio,
        physics=physics,
        flags=tuple(flags),
        **common,
    )


class _StoredFit:
    """A stored Fourier fit read like a ``FourierFit`` (the numbers the final ones use)."""

    def __init__(self, terms: FourierTerms) -> None:
        self.terms = terms
        self.n_points = int(terms.n_points)
        for name in (
            "mean_mag",
            "A0_err",
            "intensity_mean_mag",
            "peak_to_peak",
            "peak_to_peak_err",
            "epoch_max",
            "epoch_max_err",
        ):
            setattr(self, name, terms.value(name))

    def to_dict(self) -> dict[str, Any]:
        return self.terms.to_dict()


def _stored_fits(result: StarResult) -> dict[str, _StoredFit] | None:
    """The analysis's per-band fits, when every band's is complete; else None."""
    fits = {}
    for band in result.band_list:
        terms = result.band_fourier(band)
        if terms is None:
            continue
        if terms.n_points is None or terms.value("mean_mag") is None:
            return None
        fits[band] = _StoredFit(terms)
    return fits or None


def _json_fit(fit) -> dict[str, Any]:
    return {k: (number(v) if isinstance(v, float) else v) for k, v in fit.to_dict().items()}


# ------------------------------------------------------------------ verdicts
def result_key(result: StarResult | Mapping[str, Any]) -> str:
    """A short fingerprint of the analysis result that final numbers come from.

    It changes when the star is analysed again with other settings, another
    period, or other points (a new mask, other set-aside points).
    """
    import hashlib
    import json

    if not isinstance(result, StarResult):
        result = StarResult.from_dict(result)
    basis = [
        result.settings_hash,
        result.number("frequency"),
        result.n_good,
        list(result.set_aside or ()),
        list(result.outlier_times or ()),
    ]
    return hashlib.sha256(json.dumps(basis).encode()).hexdigest()[:16]


def suggested_final(
    lc: LightCurve, result: StarResult | Mapping[str, Any], settings: AnalysisSettings | None = None
) -> FinalNumbers | None:
    """The final numbers of the top suggestion (class and period); None without one."""
    if not isinstance(result, StarResult):
        result = StarResult.from_dict(result)
    if result.top is None or not result.top.class_code:
        return None
    return final_numbers(lc, result, result.top.class_code, None, settings=settings)


def verdict_final(
    lc: LightCurve,
    result: StarResult | Mapping[str, Any],
    status: str,
    class_code: str | None = None,
    period: float | None = None,
    settings: AnalysisSettings | None = None,
) -> FinalNumbers | None:
    """The final numbers a verdict implies.

    ``confirmed``/``relabelled``: the verdict's class (default the top
    suggestion's) at the verdict's period (default: see
    :func:`final_numbers`).  ``rejected``: numbers without a period.
    ``unreviewed``/``deferred``: None (the row uses the top suggestion's
    numbers stored with the result).
    """
    if status == "rejected":
        return final_numbers(lc, result, class_code, None, settings=settings, periodic=False)
    if status not in _DECIDED:
        return None
    return final_numbers(lc, result, class_code, period, settings=settings)


def matches_verdict(final: FinalNumbers, status: str, class_code: str | None, period) -> bool:
    """Whether ``final`` holds the numbers a verdict asks for (class and period)."""
    if status not in _DECIDED:
        return False
    if class_code and canonical_code(class_code) != final.class_code:
        return False
    if period is None:
        return True
    return any(_same(float(period), p) for p in (final.period, final.period_asked))


def _stored_suggestion(result: StarResult) -> FinalNumbers | None:
    final = result.final
    if not isinstance(final, Mapping) or "error" in final:
        return None
    final = FinalNumbers.from_dict(final)
    return final if final.result_key == result_key(result) else None


class _Finaliser:
    """Final numbers of verdicts of one ledger (settings read once, when first needed).

    A star whose numbers cannot be computed (no readable settings, bad data)
    gets none; ``problems`` says why, star by star.
    """

    def __init__(self, ledger, settings: AnalysisSettings | None) -> None:
        self.ledger, self._settings = ledger, settings
        self.problems: list[tuple[str, str]] = []

    def settings(self) -> AnalysisSettings:
        if self._settings is None:
            from .settings_file import ledger_settings

            self._settings = ledger_settings(self.ledger)
        return self._settings

    def final(self, star_id: str, status: str, code, period) -> dict[str, Any] | None:
        stored = self.ledger.result(star_id)
        if stored is None or stored.failed or not stored.result:
            return None
        result = StarResult.from_dict(stored.result)
        suggested = _stored_suggestion(result)
        if suggested is not None and matches_verdict(suggested, status, code, period):
            return suggested.to_dict()  # the confirmed suggestion: computed at analysis time
        if status not in (*_DECIDED, "rejected"):
            return None
        try:
            lc = self.ledger.lightcurve(star_id)
            final = verdict_final(lc, result, status, code, period, self.settings())
        except (PhasewiseError, ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
            reason = exc.reason if isinstance(exc, PhasewiseError) else str(exc)
            self.problems.append((star_id, f"final numbers not computed: {reason}"))
            return None
        return None if final is None else final.to_dict()

    def stale(self, verdict) -> bool:
        """Whether a verdict's stored final numbers are missing or from another result."""
        if verdict.status not in (*_DECIDED, "rejected"):
            return False
        final = verdict.final
        stored = self.ledger.result(verdict.star_id)
        if stored is None or stored.failed or not stored.result:
            return final is not None
        if not final:
            return True
        return final.get("result_key") != result_key(stored.result)


def record_verdict(
    ledger,
    star_id: str,
    status: str,
    *,
    class_code: str | None = None,
    period: float | None = None,
    note: str | None = None,
    settings: AnalysisSettings | None = None,
):
    """Record a verdict with its final numbers in one transaction; returns the Verdict.

    ``class_code`` is written in the registry's spelling (``NONVAR`` ->
    ``CONST``); a class without a period records no period.
    """
    return record_verdicts(
        ledger, [(star_id, status, class_code, period, note)], settings=settings
    )[0]


def record_verdicts(
    ledger,
    items: Iterable[tuple[str, str, str | None, float | None, str | None]],
    *,
    label: str | None = None,
    settings: AnalysisSettings | None = None,
):
    """Several verdicts ``(star_id, status, class_code, period, note)`` with their
    final numbers, as one undoable action; returns the Verdicts."""
    finaliser = _Finaliser(ledger, settings)
    rows = []
    for star_id, status, class_code, period, note in items:
        code = canonical_code(class_code)
        if code is not None and not CLASSES[code].periodic:
            period = None
        final = finaliser.final(str(star_id), status, code, period)
        rows.append((str(star_id), status, code, period, note, final))
    return ledger.set_verdicts(rows, label=label)


def finalise_stars(
    ledger,
    star_ids: Iterable[str] | None = None,
    *,
    only_stale: bool = True,
    settings: AnalysisSettings | None = None,
) -> int:
    """Compute and store the final numbers of verdicts; returns how many were updated.

    Used after a re-analysis of stars that have verdicts, so their numbers
    follow the new result.  By default only verdicts whose stored numbers
    are missing or come from another analysis result are recomputed.  One
    undoable action.
    """
    finaliser = _Finaliser(ledger, settings)
    wanted = None if star_ids is None else {str(s) for s in star_ids}
    items = []
    for verdict in ledger.verdicts():
        if wanted is not None and verdict.star_id not in wanted:
            continue
        if verdict.status not in (*_DECIDED, "rejected"):
            continue
        if only_stale and not finaliser.stale(verdict):
            continue
        final = finaliser.final(verdict.star_id, verdict.status, verdict.class_code, verdict.period)
        items.append((verdict.star_id, final))
    if items:
        # new numbers for the same decision: the verdict's time stays the person's
        ledger.set_finals(items, label=f"final numbers of {len(items)} verdict(s) recomputed")
    return len(items)


def suggested_final_dict(
    lc: LightCurve, result_dict: Mapping[str, Any], settings: AnalysisSettings | None = None
) -> dict[str, Any] | None:
    """:func:`suggested_final` as a JSON-able dict (stored in the result under ``"final"``).

    Never raises for bad data: a failure is stored as ``{"error": text}``.
    """
    try:
        final = suggested_final(lc, result_dict, settings)
    except (PhasewiseError, ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return {"error": f"final numbers not computed: {exc}"}
    return None if final is None else final.to_dict()
