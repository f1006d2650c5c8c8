"""Generalised (floating-mean, error-weighted) Lomb-Scargle kernels.

Model at each frequency f (Zechmeister & Kürster 2009)::

    y(t) = c + a cos(2 pi f t) + b sin(2 pi f t),   weights w_i = 1 / dy_i**2

and the power is the fractional reduction of chi-square against the weighted
mean, ``p = (chi2_0 - chi2(f)) / chi2_0`` in [0, 1] (astropy's "standard"
normalisation).  Kernels see bare float arrays: times in days (any origin),
frequencies in cycles/day; ``dy=None`` weighs all points the same and an
infinite ``dy`` gives a point zero weight.

References
----------
Zechmeister, M. & Kürster, M. 2009, A&A 496, 577.
"""

from __future__ import annotations

import numpy as np

__all__ = ["gls_exact", "gls_nufft", "CHUNK_ELEMENTS"]

#: Frequencies x points handled at once by the numpy kernels (bounds memory).
CHUNK_ELEMENTS = 2_000_000


def _weights(y: np.ndarray, dy: np.ndarray | None) -> np.ndarray:
    if dy is None:
        return np.ones_like(y)
    return np.broadcast_to(1.0 / np.asarray(dy, dtype=float) ** 2, y.shape)


def _gls_exact_one(t, y, w, frequency):
    w = w / w.sum()
    y = y - np.dot(w, y)
    yy = np.dot(w, y * y)
    power = np.empty(frequency.size)
    step = max(1, CHUNK_ELEMENTS // max(t.size, 1))
    for start in range(0, frequency.size, step):
        f = frequency[start : start + step]
        arg = (2.0 * np.pi) * np.multiply.outer(f, t)
        cos, sin = np.cos(arg), np.sin(arg)
        c, s = cos @ w, sin @ w
        yc, ys = cos @ (w * y), sin @ (w * y)  # y is centred, so Y = 0
        cc = (cos * cos) @ w - c * c
        ss = (sin * sin) @ w - s * s
        cs = (cos * sin) @ w - c * s
        d = cc * ss - cs * cs
        power[start : start + step] = (ss * yc * yc + cc * ys * ys - 2 * cs * yc * ys) / (yy * d)
    return power


def gls_exact(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """Slow exact GLS by direct sums (Zechmeister & Kürster 2009, eq. 5).

    The reference every fast kernel is tested against.  Chunked over
    frequencies; ``y`` may be 2-D (one row per star).
    """
    y = np.asarray(y, dtype=float)
    w = _weights(y, dy)
    if y.ndim == 1:
        return _gls_exact_one(t, y, w, frequency), None
    return np.stack(
        [_gls_exact_one(t, yi, wi, frequency) for yi, wi in zip(y, w, strict=True)]
    ), None


def gls_nufft(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """Fast GLS on a uniform grid through nifty-ls (finufft backend, float64).

    ``y`` may be 2-D (one row per star, same times): one batched transform.
    A non-uniform ``frequency`` falls back to :func:`gls_exact`.
    """
    if grid is None:
        return gls_exact(t, y, dy, frequency)
    from nifty_ls import finufft as backend

    power = backend.lombscargle(
        t, y, grid.fmin, grid.df, grid.n, dy=dy, nthreads=n_threads, normalization="standard"
    )
    return power, None
