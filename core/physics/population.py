"""Summary of a set of stars: Oosterhoff type, RRc fraction, mean distances.

Rules used (stated here and in the result):

* Oosterhoff type from the mean RRab period: Oo I near 0.55 d, Oo II near
  0.65 d (textbook values; the project's REFERENCES list).  The boundary is
  their midpoint, 0.60 d; a mean within 0.02 d of it is flagged as
  intermediate-looking (common practice, no source).
* RRc fraction N_c / (N_ab + N_c).
* Per class: the inverse-variance weighted mean of the stars' mu0 (the first
  ``mu0`` with a value per star, which for DCEP is the reddening-free one),
  its error 1/sqrt(sum w), and the weighted scatter.  Outliers: a star more
  than 3 sigma from the weighted mean of the others kept, sigma being the
  larger of the kept stars' scatter and the star's own error; iterated until
  nothing changes (at least 3 stars kept).

Caution: distances come from empirical relations with known scatter and
calibration ranges; the astronomer decides.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from .derive import PhysicalValue
from .distance import modulus_to_distance

__all__ = ["StarPhysics", "ClassDistance", "PopulationSummary", "population_summary"]

OOSTERHOFF_BOUNDARY = 0.60
OOSTERHOFF_RULE = (
    "Oo I if the mean RRab period < 0.60 d, Oo II otherwise (midpoint of the textbook "
    "0.55 d and 0.65 d); within 0.02 d of 0.60 d flagged as near the boundary"
)
OUTLIER_RULE = (
    "more than 3 sigma from the weighted mean of the other kept stars "
    "(sigma = max(scatter of the kept stars, the star's own error)), iterated"
)


@dataclass(frozen=True)
class StarPhysics:
    """What the summary needs from one star."""

    star_id: str
    class_code: str
    period: float | None
    values: tuple[PhysicalValue, ...] = ()

    def mu0(self) -> tuple[float, float] | None:
        for value in self.values:
            if value.quantity == "mu0" and value.value is not None and value.err:
                return value.value, value.err
        return None


@dataclass(frozen=True)
class ClassDistance:
    """Weighted mean distance modulus of one class's members."""

    class_code: str
    n_stars: int
    n_used: int
    mu0: float
    mu0_err: float
    scatter: float
    distance_pc: float
    distance_err_pc: float
    outliers: tuple[str, ...]
    outlier_rule: str = OUTLIER_RULE

    def to_dict(self) -> dict[str, Any]:
        return {
            "class": self.class_code,
            "n_stars": self.n_stars,
            "n_used": self.n_used,
            "mu0": self.mu0,
            "mu0_err": self.mu0_err,
            "scatter": self.scatter,
            "distance_pc": self.distance_pc,
            "distance_err_pc": self.distance_err_pc,
            "outliers": list(self.outliers),
            "outlier_rule": self.outlier_rule,
        }


@dataclass(frozen=True)
class PopulationSummary:
    """Population summary of a set of classified stars."""

    n_stars: int
    n_rrab: int
    n_rrc: int
    mean_rrab_period: float | None
    mean_rrab_period_err: float | None
    oosterhoff: str | None
    oosterhoff_flags: tuple[str, ...]
    rrc_fraction: float | None
    distances: tuple[ClassDistance, ...]
    oosterhoff_rule: str = OOSTERHOFF_RULE

    def to_dict(self) -> dict[str, Any]:
        return {
            "n_stars": self.n_stars,
            "n_rrab": self.n_rrab,
            "n_rrc": self.n_rrc,
            "mean_rrab_period": self.mean_rrab_period,
            "mean_rrab_period_err": self.mean_rrab_period_err,
            "oosterhoff": self.oosterhoff,
            "oosterhoff_flags": list(self.oosterhoff_flags),
            "oosterhoff_rule": self.oosterhoff_rule,
            "rrc_fraction": self.rrc_fraction,
            "distances": [d.to_dict() for d in self.distances],
        }


def _weight(err: float) -> float:
    return 1.0 / err**2


def _weighted(mus: list[float], errs: list[float]) -> tuple[float, float, float]:
    weights = [_weight(e) for e in errs]
    total = sum(weights)
    mean = sum(w * m for w, m in zip(weights, mus, strict=True)) / total
    if len(mus) > 1:
        scatter = math.sqrt(
            sum(w * (m - mean) ** 2 for w, m in zip(weights, mus, strict=True)) / total
        )
    else:
        scatter = 0.0
    return mean, 1.0 / math.sqrt(total), scatter


def _loo_z(kept: list[tuple[str, float, float]], star: tuple[str, float, float]) -> float:
    """The outlier rule for one star: its distance from the weighted mean of the others."""
    others = [s for s in kept if s is not star]
    mean, _, scatter = _weighted([s[1] for s in others], [s[2] for s in others])
    sigma = max(scatter, star[2])
    return abs(star[1] - mean) / sigma if sigma > 0 else 0.0


# Ranges inside which the screen below can bound its rounding errors; members
# outside them (zero or infinite weights, absurd moduli) get the rule applied
# to every star, as before.
_WEIGHT_RANGE = (1e-100, 1e100)
_MU_LIMIT = 1e50
_UNIT_ROUNDOFF = 2.0**-53


def _leave_one_out_sums(x: np.ndarray) -> np.ndarray:
    """``sum(x) - x[i]`` for every i, as prefix + suffix sums (no cancellation)."""
    before = np.concatenate(([0.0], np.cumsum(x)[:-1]))
    after = np.concatenate((np.cumsum(x[::-1])[::-1][1:], [0.0]))
    return before + after


def _leave_one_out_max(x: np.ndarray) -> np.ndarray:
    """``max(x without x[i])`` for every i (x >= 0)."""
    before = np.concatenate(([0.0], np.maximum.accumulate(x)[:-1]))
    after = np.concatenate((np.maximum.accumulate(x[::-1])[::-1][1:], [0.0]))
    return np.maximum(before, after)


def _candidates(mus: np.ndarray, errs: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Indices of the stars that can be the worst outlier of this round.

    All leave-one-out weighted means and scatters come from running sums, in
    linear time, each with a bound on its rounding error that also covers the
    rounding of :func:`_loo_z`.  A star is kept if its z can exceed 3 and can
    reach the largest z; only those get :func:`_loo_z` itself, so the choice
    (ties included) is the rule's own.  A non-finite modulus or a NaN weight
    makes every mean it enters NaN, and so that star's z is 0; such a star is
    then the only candidate (or there is none, if there are two of them).
    """
    n = len(mus)
    everyone = np.arange(n)
    in_range = (weights >= _WEIGHT_RANGE[0]) & (weights <= _WEIGHT_RANGE[1])
    finite = np.isfinite(mus) & (np.abs(mus) <= _MU_LIMIT) & in_range
    poisoned = (~np.isfinite(mus) | np.isnan(weights)) & (in_range | np.isnan(weights))
    if not np.all(finite | poisoned):
        return everyone
    if np.any(poisoned):
        return np.flatnonzero(poisoned) if np.count_nonzero(poisoned) == 1 else everyone[:0]
    centre = float(np.sum(weights * mus) / np.sum(weights))
    offsets = mus - centre
    total = _leave_one_out_sums(weights)
    shift = _leave_one_out_sums(weights * offsets) / total
    var = _leave_one_out_sums(weights * offsets * offsets) / total - shift * shift
    numerator = np.abs(offsets - shift)
    # Rounding bounds (recursive sums: n u times the sum of magnitudes), for
    # this screen and for _loo_z alike.
    spread = _leave_one_out_max(np.abs(offsets))
    biggest = float(np.max(np.abs(mus)))
    tol = 8.0 * (n + 8) * _UNIT_ROUNDOFF
    var_err = tol * spread**2 + (tol * biggest) ** 2 + n * 1e-280
    num_err = tol * (spread + 2.0 * biggest + np.abs(mus))
    scatter_lo = np.sqrt(np.maximum(var - var_err, 0.0)) * (1.0 - 4.0 * _UNIT_ROUNDOFF)
    scatter_hi = np.sqrt(var + var_err) * (1.0 + 4.0 * _UNIT_ROUNDOFF)
    sigma_lo = np.where(errs > scatter_lo, errs, scatter_lo)  # max() as _loo_z takes it
    sigma_hi = np.where(errs > scatter_hi, errs, scatter_hi)
    num_lo = np.maximum(numerator - num_err, 0.0)
    num_hi = numerator + num_err
    with np.errstate(divide="ignore", invalid="ignore"):
        # z is 0 where sigma can be 0 (a negative err and no scatter)
        z_lo = np.where(sigma_lo > 0, num_lo / sigma_hi * (1.0 - 4.0 * _UNIT_ROUNDOFF), 0.0)
        z_hi = np.where(sigma_lo > 0, num_hi / sigma_lo * (1.0 + 4.0 * _UNIT_ROUNDOFF), np.inf)
    z_hi = np.where(sigma_hi > 0, z_hi, 0.0)
    return np.flatnonzero((z_hi > 3.0) & (z_hi >= np.max(z_lo)))


def class_distance(code: str, members: list[tuple[str, float, float]]) -> ClassDistance | None:
    """Weighted mean mu0 of ``members`` (star_id, mu0, err), outliers rejected.

    Each round removes the star with the largest z above 3 (the first such in
    order on a tie), z being :func:`_loo_z`; :func:`_candidates` narrows a
    round to the few stars that can win it, so a round takes linear time.
    """
    if not members:
        return None
    kept = list(members)
    outliers: list[str] = []
    screen = len(kept) > 3 and len({id(s) for s in kept}) == len(kept)  # _loo_z drops copies
    if screen:
        try:
            weight_arr = np.array([_weight(s[2]) for s in kept], dtype=float)
        except Exception:  # the rule itself, star by star, raises as it always did
            screen = False
        else:
            mus = np.array([s[1] for s in kept], dtype=float)
            errs = np.array([s[2] for s in kept], dtype=float)
    while len(kept) > 3:
        candidates = _candidates(mus, errs, weight_arr) if screen else range(len(kept))
        worst, worst_z = None, 3.0
        for index in candidates:
            z = _loo_z(kept, kept[index])
            if z > worst_z:
                worst, worst_z = kept[index], z
        if worst is None:
            break
        index = kept.index(worst)  # the element list.remove takes
        del kept[index]
        if screen:
            mus, errs, weight_arr = (np.delete(a, index) for a in (mus, errs, weight_arr))
        outliers.append(worst[0])
    mean, err, scatter = _weighted([s[1] for s in kept], [s[2] for s in kept])
    distance, distance_err = modulus_to_distance(mean, err)
    return ClassDistance(
        code, len(members), len(kept), mean, err, scatter, distance, distance_err, tuple(outliers)
    )


def _as_star(item: StarPhysics | Mapping[str, Any]) -> StarPhysics:
    if isinstance(item, StarPhysics):
        return item
    values = tuple(
        v if isinstance(v, PhysicalValue) else PhysicalValue(
            v["quantity"], v.get("value"), v.get("err"), v.get("unit", ""), v.get("relation", ""),
            v.get("citation", ""), tuple(v.get("flags", ())),
        )
        for v in item.get("physics", ()) or ()
    )  # fmt: skip
    return StarPhysics(str(item["star_id"]), str(item["class_code"]), item.get("period"), values)


def population_summary(stars: Iterable[StarPhysics | Mapping[str, Any]]) -> PopulationSummary:
    """Summarise a set of stars (see the module docstring for the rules).

    ``stars`` are :class:`StarPhysics` or mappings with ``star_id``,
    ``class_code``, ``period`` and ``physics`` (list of PhysicalValue dicts).
    """
    stars = [_as_star(s) for s in stars]
    rrab = [float(s.period) for s in stars if s.class_code == "RRab" and s.period]
    n_rrc = sum(1 for s in stars if s.class_code == "RRc")
    n_rrab = sum(1 for s in stars if s.class_code == "RRab")
    mean_p = mean_p_err = oo = None
    oo_flags: list[str] = []
    if rrab:
        mean_p = sum(rrab) / len(rrab)
        if len(rrab) > 1:
            sd = math.sqrt(sum((p - mean_p) ** 2 for p in rrab) / (len(rrab) - 1))
            mean_p_err = sd / math.sqrt(len(rrab))
        oo = "Oo I" if mean_p < OOSTERHOFF_BOUNDARY else "Oo II"
        if abs(mean_p - OOSTERHOFF_BOUNDARY) < 0.02:
            oo_flags.append(f"mean RRab period {mean_p:.3f} d is within 0.02 d of the boundary")
        if len(rrab) < 5:
            oo_flags.append(f"only {len(rrab)} RRab stars")
    fraction = n_rrc / (n_rrab + n_rrc) if (n_rrab + n_rrc) else None
    by_class: dict[str, list[tuple[str, float, float]]] = {}
    for star in stars:
        mu = star.mu0()
        if mu is not None:
            by_class.setdefault(star.class_code, []).append(
                (star.star_id, float(mu[0]), float(mu[1]))
            )
    distances = tuple(
        d for code, members in by_class.items() if (d := class_distance(code, members)) is not None
    )
    return PopulationSummary(
        len(stars), n_rrab, n_rrc, mean_p, mean_p_err, oo, tuple(oo_flags), fraction, distances
    )
