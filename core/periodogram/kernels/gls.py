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

import threading
from collections import OrderedDict
from typing import NamedTuple

import numpy as np

from .nufft import trig_sums

__all__ = [
    "gls_exact",
    "gls_nufft",
    "weight_terms",
    "clear_weight_terms",
    "WeightTerms",
    "CHUNK_ELEMENTS",
]

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
    """Fast GLS on a uniform grid from non-uniform FFTs (FINUFFT, float64).

    ``y`` may be 2-D (one row per star, same times).  A non-uniform
    ``frequency`` falls back to :func:`gls_exact`.

    The power is the floating-mean formula of Zechmeister & Kürster (2009)
    written with the trigonometric sums of three transforms: ``w y`` at f,
    and ``w`` at f and 2f.  The last two depend on the times and weights
    only; they are kept for the last few (times, weights, grid) seen in this
    thread (:func:`weight_terms`), so the residual searches of
    prewhitening, which keep the points and change only the magnitudes,
    pay one transform each.
    """
    if grid is None:
        return gls_exact(t, y, dy, frequency)
    t = np.ascontiguousarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.ascontiguousarray(_weights(y, dy), dtype=float)
    if y.ndim == 1:
        return _gls_fast_one(t, y, w, grid, n_threads), None
    rows = [_gls_fast_one(t, yi, wi, grid, n_threads) for yi, wi in zip(y, w, strict=True)]
    return np.stack(rows), None


def _gls_fast_one(t, y, w, grid, n_threads):
    from ._gls_loop import power_loop  # imported here: numba is slow to import

    terms = weight_terms(t, w, grid, n_threads=n_threads)
    w = w / w.sum()
    y = y - np.dot(w, y)
    norm = np.dot(w, y * y)
    f1 = trig_sums(t, w * y, grid.fmin, grid.df, grid.n, n_threads=n_threads)
    power = np.empty(grid.n)
    # y is centred, so the real and imaginary parts of f1 are YC and YS of the paper
    power_loop(f1, terms.a, terms.b, terms.c, float(norm), power)
    return power


class WeightTerms(NamedTuple):
    """What the GLS power needs of the times and weights alone, per frequency.

    With the weighted (co)variances CC, SS, CS of cos and sin about their
    means and D = CC SS - CS^2 (Zechmeister & Kürster 2009, eqs. 5-13), the
    power of centred data is ``(a YC^2 + b YS^2 + c YC YS) / YY`` with
    ``a = SS/D``, ``b = CC/D``, ``c = -2 CS/D``.
    """

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray

    @property
    def nbytes(self) -> int:
        return sum(x.nbytes for x in self)


#: Bytes of weight terms kept per thread (three float64 arrays per grid).
WEIGHT_CACHE_BYTES = 64 * 2**20

_local = threading.local()


def clear_weight_terms() -> None:
    """Drop this thread's kept weight terms."""
    _local.weights = OrderedDict()


def weight_terms(t, w, grid, *, n_threads: int = 1) -> WeightTerms:
    """The :class:`WeightTerms` of times ``t`` and weights ``w`` on ``grid``.

    Kept for the last few exact (times, weights, grid) of this thread, up
    to :data:`WEIGHT_CACHE_BYTES`.
    """
    t = np.ascontiguousarray(t, dtype=float)
    w = np.ascontiguousarray(w, dtype=float)
    key = (t.tobytes(), w.tobytes(), float(grid.fmin), float(grid.df), int(grid.n))
    cache: OrderedDict = getattr(_local, "weights", None)
    if cache is None:
        cache = _local.weights = OrderedDict()
    terms = cache.get(key)
    if terms is not None:
        cache.move_to_end(key)
        return terms
    from ._gls_loop import weight_terms_loop  # imported here: numba is slow to import

    wn = w / w.sum()
    fw = trig_sums(t, wn, grid.fmin, grid.df, grid.n, n_threads=n_threads)
    f2 = trig_sums(2.0 * t, wn, grid.fmin, grid.df, grid.n, n_threads=n_threads)
    terms = WeightTerms(np.empty(grid.n), np.empty(grid.n), np.empty(grid.n))
    weight_terms_loop(fw, f2, *terms)
    cache[key] = terms
    total = sum(v.nbytes for v in cache.values())
    while len(cache) > 1 and total > WEIGHT_CACHE_BYTES:
        _, dropped = cache.popitem(last=False)
        total -= dropped.nbytes
    return terms
