"""Distance modulus ↔ distance, with first-order error propagation.

m - M = 5 log10(d / 10 pc) + A (definition).  Distances from empirical
relations carry those relations' scatter and calibration limits; the
astronomer decides what to believe.
"""

from __future__ import annotations

import math

__all__ = ["distance_modulus", "modulus_to_distance", "distance_to_modulus"]

_LN10_OVER_5 = math.log(10.0) / 5.0


def distance_modulus(
    apparent: float,
    absolute: float,
    extinction: float = 0.0,
    apparent_err: float = 0.0,
    absolute_err: float = 0.0,
    extinction_err: float = 0.0,
) -> tuple[float, float]:
    """True distance modulus mu0 = m - M - A and its error (quadrature sum)."""
    mu = apparent - absolute - extinction
    err = math.sqrt(apparent_err**2 + absolute_err**2 + extinction_err**2)
    return mu, err


def modulus_to_distance(mu: float, mu_err: float = 0.0) -> tuple[float, float]:
    """Distance in parsec, d = 10^(mu/5 + 1), and its error d ln10/5 sigma_mu."""
    distance = 10.0 ** (mu / 5.0 + 1.0)
    return distance, distance * _LN10_OVER_5 * mu_err


def distance_to_modulus(distance_pc: float, distance_err: float = 0.0) -> tuple[float, float]:
    """Distance modulus of a distance in parsec, and its error 5/ln10 sigma_d/d."""
    if distance_pc <= 0:
        raise ValueError(f"distance must be > 0 pc, got {distance_pc}")
    mu = 5.0 * math.log10(distance_pc) - 5.0
    return mu, distance_err / (distance_pc * _LN10_OVER_5)
