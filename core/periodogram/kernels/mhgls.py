"""Multi-harmonic periodogram kernels.

Model at each frequency f with K harmonics (Schwarzenberg-Czerny 1996)::

    y(t) = c + sum_{k=1..K} [a_k cos(2 pi k f t) + b_k sin(2 pi k f t)]

weighted by 1/dy**2; the power is the fractional chi-square reduction
against the weighted mean, in [0, 1].  Under pure noise
``(N - 2K - 1) / (2K) * p / (1 - p)`` follows F(2K, N - 2K - 1).

References
----------
Schwarzenberg-Czerny, A. 1996, ApJ 460, L107.
"""

from __future__ import annotations

import numpy as np

from .gls import CHUNK_ELEMENTS, _weights

__all__ = ["mhgls_exact", "mhgls_nufft"]


def _mhgls_exact_one(t, y, w, frequency, nterms):
    w = w / w.sum()
    y = y - np.dot(w, y)
    chi2_ref = np.dot(w, y * y)
    n_par = 2 * nterms + 1
    power = np.empty(frequency.size)
    step = max(1, CHUNK_ELEMENTS // max(t.size * n_par, 1))
    k = np.arange(1, nterms + 1)
    for start in range(0, frequency.size, step):
        f = frequency[start : start + step]
        arg = (2.0 * np.pi) * f[:, None, None] * k[None, None, :] * t[None, :, None]
        design = np.concatenate(
            [np.ones(arg.shape[:2] + (1,)), np.cos(arg), np.sin(arg)], axis=2
        )  # (freq, point, parameter)
        weighted = design * w[None, :, None]
        normal = np.einsum("fnp,fnq->fpq", weighted, design)
        rhs = np.einsum("fnp,n->fp", weighted, y)
        coef = np.linalg.solve(normal, rhs[..., None])[..., 0]
        power[start : start + step] = np.einsum("fp,fp->f", coef, rhs) / chi2_ref
    return power


def mhgls_exact(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """Slow exact multi-harmonic periodogram by weighted normal equations.

    ``settings.nterms`` harmonics (1 gives the GLS); chunked over frequencies.
    """
    nterms = 1 if settings is None else settings.nterms
    y = np.asarray(y, dtype=float)
    w = _weights(y, dy)
    if y.ndim == 1:
        return _mhgls_exact_one(t, y, w, frequency, nterms), None
    rows = [_mhgls_exact_one(t, yi, wi, frequency, nterms) for yi, wi in zip(y, w, strict=True)]
    return np.stack(rows), None


def mhgls_nufft(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """Fast multi-harmonic periodogram through nifty-ls (``finufft_chi2``)."""
    nterms = 1 if settings is None else settings.nterms
    if grid is None:
        return mhgls_exact(t, y, dy, frequency, settings)
    from nifty_ls import finufft_chi2 as backend

    y = np.asarray(y, dtype=float)
    if dy is not None:
        raw = np.asarray(dy, dtype=float)
        dy = _sanitised_errors(raw, 2 * nterms + 1)
        if dy is None:  # too few points carry weight: the exact kernel raises cleanly
            return mhgls_exact(t, y, raw, frequency, settings)
    power = backend.lombscargle(
        t,
        y,
        grid.fmin,
        grid.df,
        grid.n,
        dy=dy,
        nthreads=n_threads,
        normalization="standard",
        nterms=nterms,
    )
    return power, None


#: Relative weight below which a point counts as weightless for the solver.
MIN_RELATIVE_WEIGHT = 1e-12


def _sanitised_errors(dy: np.ndarray, n_parameters: int) -> np.ndarray | None:
    """Errors scaled to a median of 1, or None when too few points carry weight.

    The power does not change when every error is multiplied by one number,
    but the native solver of the fast backend tests its normal matrix
    against an absolute tolerance and aborts the whole process ("Matrix is
    singular") when the weights are tiny (errors of 1e6 mag).  Scaling the
    errors to a median of one keeps the matrix well inside its range; a
    band where fewer points than parameters (plus one) carry weight is
    refused here instead of in native code.
    """
    if dy.ndim == 2:
        rows = [_sanitised_errors(row, n_parameters) for row in dy]
        return None if any(r is None for r in rows) else np.stack(rows)
    finite = np.isfinite(dy) & (dy > 0)
    if finite.sum() <= n_parameters:
        return None
    scaled = np.where(finite, dy, 1.0) / float(np.median(dy[finite]))
    weight = np.where(finite, 1.0 / scaled**2, 0.0)
    heavy = weight >= MIN_RELATIVE_WEIGHT * weight.max()
    if heavy.sum() <= n_parameters:
        return None
    # weightless points get a large finite error: the backend wants finite errors
    return np.where(heavy, scaled, 1e6 * scaled[heavy].max())
