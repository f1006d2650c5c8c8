"""Cleaning rules for one light curve, each stated, each reported.

Rules run in this order:

1. **non-finite**: points whose time, magnitude or error is NaN or infinite
   are excluded through the mask (never deleted).
2. **error floor**: zero or negative errors are raised to a stated floor, the
   median of the star's positive errors (default) or a value you set.
3. **duplicate times**: points of one band whose times agree within
   ``duplicate_tolerance`` days are merged into their weighted mean
   (``"merge"``, the group becomes one point) or all but the most precise are
   excluded (``"flag"``), or left alone (``"keep"``).
4. **sigma clipping** (off by default): points further than ``sigma_clip``
   robust sigmas from a running median in time are excluded.
5. **too few points**: a star with fewer than
   :data:`~core.lightcurve.MIN_GOOD_POINTS` good points is marked, not dropped.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .errors import SettingsError
from .lightcurve import MIN_GOOD_POINTS, LightCurve
from .validation import require_choice, require_positive

__all__ = ["CleanSettings", "CleanReport", "clean"]

#: Median absolute deviation to Gaussian sigma (common practice, no source).
MAD_TO_SIGMA = 1.4826


@dataclass(frozen=True)
class CleanSettings:
    """Which cleaning rules run and how.

    Parameters
    ----------
    error_floor : float or None
        Error given to points with zero/negative errors; ``None`` uses the
        median of the star's positive errors.
    duplicates : {"merge", "flag", "keep"}
        What to do with points of one band at the same time.
    duplicate_tolerance : float
        Days within which two times count as the same (0 means equal).
    sigma_clip : float or None
        Clip beyond this many robust sigmas from a running median in time.
        Off (``None``) by default: a running median in time follows the
        light curve only when the window is much shorter than the period, so
        for short periods (RRc, delta Scuti, contact binaries, with periods
        below or near the sampling interval) it removes real variability.
        Use it for slow variables, or with a window well under the period.
    clip_window : float
        Full width of the running-median window in days.
    """

    error_floor: float | None = None
    duplicates: str = "merge"
    duplicate_tolerance: float = 0.0
    sigma_clip: float | None = None
    clip_window: float = 0.5

    def __post_init__(self) -> None:
        if self.error_floor is not None:
            require_positive("error_floor", self.error_floor)
        require_choice("duplicates", self.duplicates, ("merge", "flag", "keep"))
        require_positive("duplicate_tolerance", self.duplicate_tolerance, allow_zero=True)
        if self.sigma_clip is not None:
            require_positive("sigma_clip", self.sigma_clip)
        require_positive("clip_window", self.clip_window)


@dataclass(frozen=True)
class CleanReport:
    """What :func:`clean` did to one star, rule by rule."""

    star_id: str
    n_points_in: int
    n_points_out: int
    n_good_in: int
    n_good_out: int
    non_finite: int  # points newly excluded for NaN/inf
    error_floor: float | None  # the floor used, if any error was floored
    errors_floored: int
    errors_unfixable: int  # non-positive errors excluded: no positive error to take a floor from
    duplicate_groups: int
    duplicates_merged: int  # points removed by merging (groups keep one point each)
    duplicates_flagged: int  # points excluded as duplicates
    sigma_clipped: int
    too_few_points: bool
    settings: CleanSettings

    def to_dict(self) -> dict[str, Any]:
        return {
            "star_id": self.star_id,
            "n_points_in": self.n_points_in,
            "n_points_out": self.n_points_out,
            "n_good_in": self.n_good_in,
            "n_good_out": self.n_good_out,
            "non_finite": self.non_finite,
            "error_floor": self.error_floor,
            "errors_floored": self.errors_floored,
            "errors_unfixable": self.errors_unfixable,
            "duplicate_groups": self.duplicate_groups,
            "duplicates_merged": self.duplicates_merged,
            "duplicates_flagged": self.duplicates_flagged,
            "sigma_clipped": self.sigma_clipped,
            "too_few_points": self.too_few_points,
            "settings": {
                "error_floor": self.settings.error_floor,
                "duplicates": self.settings.duplicates,
                "duplicate_tolerance": self.settings.duplicate_tolerance,
                "sigma_clip": self.settings.sigma_clip,
                "clip_window": self.settings.clip_window,
            },
        }


def _duplicate_groups(time, band, usable, tolerance) -> list[np.ndarray]:
    """Groups (index arrays, 2 or more) of usable points of one band at one time."""
    groups = []
    for label in np.unique(band[usable].astype(str)):
        idx = np.flatnonzero(usable & (band == label))
        idx = idx[np.argsort(time[idx], kind="stable")]
        if idx.size < 2:
            continue
        close = np.diff(time[idx]) <= tolerance
        if not close.any():  # the usual case: no duplicates, nothing to split
            continue
        breaks = np.flatnonzero(~close) + 1
        groups.extend(g for g in np.split(idx, breaks) if g.size > 1)
    return groups


def _running_median_clip(time, mag, band, usable, window, nsigma) -> np.ndarray:
    """Mask of usable points beyond ``nsigma`` robust sigmas of a running median."""
    clip = np.zeros(time.size, dtype=bool)
    half = window / 2.0
    for label in np.unique(band[usable].astype(str)):
        idx = np.flatnonzero(usable & (band == label))
        idx = idx[np.argsort(time[idx], kind="stable")]
        t, m = time[idx], mag[idx]
        lo = np.searchsorted(t, t - half, side="left")
        hi = np.searchsorted(t, t + half, side="right")
        running = np.array([np.median(m[a:b]) for a, b in zip(lo, hi, strict=True)])
        residual = m - running
        sigma = MAD_TO_SIGMA * np.median(np.abs(residual - np.median(residual)))
        if sigma > 0:
            clip[idx[np.abs(residual) > nsigma * sigma]] = True
    return clip


def clean(lc: LightCurve, settings: CleanSettings | None = None) -> tuple[LightCurve, CleanReport]:
    """Apply the cleaning rules to one light curve.

    Parameters
    ----------
    lc : LightCurve
    settings : CleanSettings, optional

    Returns
    -------
    (LightCurve, CleanReport)
        The cleaned curve (excluded points stay in it, marked) and what each
        rule did.
    """
    settings = settings or CleanSettings()
    if not isinstance(settings, CleanSettings):
        raise SettingsError("expected CleanSettings", field="settings")
    time, mag, band = lc.time, lc.mag, lc.band
    err = lc.mag_err.copy()
    excluded = lc.excluded.copy()
    n_good_in = lc.n_good

    # 1. non-finite values: excluded, kept in the arrays
    finite = np.isfinite(time) & np.isfinite(mag) & np.isfinite(err)
    non_finite = int(np.count_nonzero(~finite & ~excluded))
    excluded |= ~finite

    # 2. error floor for zero/negative errors
    floor_used, floored, unfixable = None, 0, 0
    if lc.has_errors:
        bad_err = finite & (err <= 0)
        if bad_err.any():
            positive = err[finite & (err > 0) & ~excluded]
            if settings.error_floor is not None:
                floor_used = float(settings.error_floor)
            elif positive.size:
                floor_used = float(np.median(positive))
            if floor_used is None:
                unfixable = int(np.count_nonzero(bad_err & ~excluded))
                excluded |= bad_err
            else:
                floored = int(np.count_nonzero(bad_err))
                err[bad_err] = floor_used

    # 3. duplicate timestamps within one band
    usable = ~excluded
    groups = _duplicate_groups(time, band, usable, settings.duplicate_tolerance)
    merged = flagged = 0
    keep = np.ones(time.size, dtype=bool)
    time_out, mag_out = time.copy(), mag.copy()
    if settings.duplicates == "merge":
        for group in groups:
            weight = 1.0 / err[group] ** 2
            first = group[0]
            time_out[first] = np.sum(weight * time[group]) / weight.sum()
            mag_out[first] = np.sum(weight * mag[group]) / weight.sum()
            err[first] = 1.0 / np.sqrt(weight.sum()) if lc.has_errors else 1.0
            keep[group[1:]] = False
            merged += group.size - 1
    elif settings.duplicates == "flag":
        for group in groups:
            best = group[np.argmin(err[group])]
            others = group[group != best]
            excluded[others] = True
            flagged += others.size

    # 4. optional sigma clipping against a running median in time
    clipped = 0
    if settings.sigma_clip is not None:
        usable = ~excluded & keep
        clip = _running_median_clip(
            time_out, mag_out, band, usable, settings.clip_window, settings.sigma_clip
        )
        clipped = int(np.count_nonzero(clip))
        excluded |= clip

    notes = list(lc.meta.notes)
    for count, text in (
        (non_finite, "non-finite points excluded"),
        (floored, f"errors <= 0 raised to a floor of {floor_used}"),
        (unfixable, "points with errors <= 0 excluded (no positive error for a floor)"),
        (merged, "duplicate points merged into weighted means"),
        (flagged, "duplicate points excluded"),
        (clipped, "points sigma-clipped"),
    ):
        if count:
            notes.append(f"clean: {count} {text}")
    cleaned = LightCurve(
        lc.star_id,
        time_out[keep],
        mag_out[keep],
        err[keep] if lc.has_errors else None,
        band=band[keep],
        time_scale=lc.time_scale,
        excluded=excluded[keep],
        meta=replace(lc.meta, notes=tuple(notes)),
        has_errors=lc.has_errors,
    )
    report = CleanReport(
        star_id=lc.star_id,
        n_points_in=lc.n_points,
        n_points_out=cleaned.n_points,
        n_good_in=n_good_in,
        n_good_out=cleaned.n_good,
        non_finite=non_finite,
        error_floor=floor_used,
        errors_floored=floored,
        errors_unfixable=unfixable,
        duplicate_groups=len(groups),
        duplicates_merged=merged,
        duplicates_flagged=flagged,
        sigma_clipped=clipped,
        too_few_points=cleaned.n_good < MIN_GOOD_POINTS,
        settings=settings,
    )
    return cleaned, report
