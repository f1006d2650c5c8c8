"""Inputs for telling eclipsing binaries from pulsators.

A W UMa-type or beta Lyrae-type binary shows two minima per orbit, so a
periodogram usually peaks at half the orbital period.  Folded at twice the
tested period ``P`` the light curve then shows two minima per cycle:

* their depths (measured from maximum light) and the depth difference with
  its error: a significant difference says the true period is ``2P``;
* the weight of the second harmonic at ``2P`` (``A2/A1``) and the share of
  the odd harmonics in the variance: a curve that truly repeats at ``P`` has
  no odd harmonics at ``2P``;
* the symmetry of the curve at ``P`` about its minimum light: eclipses are
  symmetric in time, the light curve of a fundamental-mode pulsator is not;
* the depth of a second dip at ``P`` itself (an EA/EB tested at its orbital
  period), ``None`` when the curve at ``P`` has a single minimum (a dip
  shallower than ``secondary_fraction`` of the amplitude, or one the points
  near it do not show significantly, does not count).

The tests run on the band with most points.  Depths come from a Fourier fit
at ``2P`` (order chosen by BIC within the sampling limits); their error from
the covariance of that fit.  Where the curve at ``P`` has one dip, the
points decide whether alternate minima differ (a narrow eclipse no
low-order series follows): in phase bins, odd cycles against even ones
(:func:`alternate_cycles_differ`): a difference found there counts; with
five points a bin at ``2P`` on average, nothing else does; with fewer, the
Fourier depths, or where those are equal the points in the dip compared
between odd and even cycles.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import linalg

from .errors import PhasewiseError
from .fourier import (
    FourierFit,
    FourierSettings,
    _basis,
    _weighted_factor,
    choose_order,
    fit_fourier,
)
from .validation import finite_or_none, require_int, require_positive, require_range

__all__ = [
    "EclipseSettings",
    "EclipseTest",
    "eclipse_test",
    "alternate_cycles_differ",
    "alternate_cycles_bins",
    "alternate_cycles_decide",
]

TWO_PI = 2.0 * np.pi
_GRID = 2048


@dataclass(frozen=True)
class EclipseSettings:
    """Thresholds of the eclipse test.

    Parameters
    ----------
    max_order : int
        Highest Fourier order at twice the period (narrow eclipses need many).
    significance : float
        A depth difference this many sigma (and ``min_depth_fraction`` of the
        deeper minimum) counts as unequal minima.
    min_depth_fraction : float
        Smallest depth difference, as a fraction of the deeper depth, that
        counts as unequal.
    symmetry_limit : float
        Largest asymmetry (rms of the part of the curve at ``P`` that is odd
        about minimum light, over the rms of the curve) still called symmetric.
    secondary_fraction : float
        Smallest depth (below maximum light, as a fraction of the fitted
        curve's peak-to-peak) of a second dip at ``P`` for it to count as a
        secondary minimum.  Shallower wiggles are the ringing of a Fourier
        series fitted to a narrow eclipse (common practice, no source; 0.1
        our choice).
    """

    max_order: int = 16
    significance: float = 3.0
    min_depth_fraction: float = 0.1
    symmetry_limit: float = 0.1
    secondary_fraction: float = 0.1

    def __post_init__(self) -> None:
        require_int("max_order", self.max_order, 2, 30)
        require_positive("significance", self.significance)
        require_range("min_depth_fraction", self.min_depth_fraction, 0.0, 1.0)
        require_range("symmetry_limit", self.symmetry_limit, 0.0, 1.0)
        require_range("secondary_fraction", self.secondary_fraction, 0.0, 1.0)


_opt = finite_or_none  # undefined values leave as None


@dataclass(frozen=True)
class EclipseTest:
    """Depths of alternate minima and harmonic weights; see module text.

    Phases are in cycles of the doubled period (``phase_separation`` 0.5 for
    evenly spaced minima).  Depths are magnitudes below maximum light.
    """

    band: str
    n_points: int
    period: float
    doubled_period: float
    order_doubled: int
    depth_primary: float
    depth_secondary: float
    depth_difference: float
    depth_difference_err: float
    depth_difference_sigma: float
    maxima_difference: float
    phase_separation: float
    second_harmonic_ratio: float | None
    odd_harmonic_fraction: float
    asymmetry: float
    rise_time: float
    depth_secondary_at_p: float | None
    unequal_minima: bool
    symmetric: bool

    @property
    def symmetric_equal_minima(self) -> bool:
        """Symmetric at ``P`` and equal minima at ``2P``: eclipse-like at half period."""
        return self.symmetric and not self.unequal_minima

    def to_dict(self) -> dict[str, Any]:
        return {
            "band": self.band,
            "n_points": int(self.n_points),
            "period": float(self.period),
            "doubled_period": float(self.doubled_period),
            "order_doubled": int(self.order_doubled),
            "depth_primary": float(self.depth_primary),
            "depth_secondary": float(self.depth_secondary),
            "depth_difference": float(self.depth_difference),
            "depth_difference_err": _opt(self.depth_difference_err),
            "depth_difference_sigma": _opt(self.depth_difference_sigma),
            "maxima_difference": float(self.maxima_difference),
            "phase_separation": float(self.phase_separation),
            "second_harmonic_ratio": _opt(self.second_harmonic_ratio),
            "odd_harmonic_fraction": float(self.odd_harmonic_fraction),
            "asymmetry": float(self.asymmetry),
            "rise_time": float(self.rise_time),
            "depth_secondary_at_p": _opt(self.depth_secondary_at_p),
            "unequal_minima": bool(self.unequal_minima),
            "symmetric": bool(self.symmetric),
            "symmetric_equal_minima": bool(self.symmetric_equal_minima),
        }


def _local_maxima(curve: np.ndarray) -> np.ndarray:
    """Indices of local maxima on a periodic grid."""
    return np.flatnonzero((curve >= np.roll(curve, 1)) & (curve > np.roll(curve, -1)))


def _circular_distance(a: np.ndarray | float, b: float) -> np.ndarray:
    d = np.mod(np.asarray(a) - b, 1.0)
    return np.minimum(d, 1.0 - d)


def _dip_in_points(t, m, fit, dip_phase, primary_phase, significance) -> bool:
    """Whether the points near a model dip are significantly fainter than the
    points between the minima.

    A Fourier series fitted to a narrow eclipse rings, and its wiggles look
    like dips in the model; the points themselves show no such dip.  Points
    within 0.04 in phase of the dip are compared with the points at least
    0.1 from both minima (difference of means over its standard error, the
    scatter from the residuals of the fit).
    """
    phase = np.mod((t - fit.epoch_max) * fit.frequency, 1.0)
    near = _circular_distance(phase, dip_phase) <= 0.04
    away = (_circular_distance(phase, dip_phase) >= 0.1) & (
        _circular_distance(phase, primary_phase) >= 0.1
    )
    if near.sum() < 3 or away.sum() < 3:
        return False
    resid = m - fit.model(t)
    scatter = float(np.std(resid))
    err = scatter * np.sqrt(1.0 / near.sum() + 1.0 / away.sum())
    difference = float(np.mean(m[near]) - np.mean(m[away]))
    return err > 0 and difference > significance * err


def _alternate_dips_differ(t, m, fit, faint_phase, settings) -> bool:
    """Whether the points in the dip at ``P`` differ between odd and even cycles.

    A Fourier series of low order at ``2P`` cannot follow a narrow eclipse,
    so the depths of its two minima say nothing when an Algol-type binary is
    found at half its orbit.  The points themselves can: those where the
    model at ``P`` lies deeper than half its range (within a quarter cycle of
    minimum light) are split by the parity of their cycle, counted from
    minimum light, at least three in each.  Their residuals from the model
    at ``P`` (which follows the mean eclipse profile, so where in the
    eclipse a point falls does not count) are compared by their medians (a
    lone outlier does not count either): the difference over its standard
    error (1.2533 x the residuals' scatter x sqrt(1/n1 + 1/n2)) must exceed
    ``significance``, and the difference must be at least
    ``min_depth_fraction`` of the dip's depth.
    """
    model = fit.model(t)
    bright, faint = float(np.min(model)), float(np.max(model))
    t_faint = fit.epoch_max + faint_phase / fit.frequency
    cycle = (t - t_faint) * fit.frequency
    in_dip = (model >= bright + 0.5 * (faint - bright)) & (_circular_distance(cycle, 0.0) <= 0.25)
    parity = np.mod(np.round(cycle), 2.0) == 0
    even, odd = in_dip & parity, in_dip & ~parity
    if even.sum() < 3 or odd.sum() < 3:
        return False
    resid = m - model
    # standard error of a median: sqrt(pi / 2) times that of a mean
    err = 1.2533 * float(np.std(resid)) * np.sqrt(1.0 / even.sum() + 1.0 / odd.sum())
    difference = abs(float(np.median(resid[even]) - np.median(resid[odd])))
    return bool(
        err > 0
        and difference > settings.significance * err
        and difference > settings.min_depth_fraction * (faint - bright)
    )


#: Points per phase bin at ``2P``, on average, from which the binned
#: comparison of alternate cycles decides alone (our choice: a bin of five
#: points has a mean and a scatter); with fewer it can only find a
#: difference, and the Fourier depths still count.
ALTERNATE_POINTS_PER_BIN = 5
#: Fewest and most phase bins at ``P`` of the binned comparison (the eclipse
#: search's 20 at least; 100 resolve an eclipse of 1% of the orbit).
ALTERNATE_MIN_BINS, ALTERNATE_MAX_BINS = 20, 100


def alternate_cycles_bins(n_points: int) -> int:
    """Phase bins at ``P`` for :func:`alternate_cycles_differ` (five points a bin at 2P)."""
    return int(
        np.clip(n_points // (2 * ALTERNATE_POINTS_PER_BIN), ALTERNATE_MIN_BINS, ALTERNATE_MAX_BINS)
    )


def alternate_cycles_decide(n_points: int) -> bool:
    """Whether the binned comparison has points enough to decide alone."""
    return n_points >= 2 * ALTERNATE_POINTS_PER_BIN * ALTERNATE_MIN_BINS


def alternate_cycles_differ(
    t, m, e, frequency: float, n_bins: int, significance: float, min_fraction: float
) -> bool | None:
    """Whether odd and even cycles at ``frequency`` differ, from the points in phase bins.

    A low-order Fourier series cannot follow a narrow eclipse, so the depths
    of its two minima at ``2P`` can differ by several of their formal errors
    when the curve repeats at ``P``.  Phase bins follow any shape.  The
    points are binned at ``P`` (``n_bins``, two bin offsets) and each bin's
    points split by the parity of their cycle (counted from half a cycle
    before the deepest bin, so that one eclipse's points share a parity);
    in every bin with at least
    two points of each parity the two means are compared against the
    scatter inside the bin's own halves (Student's t; the scatter at least
    the points' errors), because inside an eclipse that scatter is the
    eclipse's shape, not the noise, and points of one parity may sample
    one part of it.  Alternate cycles differ when, below the two-sided
    tail of ``significance`` sigmas, either the bin that differs most
    (its probability times the bins compared) or the bins of the dip
    together (deeper than half the deepest bin's depth below the median
    bin; their t values as normal deviates, summed over the root of their
    number) differ, at either bin offset (probabilities doubled), by at
    least ``min_fraction`` of the fold's range of bin means.  None
    when no difference is found and the deepest bin (the eclipse) never
    held two points of each parity: then nothing that matters was compared.
    """
    from scipy import special

    t, m, e = (np.asarray(a, float) for a in (t, m, e))
    cycles = (t - t.min()) * frequency
    # cycles counted from half a cycle before the dip: the points of one
    # eclipse share a parity
    index = np.floor(np.mod(cycles, 1.0) * n_bins).astype(int)
    counts = np.bincount(index, minlength=n_bins)
    means = np.bincount(index, weights=m, minlength=n_bins) / np.maximum(counts, 1)
    dip = (int(np.argmax(np.where(counts > 0, means, -np.inf))) + 0.5) / n_bins
    cycles = cycles - dip + 0.5
    parity = (np.floor(cycles) % 2).astype(int)
    limit = 2.0 * special.ndtr(-significance)
    compared = False
    for shift in (0.0, 0.5):
        index = np.floor(np.mod(cycles, 1.0) * n_bins + shift).astype(int) % n_bins
        split = 2 * index + parity
        count = np.bincount(split, minlength=2 * n_bins).reshape(n_bins, 2)
        total = np.bincount(split, weights=m, minlength=2 * n_bins).reshape(n_bins, 2)
        square = np.bincount(split, weights=m * m, minlength=2 * n_bins).reshape(n_bins, 2)
        noise = np.bincount(index, weights=e * e, minlength=n_bins)
        tested = np.all(count >= 2, axis=1)
        if not tested.any():
            continue
        # no difference counts only where the deepest bin (the eclipse) was compared
        sums = count.sum(axis=1)
        bin_mean = np.where(sums > 0, total.sum(axis=1) / np.maximum(sums, 1), -np.inf)
        compared = compared or bool(tested[int(np.argmax(bin_mean))])
        k, mean = count[tested], total[tested] / count[tested]
        dof = k.sum(axis=1) - 2
        within = (square[tested] - k * mean**2).sum(axis=1) / dof
        within = np.maximum(within, noise[tested] / k.sum(axis=1))
        diff = mean[:, 0] - mean[:, 1]
        stat = diff / np.sqrt(within * (1.0 / k[:, 0] + 1.0 / k[:, 1]))
        # each bin's t as a normal z (same tail probability)
        z = -np.sign(stat) * special.ndtri(np.clip(special.stdtr(dof, -np.abs(stat)), 1e-300, 0.5))
        pooled = bin_mean[tested]
        level = float(np.median(bin_mean[np.isfinite(bin_mean) & (sums > 0)]))
        in_dip = pooled - level >= 0.5 * (float(pooled.max()) - level)
        span = float(np.ptp(bin_mean[sums > 0]))
        # the bin that differs most (a narrow eclipse), and the dip's bins
        # together (Stouffer's sum: an eclipse spread over several bins)
        best = int(np.argmax(np.abs(z)))
        one = 2.0 * tested.sum() * 2.0 * special.ndtr(-abs(z[best]))
        together = 2.0 * special.ndtr(-abs(z[in_dip].sum()) / np.sqrt(max(in_dip.sum(), 1)))
        if one < limit and abs(diff[best]) >= min_fraction * span:
            return True
        if (
            in_dip.any()
            and 2.0 * together < limit
            and abs(np.mean(diff[in_dip])) >= min_fraction * span
        ):
            return True
    return False if compared else None


def eclipse_test(
    lc: Any,
    frequency: float,
    settings: EclipseSettings | None = None,
    fit_at_period: FourierFit | None = None,
) -> EclipseTest:
    """Compare alternate minima at twice the period and the curve's symmetry.

    Parameters
    ----------
    lc : LightCurve
    frequency : float
        The tested frequency ``1/P`` in cycles per day.
    settings : EclipseSettings, optional
    fit_at_period : FourierFit, optional
        A fit of the band with most points at ``frequency`` (e.g. from
        :func:`core.fourier.decompose`) to reuse for the symmetry at ``P``.

    Raises
    ------
    PhasewiseError
        When the band with most points cannot support a Fourier fit at ``2P``.
    """
    settings = settings or EclipseSettings()
    f = float(frequency)
    if not np.isfinite(f) or f <= 0:
        raise PhasewiseError(f"got {frequency!r}; expected a frequency > 0", field="frequency")
    if not lc.bands:
        raise PhasewiseError("no good points to test", field="lightcurve")
    band = lc.bands[0]
    t, m, e = lc.arrays(band)

    # --- at P: symmetry about minimum light
    if fit_at_period is not None and np.isclose(fit_at_period.frequency, f, rtol=1e-12, atol=0):
        fit_p = fit_at_period
    else:
        at_p = FourierSettings(max_order=max(2, settings.max_order // 2))
        fit_p = fit_fourier(t, m, e, f, choose_order(t, m, e, f, at_p).order)
    x = np.arange(512) / 512
    faint = -fit_p.rise_time  # phase of minimum light (phase 0 = maximum light)
    left, right = fit_p.model_phase(faint - x), fit_p.model_phase(faint + x)
    curve_p = fit_p.model_phase(x)
    spread = float(np.sqrt(np.mean((curve_p - curve_p.mean()) ** 2)))
    odd = 0.5 * (right - left)
    asymmetry = float(np.sqrt(np.mean(odd**2)) / spread) if spread > 0 else 0.0
    # a second dip at P itself (an EA/EB tested at its orbital period)
    deepest = int(np.argmax(curve_p))
    dips = _local_maxima(curve_p)
    dips = dips[_circular_distance(x[dips], x[deepest]) >= 0.25]
    second_at_p = None
    if dips.size:
        dip = int(dips[np.argmax(curve_p[dips])])
        depth = float(curve_p[dip] - curve_p.min())
        if depth >= settings.secondary_fraction * np.ptp(curve_p) and _dip_in_points(
            t, m, fit_p, x[dip], x[deepest], settings.significance
        ):
            second_at_p = depth

    # --- at 2P: two minima per cycle
    f2 = 0.5 * f
    at_2p = FourierSettings(max_order=settings.max_order)
    order = max(choose_order(t, m, e, f2, at_2p).order, 2)
    tc = 0.5 * (t.min() + t.max())
    sw = 1.0 / e
    design = _basis(TWO_PI * f2 * (t - tc), order)
    if t.size <= design.shape[1]:
        raise PhasewiseError(
            f"{t.size} points cannot support a Fourier fit of order {order} at twice the period",
            field="order",
        )
    # R and Q^T y from one Householder QR of the design with y appended:
    # Q (points x columns) is never formed (0.2 s at 50,000 points)
    r, qy, _, _ = _weighted_factor(design.T, m, sw)
    beta = linalg.solve_triangular(r, qy)
    resid = (m - design @ beta) * sw
    rinv = linalg.solve_triangular(r, np.eye(r.shape[0]))
    cov = rinv @ rinv.T * float(resid @ resid) / (t.size - beta.size)

    grid = np.arange(_GRID) / _GRID
    g_basis = _basis(TWO_PI * grid, order)
    curve = g_basis @ beta
    i1 = int(np.argmax(curve))  # deepest minimum (faintest)
    peaks = _local_maxima(curve)
    far = peaks[_circular_distance(grid[peaks], grid[i1]) >= 0.25]
    if far.size:
        i2 = int(far[np.argmax(curve[far])])
    else:  # no second dip: take the faintest point half a cycle away
        window = _circular_distance(grid, grid[i1]) >= 0.25
        i2 = int(np.flatnonzero(window)[np.argmax(curve[window])])
    bright = float(curve.min())
    depth1, depth2 = float(curve[i1] - bright), float(curve[i2] - bright)
    grad = g_basis[i1] - g_basis[i2]
    diff_err = float(np.sqrt(max(grad @ cov @ grad, 0.0)))
    diff = depth1 - depth2
    sigma = diff / diff_err if diff_err > 0 else np.inf

    # maxima between the minima (O'Connell-like difference)
    a, b = sorted((grid[i1], grid[i2]))
    inner = (grid > a) & (grid < b)
    outer = ~inner
    max_in = float(curve[inner].min()) if inner.any() else bright
    max_out = float(curve[outer].min()) if outer.any() else bright

    amps = np.hypot(beta[1::2], beta[2::2])
    power = amps**2
    odd_fraction = float(power[0::2].sum() / power.sum()) if power.sum() > 0 else 0.0
    ratio = float(amps[1] / amps[0]) if amps[0] > 0 else np.inf

    unequal = bool(sigma > settings.significance and diff > settings.min_depth_fraction * depth1)
    binned = None
    if second_at_p is None:
        # one dip at P: do the points in phase bins differ between odd and
        # even cycles?  A series that cannot follow a narrow eclipse sees
        # unequal minima in a curve that repeats at P, and misses them in one
        # found at half its orbit
        binned = alternate_cycles_differ(
            t,
            m,
            e,
            f,
            alternate_cycles_bins(t.size),
            settings.significance,
            settings.min_depth_fraction,
        )
    if binned is True or (second_at_p is None and alternate_cycles_decide(t.size)):
        # with points enough the binned comparison decides; where the
        # eclipse bin held too few of each parity nothing says the minima
        # differ (a series that cannot follow the eclipse does not count)
        unequal = bool(binned)
    elif not unequal and second_at_p is None:
        # one dip at P: do its points differ from cycle to cycle (a narrow
        # eclipse alternating with a shallower one, found at half the orbit)?
        unequal = _alternate_dips_differ(t, m, fit_p, faint, settings)
    return EclipseTest(
        band=str(band),
        n_points=int(t.size),
        period=1.0 / f,
        doubled_period=2.0 / f,
        order_doubled=int(order),
        depth_primary=depth1,
        depth_secondary=depth2,
        depth_difference=diff,
        depth_difference_err=diff_err,
        depth_difference_sigma=float(sigma),
        maxima_difference=abs(max_in - max_out),
        phase_separation=float(_circular_distance(grid[i2], grid[i1])),
        second_harmonic_ratio=ratio,
        odd_harmonic_fraction=odd_fraction,
        asymmetry=asymmetry,
        rise_time=float(fit_p.rise_time),
        depth_secondary_at_p=second_at_p,
        unequal_minima=unequal,
        symmetric=bool(asymmetry < settings.symmetry_limit),
    )
