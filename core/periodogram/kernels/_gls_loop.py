"""Compiled per-frequency loops of the fast GLS (:mod:`core.periodogram.kernels.gls`).

The transforms give complex sums per frequency; turning them into the
weight terms and the power is a handful of arithmetic operations per
frequency, which numpy would spread over a dozen passes through arrays of
the grid's size.  One compiled pass does it in cache.  Kept apart so that
numba is imported only when a fast periodogram is first computed;
``cache=True`` keeps the machine code on disk.

Bare arrays in, no checks here: the caller validates.  Division follows
numpy's rules (``error_model="numpy"``: x/0 gives inf or nan, no exception).
"""

from __future__ import annotations

import numba


@numba.njit(cache=True, nogil=True, error_model="numpy")
def weight_terms_loop(fw, f2, a, b, c):
    """``a = SS/D``, ``b = CC/D``, ``c = -2 CS/D`` from the sums of w at f and 2f.

    ``fw[j] = sum w exp(i w_j t)`` and ``f2[j] = sum w exp(2 i w_j t)`` with
    ``sum w = 1``; CC, SS, CS are the weighted (co)variances of cos and sin
    and ``D = CC SS - CS^2`` (Zechmeister & Kürster 2009, eqs. 5-13).
    """
    for j in range(fw.size):
        cw = fw[j].real
        sw = fw[j].imag
        c2 = f2[j].real
        s2 = f2[j].imag
        cc = 0.5 * (1.0 + c2) - cw * cw
        ss = 0.5 * (1.0 - c2) - sw * sw
        cs = 0.5 * s2 - cw * sw
        inv = 1.0 / (cc * ss - cs * cs)
        a[j] = ss * inv
        b[j] = cc * inv
        c[j] = -2.0 * cs * inv


@numba.njit(cache=True, nogil=True, error_model="numpy")
def power_loop(f1, a, b, c, norm, out):
    """``(a YC^2 + b YS^2 + c YC YS) / norm`` with ``YC + i YS = f1`` (centred data)."""
    scale = 1.0 / norm
    for j in range(f1.size):
        yc = f1[j].real
        ys = f1[j].imag
        out[j] = (a[j] * yc * yc + b[j] * ys * ys + c[j] * yc * ys) * scale
