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
* ``skewness`` is the sample skewness of the *magnitudes* of the primary band:
  positive means a tail toward faint values (narrow minima, as in eclipses),
  negative a tail toward bright values (a sharp maximum, as in RRab stars).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["Feature", "FEATURES", "feature_info", "is_known_feature"]


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
    ("skewness", "", "sample skewness of the magnitudes (> 0: narrow minima)"),
    ("period_ratio", "", "shorter / longer of the two strongest independent periods"),
    ("secondary_period", "d", "second independent period from prewhitening"),
    ("depth_difference", "mag", "difference of alternate minima when folded at 2 * period"),
    ("depth_difference_err", "mag", "1-sigma uncertainty of depth_difference"),
    (
        "second_harmonic_weight",
        "",
        "fraction of the variance of the fold at 2 * period carried by its 2nd harmonic "
        "(near 1: two minima per 2P cycle)",
    ),
    ("colour_VI", "mag", "mean V - mean I"),
    ("mean_mag_V", "mag", "mean V (intensity mean where the analysis gives it)"),
    ("mean_mag_I", "mag", "mean I (intensity mean where the analysis gives it)"),
    ("n_points", "", "number of good points, all bands"),
    ("fap", "", "false-alarm probability of the chosen peak"),
    ("snr", "", "signal-to-noise ratio of the chosen peak"),
    ("residual_std", "mag", "standard deviation of the residuals from the Fourier model"),
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
