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


def _weighted(mus: list[float], errs: list[float]) -> tuple[float, float, float]:
    weights = [1.0 / e**2 for e in errs]
    total = sum(weights)
    mean = sum(w * m for w, m in zip(weights, mus, strict=True)) / total
    if len(mus) > 1:
        scatter = math.sqrt(
            sum(w * (m - mean) ** 2 for w, m in zip(weights, mus, strict=True)) / total
        )
    else:
        scatter = 0.0
    return mean, 1.0 / math.sqrt(total), scatter


def class_distance(code: str, members: list[tuple[str, float, float]]) -> ClassDistance | None:
    """Weighted mean mu0 of ``members`` (star_id, mu0, err), outliers rejected."""
    if not members:
        return None
    kept = list(members)
    outliers: list[str] = []
    changed = True
    while changed and len(kept) > 3:
        changed = False
        worst, worst_z = None, 3.0
        for star in kept:
            others = [s for s in kept if s is not star]
            mean, _, scatter = _weighted([s[1] for s in others], [s[2] for s in others])
            sigma = max(scatter, star[2])
            z = abs(star[1] - mean) / sigma if sigma > 0 else 0.0
            if z > worst_z:
                worst, worst_z = star, z
        if worst is not None:
            kept.remove(worst)
            outliers.append(worst[0])
            changed = True
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
