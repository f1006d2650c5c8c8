"""Compiled inner loop of :func:`core.periodogram.eclipse_search.aov_binned`.

Kept apart so that numba is imported only when the eclipse search first
runs (importing it costs about 0.15 s).  ``cache=True`` keeps the machine
code on disk next to this file (or in the user's cache directory when that
is not writable), so a new process loads it instead of compiling again.

Bare float64 arrays in, no checks here: the caller validates.
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def aov_binned_loop(t, w, wy, total, frequency, n_bins, shifts):
    """Largest F over ``shifts`` (fractions of a bin) and its filled-bin count.

    ``t`` starts at 0; ``wy = w * y`` with ``y`` of zero weighted mean;
    ``total = sum(w y**2)``; every shift in [0, 1).
    """
    n = t.size
    best_f = np.zeros(frequency.size)
    best_r = np.full(frequency.size, 2, dtype=np.int64)
    index = np.empty(n, dtype=np.int32)
    sum_w = np.empty(n_bins)
    sum_wy = np.empty(n_bins)
    for k in range(frequency.size):
        f = frequency[k]
        for shift in shifts:
            # the bins first, in a loop the compiler vectorises (recomputing
            # the phases for each shift is cheaper than storing them)
            for j in range(n):
                phase = f * t[j]
                phase -= np.floor(phase)
                i = np.int32(phase * n_bins + shift)
                index[j] = i - n_bins if i >= n_bins else i
            sum_w[:] = 0.0
            sum_wy[:] = 0.0
            for j in range(n):
                sum_w[index[j]] += w[j]
                sum_wy[index[j]] += wy[j]
            between = 0.0
            r = 0
            for b in range(n_bins):
                if sum_w[b] > 0.0:
                    between += sum_wy[b] * sum_wy[b] / sum_w[b]
                    r += 1
            if r <= 1:
                continue
            within = max(total - between, 1e-300)
            value = (between / (r - 1)) / (within / max(n - r, 1))
            if value > best_f[k]:
                best_f[k] = value
                best_r[k] = r
    return best_f, best_r
