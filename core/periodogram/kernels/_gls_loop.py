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
import numpy as np


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


#: Steps of the phase recurrence between exact evaluations in
#: :func:`downdate_loop` (its rounding grows with the steps: ~1e-12 here).
ANCHOR_STEPS = 4096


@numba.njit(cache=True, nogil=True, error_model="numpy")
def downdate_loop(
    t, cw, cy, fmin, df, ratio, shift, old_w, old_2w, old_y, new_w, new_2w, new_y, a, b, c
):
    """The three sums of a search less a few points, and their weight terms.

    ``old_*`` and ``new_*`` are complex: the sums of ``w`` at f (``_w``), of
    ``w`` at 2f (``_2w``) and of the centred ``w y`` at f (``_y``), with
    normalised weights.  The
    points ``t`` (strengths ``cw``, ``cy`` on the old normalisation and
    mean) are removed by direct sums on the grid ``fmin + j df``; the rest
    is renormalised by ``ratio`` (old over new sum of weights) and the
    magnitudes re-centred by ``shift`` (new mean less old).  Each point's
    phase factor is advanced by one multiplication per frequency and
    evaluated exactly every :data:`ANCHOR_STEPS` frequencies; the points
    are the inner loop, so each output is written once.  ``a, b, c`` as
    :func:`weight_terms_loop` writes them.
    """
    n = old_w.size
    k = t.size
    two_pi = 2.0 * np.pi
    step = np.empty(k, dtype=np.complex128)
    z = np.empty(k, dtype=np.complex128)
    for i in range(k):
        step[i] = complex(np.cos(two_pi * df * t[i]), np.sin(two_pi * df * t[i]))
    for j in range(n):
        if j % ANCHOR_STEPS == 0:
            for i in range(k):
                phase = two_pi * (fmin + j * df) * t[i]
                z[i] = complex(np.cos(phase), np.sin(phase))
        sw = complex(0.0, 0.0)
        s2 = complex(0.0, 0.0)
        sy = complex(0.0, 0.0)
        for i in range(k):
            zi = z[i]
            sw += cw[i] * zi
            s2 += cw[i] * (zi * zi)
            sy += cy[i] * zi
            z[i] = zi * step[i]
        fw = (old_w[j] - sw) * ratio
        f2 = (old_2w[j] - s2) * ratio
        new_w[j] = fw
        new_2w[j] = f2
        new_y[j] = (old_y[j] - sy) * ratio - shift * fw
        cwr = fw.real
        swr = fw.imag
        cc = 0.5 * (1.0 + f2.real) - cwr * cwr
        ss = 0.5 * (1.0 - f2.real) - swr * swr
        cs = 0.5 * f2.imag - cwr * swr
        inv = 1.0 / (cc * ss - cs * cs)
        a[j] = ss * inv
        b[j] = cc * inv
        c[j] = -2.0 * cs * inv
