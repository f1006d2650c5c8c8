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
    pay one transform each.  The three sums of the last few searches are
    kept too: a search of the same points less a few (outliers set aside)
    subtracts those points' terms instead of transforming again
    (:func:`_from_kept_sums`).
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

    kept = _from_kept_sums(t, y, w, grid)
    if kept is None:
        terms, sums = _weight_terms_and_sums(t, w, grid, n_threads)
        wn = w / w.sum()
        mean = float(np.dot(wn, y))
        yc = y - mean
        norm = float(np.dot(wn, yc * yc))
        f1 = trig_sums(t, wn * yc, grid.fmin, grid.df, grid.n, n_threads=n_threads)
        if sums is not None:
            kept = _Sums(_grid_key(grid), t, w, y, float(w.sum()), mean, norm, (*sums, f1), terms)
            _keep_sums(kept)
    else:
        terms, f1, norm = kept.terms, kept.sums[2], kept.norm
    power = np.empty(grid.n)
    # y is centred, so the real and imaginary parts of f1 are YC and YS of the paper
    power_loop(f1, terms.a, terms.b, terms.c, norm, power)
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


# ------------------------------------------------- a few points set aside
class _Sums(NamedTuple):
    """One search's points, its three transforms and weight terms.

    ``sums``: complex sums of the normalised weights at f and at 2f, and
    of the normalised weights times the centred magnitudes at f.
    """

    grid: tuple
    t: np.ndarray
    w: np.ndarray
    y: np.ndarray
    w_sum: float
    mean: float
    norm: float
    sums: tuple
    terms: WeightTerms


#: Searches whose sums are kept per thread (the main search of each band
#: of one star, and the trend step's) ...
KEPT_SUMS = 4
#: ... and the most bytes they may hold together (72 bytes per frequency:
#: four searches of the default ~232,000-frequency grid); the newest is
#: always kept.
KEPT_SUMS_BYTES = 80 * 2**20


def _nbytes(sums: _Sums) -> int:
    return sum(a.nbytes for a in (sums.t, sums.w, sums.y, *sums.sums, *sums.terms))


def _grid_key(grid) -> tuple:
    return float(grid.fmin), float(grid.df), int(grid.n)


def _keep_sums(sums: _Sums) -> None:
    kept: list = getattr(_local, "sums", None)
    if kept is None:
        kept = _local.sums = []
    # copies: the caller's arrays may change after the search
    kept.insert(0, sums._replace(t=sums.t.copy(), w=sums.w.copy(), y=sums.y.copy()))
    del kept[KEPT_SUMS:]
    while len(kept) > 1 and sum(_nbytes(k) for k in kept) > KEPT_SUMS_BYTES:
        kept.pop()


#: Most points a search may lose and still be computed from the last
#: search's sums.  Each lost point costs one pass over the grid
#: (:func:`_gls_loop.downdate_loop`, ~1.2 ms per 232,000 frequencies),
#: a fresh search three transforms (~12 ms each for that grid from 700 to
#: 50,000 points, the grid's FFT dominating), measured on the 2-core
#: development machine: sixteen points cost about half a fresh search.
DOWNDATE_MAX_POINTS = 16


def _removed_points(old: np.ndarray, new: np.ndarray, most: int) -> np.ndarray | None:
    """Indices into ``old`` whose removal leaves ``new`` (same order), or None.

    Finds the first difference, takes that point of ``old`` as removed and
    goes on; the caller checks the other arrays at the kept points.
    """
    k = old.size - new.size
    if not 1 <= k <= most:
        return None
    removed: list[int] = []
    start = 0
    while True:
        ahead = new[start:]
        behind = old[start + len(removed) : start + len(removed) + ahead.size]
        differ = np.flatnonzero(ahead != behind)
        if differ.size == 0:
            break
        start += int(differ[0])
        removed.append(start + len(removed))
        if len(removed) > k:
            return None
    removed.extend(range(new.size + len(removed), old.size))
    return np.asarray(removed, dtype=int) if len(removed) == k else None


def _from_kept_sums(t, y, w, grid) -> _Sums | None:
    """The kept search of the same points, or of them and a few more less those; else None.

    Setting a few outliers aside and searching again (:mod:`core.period_choice`)
    changes the sums of every transform by those points' terms only: they
    are computed directly and subtracted (:func:`_gls_loop.downdate_loop`),
    the weights renormalised and the magnitudes centred on the new mean.
    The power equals a fresh computation's to the transform's precision
    (``EPS``).  A band that lost no point is the kept search itself.
    """
    key = _grid_key(grid)
    for last in getattr(_local, "sums", None) or ():
        if last.grid != key:
            continue
        if last.t.size == t.size:
            if np.array_equal(last.t, t) and np.array_equal(last.w, w):
                if np.array_equal(last.y, y):
                    return last
            continue
        removed = _removed_points(last.t, t, DOWNDATE_MAX_POINTS)
        if removed is None:
            continue
        keep = np.ones(last.t.size, dtype=bool)
        keep[removed] = False
        if np.array_equal(last.w[keep], w) and np.array_equal(last.y[keep], y):
            return _downdate(last, removed, t, y, w, grid)
    return None


def _downdate(last: _Sums, removed: np.ndarray, t, y, w, grid) -> _Sums:
    from ._gls_loop import downdate_loop  # imported here: numba is slow to import

    wn_old = last.w[removed] / last.w_sum
    w_sum = float(w.sum())
    wn = w / w_sum
    mean = float(np.dot(wn, y))
    yc = y - mean
    sums = tuple(np.empty(grid.n, complex) for _ in range(3))
    terms = WeightTerms(np.empty(grid.n), np.empty(grid.n), np.empty(grid.n))
    downdate_loop(
        np.ascontiguousarray(last.t[removed]),
        wn_old,
        wn_old * (last.y[removed] - last.mean),
        float(grid.fmin),
        float(grid.df),
        last.w_sum / w_sum,
        mean - last.mean,
        *last.sums,
        *sums,
        *terms,
    )
    found = _Sums(last.grid, t, w, y, w_sum, mean, float(np.dot(wn, yc * yc)), sums, terms)
    _keep_sums(found)
    return found


def clear_weight_terms() -> None:
    """Drop this thread's kept weight terms and last searches' sums."""
    _local.weights = OrderedDict()
    _local.sums = []


def weight_terms(t, w, grid, *, n_threads: int = 1) -> WeightTerms:
    """The :class:`WeightTerms` of times ``t`` and weights ``w`` on ``grid``.

    Kept for the last few exact (times, weights, grid) of this thread, up
    to :data:`WEIGHT_CACHE_BYTES`.
    """
    return _weight_terms_and_sums(t, w, grid, n_threads)[0]


def _weight_terms_and_sums(t, w, grid, n_threads: int = 1):
    """``(terms, sums)``: ``sums = (fw, f2)`` when computed now, None when kept."""
    t = np.ascontiguousarray(t, dtype=float)
    w = np.ascontiguousarray(w, dtype=float)
    key = (t.tobytes(), w.tobytes(), float(grid.fmin), float(grid.df), int(grid.n))
    cache: OrderedDict = getattr(_local, "weights", None)
    if cache is None:
        cache = _local.weights = OrderedDict()
    terms = cache.get(key)
    if terms is not None:
        cache.move_to_end(key)
        return terms, None
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
    return terms, (fw, f2)
