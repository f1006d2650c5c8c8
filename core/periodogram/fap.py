"""False-alarm probabilities of periodogram peaks.

* GLS, one band: Baluev (2008) alias-free approximation (his eq. 6 with the
  Table 1 "standard" tau), the same as astropy's
  ``false_alarm_probability(method="baluev")``.
* Multi-harmonic and multi-band: the single-frequency probability from the
  F distribution of the chi-square reduction, ``F(d_model, N - d_null - d_model)``
  (Schwarzenberg-Czerny 1996), raised to the number of independent
  frequencies ``M = (fmax - fmin) T`` as ``1 - (1 - p)^M`` (common practice,
  no source; conservative at most a few times the Baluev value for nterms=1).
* PDM and conditional entropy have no closed-form null distribution here;
  :func:`core.periodogram.find_candidates` gives them the Baluev FAP of the
  GLS power at the candidate frequency (documented on the candidate).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["baluev_fap", "f_test_fap", "effective_points"]


def effective_points(residual: np.ndarray) -> float:
    """Independent points among time-ordered residuals with correlated noise.

    With lag-one autocorrelation rho of the residuals (in units of their
    errors, time order), ``N_eff = N (1 - rho) / (1 + rho)`` for rho > 0
    (the AR(1) variance inflation; common practice, no source).  Night-to-
    night zero points, drifts and ramps make neighbouring residuals alike;
    white noise leaves N.
    """
    r = np.asarray(residual, dtype=float)
    n = r.size
    if n < 5:
        return float(n)
    r = r - r.mean()
    denom = float(np.dot(r, r))
    if denom <= 0:
        return float(n)
    rho = float(np.dot(r[1:], r[:-1]) / denom)
    rho = min(max(rho, 0.0), 0.95)
    return n * (1.0 - rho) / (1.0 + rho)


def _weighted_var(values, dy):
    if dy is None:
        return float(np.var(values))
    w = 1.0 / np.asarray(dy, dtype=float) ** 2
    mean = np.dot(w, values) / w.sum()
    return float(np.dot(w, values**2) / w.sum() - mean**2)


def baluev_fap(power, fmax, time, dy=None, n_effective=None):
    """Baluev (2008) false-alarm probability of GLS peaks of ``power``.

    Parameters
    ----------
    power : float or array
        GLS power, standard normalisation (in [0, 1]).
    fmax : float
        Highest frequency searched, c/d.
    time : array of float
        Times of the points used, days.
    dy : array of float, optional
        Their errors (weights the effective baseline).
    n_effective : float, optional
        Independent points, when correlated noise makes them fewer than the
        points (see :func:`effective_points`); default all points.

    Notes
    -----
    With N points, ``fap_single = (1 - z)^((N - 3)/2)`` and
    ``tau = gamma(N - 1) W (1 - z)^((N - 4)/2) sqrt((N - 1) z / 2)``,
    ``W = fmax sqrt(4 pi var_w(t))``; ``FAP = 1 - (1 - fap_single) e^-tau``
    (Baluev 2008, eq. 6 and Table 1).
    """
    z = np.clip(np.asarray(power, dtype=float), 0.0, 1.0)
    t = np.asarray(time, dtype=float)
    t = t - t.mean()
    n = t.size if n_effective is None else max(float(min(n_effective, t.size)), 5.0)
    nh, nk = n - 1, n - 3
    gamma = math.sqrt(2.0 / nh) * math.exp(math.lgamma(nh / 2) - math.lgamma((nh - 1) / 2))
    w_eff = fmax * np.sqrt(4.0 * np.pi * _weighted_var(t, dy))
    fap_single = (1.0 - z) ** (0.5 * nk)
    tau = gamma * w_eff * (1.0 - z) ** (0.5 * (nk - 1)) * np.sqrt(0.5 * nh * z)
    fap = -np.expm1(-tau) + fap_single * np.exp(-tau)
    return np.clip(fap, 0.0, 1.0)


def f_test_fap(power, n_points, n_model, n_null, n_independent):
    """False-alarm probability of a chi-square-reduction power by the F test.

    Parameters
    ----------
    power : float or array
        Fractional chi-square reduction (in [0, 1]).
    n_points : int
        Points fitted.
    n_model : int
        Parameters the periodic model adds to the null model (2 nterms per band).
    n_null : int
        Parameters of the null model (one mean per band).
    n_independent : float
        Independent frequencies searched.
    """
    from scipy import special  # imported here: scipy.special is slow to import

    p = np.clip(np.asarray(power, dtype=float), 0.0, 1.0 - 1e-300)
    dof = n_points - n_null - n_model
    if dof < 1:
        return np.ones_like(p)
    with np.errstate(divide="ignore"):
        f_value = (dof / n_model) * p / (1.0 - p)
    single = special.fdtrc(n_model, dof, f_value)  # survival function of F
    with np.errstate(divide="ignore"):
        return np.clip(-np.expm1(max(n_independent, 1.0) * np.log1p(-single)), 0.0, 1.0)
