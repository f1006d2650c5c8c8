"""The named features the rulebook may refer to.

The analysis fills a flat mapping ``{name: value}`` from its result; a feature
it could not measure is ``None`` (or absent).  Rules in the rulebook name these
features; an unknown name is an error when the rulebook is loaded.

Conventions (the analysis must follow them when it fills the mapping):

* ``period`` is the period of the chosen periodogram peak.  For an eclipsing
  binary this is usually *half* the orbital period; ``depth_difference`` and
  ``second_harmonic_weight`` describe the fold at twice that period, and the
  eclipsing classes are scored at ``2 * period`` when the fold at 2P shows two
  minima (see :mod:`core.classify.scoring`).
* Fourier parameters are of the primary band and in the **sine** form
  ``m = A0 + sum A_i sin(2 pi i (t - t0) / P + phi_i)`` (Jurcsik & Kovács
  1996), phases in radians in [0, 2 pi).
* ``skewness``: positive means a tail toward faint values (narrow minima,
  as in eclipses), negative a tail toward bright values (a sharp maximum,
  as in RRab stars).  The analysis measures it on the points of the band
  with most points, without the points set aside (a Fourier series of a
  narrow eclipse rings; a sparse band cannot show a tail); for a stored
  result without it, :func:`features_from_result` computes it (and
  ``rise_time`` if absent) from the primary band's Fourier model sampled
  evenly in phase.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..results import FourierTerms, StarResult, number
from ..validation import finite_or_none

__all__ = ["Feature", "FEATURES", "feature_info", "is_known_feature", "features_from_result"]


@dataclass(frozen=True)
class Feature:
    """One named feature: its unit, what it means and whether it is a number."""

    name: str
    unit: str
    meaning: str
    numeric: bool = True


def _features(*rows: tuple) -> dict[str, Feature]:
    return {row[0]: Feature(*row) for row in rows}


FEATURES: dict[str, Feature] = _features(
    ("period", "d", "period of the chosen periodogram peak"),
    ("period_err", "d", "1-sigma uncertainty of period"),
    ("log_period", "dex", "log10 of period in days"),
    ("amplitude", "mag", "peak-to-peak amplitude of the Fourier model, primary band"),
    ("amplitude_V", "mag", "peak-to-peak amplitude in V (generally amplitude_<band>)"),
    ("amplitude_I", "mag", "peak-to-peak amplitude in I"),
    ("A1", "mag", "first Fourier amplitude, primary band, sine form"),
    ("A2", "mag", "second Fourier amplitude, primary band, sine form"),
    ("A3", "mag", "third Fourier amplitude, primary band, sine form"),
    ("A1_err", "mag", "1-sigma uncertainty of A1"),
    ("A3_err", "mag", "1-sigma uncertainty of A3"),
    ("R21", "", "A2/A1, primary band"),
    ("R31", "", "A3/A1, primary band"),
    ("R21_err", "", "1-sigma uncertainty of R21"),
    ("R31_err", "", "1-sigma uncertainty of R31"),
    ("phi21", "rad", "phi2 - 2 phi1 mod 2 pi, SINE form, primary band"),
    ("phi31", "rad", "phi3 - 3 phi1 mod 2 pi, SINE form, primary band"),
    ("phi21_err", "rad", "1-sigma uncertainty of phi21"),
    ("phi31_err", "rad", "1-sigma uncertainty of phi31"),
    ("rise_time", "phase", "phase interval from minimum to maximum light (0.5 = symmetric)"),
    (
        "skewness",
        "",
        "skewness of the magnitudes (> 0: narrow minima): the points of the band with most "
        "points, without those set aside (the analysis), else the primary band's Fourier "
        "model over one cycle",
    ),
    (
        "plateau_fraction",
        "",
        "share of the points of the band with most points within 15% of their range of "
        "maximum light "
        "(range from the 5th to the 99th percentile; near 1: constant light between short "
        "eclipses, about 0.3 for a sinusoid); filled in by the analysis",
    ),
    ("period_ratio", "", "shorter / longer of the two strongest independent periods"),
    ("secondary_period", "d", "second independent period from prewhitening"),
    ("depth_difference", "mag", "difference of alternate minima when folded at 2 * period"),
    ("depth_difference_err", "mag", "1-sigma uncertainty of depth_difference"),
    (
        "depth_difference_fraction",
        "",
        "(|depth_difference| - depth_difference_err, at least 0) / amplitude (filled in by "
        "suggest when both are known; one sigma below the measured difference); when the "
        "fold at period already shows two dips, (amplitude - depth_secondary_at_p) / amplitude",
    ),
    (
        "second_harmonic_weight",
        "",
        "share of the variance of the fold at 2 * period in its even harmonics "
        "(1 - odd_harmonic_fraction of the eclipse test; near 1: the 2P fold repeats "
        "each half cycle, i.e. two minima per 2P cycle)",
    ),
    (
        "two_minima_at_p",
        "",
        "1 when the curve folded at period itself shows a second dip (period already "
        "orbital), 0 when it has a single minimum",
    ),
    ("depth_secondary_at_p", "mag", "depth of a second dip at period, when there is one"),
    (
        "unequal_minima",
        "",
        "1 when the alternate minima at 2P differ significantly (the curve does not repeat "
        "at period: the true period is 2P), else 0",
    ),
    (
        "asymmetry",
        "",
        "rms of the part of the curve at period that is odd about minimum light over the "
        "rms of the curve (0: symmetric, as eclipses are)",
    ),
    ("colour_VI", "mag", "mean V - mean I"),
    ("mean_mag_V", "mag", "mean V (intensity mean where the analysis gives it)"),
    ("mean_mag_I", "mag", "mean I (intensity mean where the analysis gives it)"),
    ("n_points", "", "number of good points, all bands"),
    ("fap", "", "false-alarm probability of the chosen peak"),
    (
        "significant",
        "",
        "1 when the analysis adopted the period (status ok: false-alarm probability within "
        "the analysis threshold and at least two cycles in the baseline), else 0",
    ),
    ("cycles", "", "cycles of the chosen period in the baseline"),
    (
        "slow_share",
        "",
        "slow_amplitude / (slow_amplitude + amplitude of the adopted period; 0 when no "
        "period is adopted): 1 when the slow change is all there is (filled in by the analysis)",
    ),
    (
        "slow_amplitude",
        "mag",
        "peak-to-peak, at the observed times of the band with most points, of the variation slower "
        "than the data can time: the adopted trend, plus the Fourier model when its "
        "significant period repeats fewer than two times in the baseline (0 when none)",
    ),
    ("snr", "", "signal-to-noise ratio of the chosen peak"),
    ("residual_std", "mag", "standard deviation of the residuals from the Fourier model"),
    (
        "amplitude_to_noise",
        "",
        "amplitude / residual_std (filled in by suggest when both are known)",
    ),
    ("is_alias", "", "1 when the periodogram marks the chosen peak 'alias', else 0"),
    ("alias_period", "d", "the other period the alias mark points to (d)"),
    ("primary_band", "", "the band the Fourier parameters refer to", False),
)

# Per-band families: any band name may follow the prefix.
_BAND_FAMILIES = {
    "amplitude_": ("mag", "peak-to-peak amplitude in band {band}"),
    "mean_mag_": ("mag", "mean magnitude in band {band}"),
}
_BAND_RE = re.compile(r"^(amplitude_|mean_mag_)([A-Za-z][A-Za-z0-9]*)$")


def feature_info(name: str) -> Feature | None:
    """The :class:`Feature` for ``name`` (including per-band names), or None."""
    if name in FEATURES:
        return FEATURES[name]
    match = _BAND_RE.match(name)
    if match:
        unit, meaning = _BAND_FAMILIES[match.group(1)]
        return Feature(name, unit, meaning.format(band=match.group(2)))
    return None


def is_known_feature(name: str) -> bool:
    """True if ``name`` is a feature the analysis may fill."""
    return feature_info(name) is not None


_float = finite_or_none


def features_from_result(result: Mapping[str, Any]) -> dict[str, Any]:
    """The feature mapping from an ``AnalysisResult.to_dict()``-shaped dict.

    Uses the keys of the shared contract (DEVELOPERS.md): ``period``,
    ``period_err``, ``fap``, ``fourier`` (converted to the sine form if it is
    in cosine form), ``amplitude``, ``amplitude_by_band``, ``mean_mag_by_band``
    (``intensity_mean_mag_by_band`` preferred), ``rise_time``,
    ``residual_std``, ``period_ratio``, ``secondary_periods``, ``eclipse``
    (``depth_difference``, ``depth_difference_err``, ``odd_harmonic_fraction``,
    ``asymmetry``, ``depth_secondary_at_p``) and ``candidates`` (the chosen
    peak's ``snr`` and ``alias`` mark).  A first-order fit gives R21 = R31 =
    0 (no significant harmonic; an upper limit).  Entries already in
    ``result["features"]`` win.  Anything absent is None.
    """
    model = result if isinstance(result, StarResult) else StarResult.from_dict(result)
    out: dict[str, Any] = {name: None for name in FEATURES}
    out["period"] = model.number("period")
    out["period_err"] = model.number("period_err")
    if out["period"] and out["period"] > 0:
        out["log_period"] = math.log10(out["period"])
    out["fap"] = model.number("fap")
    if isinstance(model.status, str):
        # the analysis decided significance with its one threshold
        out["significant"] = 1.0 if model.status == "ok" else 0.0
    out["n_points"] = model.number("n_good" if model.n_good is not None else "n_points")
    out["residual_std"] = model.number("residual_std")
    out["rise_time"] = model.number("rise_time")
    out["period_ratio"] = model.number("period_ratio")
    band = model.primary_band
    out["primary_band"] = band if isinstance(band, str) else None
    out["amplitude"] = model.number("amplitude")
    for name, value in model.band_numbers("amplitude_by_band").items():
        out[f"amplitude_{name}"] = value
    means = model.band_numbers("mean_mag_by_band")
    means.update(
        {k: v for k, v in model.band_numbers("intensity_mean_mag_by_band").items() if v is not None}
    )
    for name, value in means.items():
        out[f"mean_mag_{name}"] = value
    if out.get("mean_mag_V") is not None and out.get("mean_mag_I") is not None:
        out["colour_VI"] = out["mean_mag_V"] - out["mean_mag_I"]

    fourier = model.primary_fourier or FourierTerms()
    for k, name in enumerate(("A1", "A2", "A3"), start=1):
        out[name] = fourier.amplitude(k)
        out[f"{name}_err"] = fourier.amplitude_err(k)
    for name in ("R21", "R31"):
        out[name] = fourier.value(name)
        out[f"{name}_err"] = fourier.value(f"{name}_err")
    for name in ("phi21", "phi31"):  # the sine form (converted when stored as cosine)
        out[name] = fourier.sine_phi(name)
        out[f"{name}_err"] = fourier.value(f"{name}_err")
    if fourier.order == 1:
        # The order choice found no significant second or third harmonic:
        # R21 and R31 are taken as 0 (an upper limit, not a measurement).
        out["R21"] = 0.0 if out["R21"] is None else out["R21"]
        out["R31"] = 0.0 if out["R31"] is None else out["R31"]

    model_shape = _model_shape(fourier)
    if model_shape is not None:
        out["skewness"] = model_shape[0]
        if out["rise_time"] is None:
            out["rise_time"] = model_shape[1]

    secondary = model.secondary_list
    if secondary:
        out["secondary_period"] = number(secondary[0].period)
    elif isinstance(model.secondary_periods, list | tuple) and model.secondary_periods:
        out["secondary_period"] = number(model.secondary_periods[0])  # a bare period

    eclipse = model.eclipse_terms
    if eclipse is not None:
        out["depth_difference"] = eclipse.value("depth_difference")
        out["depth_difference_err"] = eclipse.value("depth_difference_err")
        out["asymmetry"] = eclipse.value("asymmetry")
    if fourier.order == 1:
        # a single sinusoid is symmetric by construction: asymmetry not measured
        out["asymmetry"] = None
    odd = eclipse.value("odd_harmonic_fraction") if eclipse is not None else None
    out["second_harmonic_weight"] = None if odd is None else 1.0 - odd
    if eclipse is not None and eclipse.to_dict():
        unequal = eclipse.unequal_minima
        out["unequal_minima"] = None if unequal is None else float(bool(unequal))
        out["depth_secondary_at_p"] = eclipse.value("depth_secondary_at_p")
        out["two_minima_at_p"] = 0.0 if out["depth_secondary_at_p"] is None else 1.0
        amplitude = out.get("amplitude")
        if out["depth_secondary_at_p"] is not None and amplitude:
            # already orbital at P: the minima to compare are the two dips at P
            # (the deeper one is the peak-to-peak amplitude below maximum light)
            out["depth_difference_fraction"] = max(
                0.0, (amplitude - out["depth_secondary_at_p"]) / amplitude
            )

    chosen = model.chosen_candidate()
    if chosen is not None:
        out["snr"] = number(chosen.snr)
        marks = chosen.mark_list
        out["is_alias"] = 1.0 if "alias" in marks else 0.0
        out["alias_period"] = chosen.alias_period() if "alias" in marks else None

    for name, value in model.feature_map.items():
        if value is not None:
            out[name] = value
    return out


def _model_shape(fourier: FourierTerms) -> tuple[float, float] | None:
    """(skewness, rise time) of the Fourier model over one cycle, or None."""
    amplitudes = fourier.amplitudes
    phases = fourier.phases
    if not amplitudes or not phases or len(amplitudes) != len(phases):
        return None
    try:
        amp = np.asarray(amplitudes, dtype=float)
        pha = np.asarray(phases, dtype=float)
    except (TypeError, ValueError):
        return None
    if not (np.all(np.isfinite(amp)) and np.all(np.isfinite(pha))) or amp.sum() <= 0:
        return None
    phase = np.arange(2000) / 2000.0
    order = np.arange(1, len(amp) + 1)[:, None]
    angle = 2 * np.pi * order * phase + pha[:, None]
    terms = np.sin(angle) if (fourier.form or "sine") == "sine" else np.cos(angle)
    curve = (amp[:, None] * terms).sum(axis=0)
    spread = curve.std()
    if spread == 0:
        return None
    skewness = float(np.mean((curve - curve.mean()) ** 3) / spread**3)
    # Maximum light is the smallest magnitude; rise = phase from minimum to maximum.
    rise = float((phase[np.argmin(curve)] - phase[np.argmax(curve)]) % 1.0)
    return skewness, rise
