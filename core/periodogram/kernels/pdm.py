"""Phase dispersion minimisation kernel.

At each trial frequency the phases are cut into M equal bins and

    theta = [S_within / (N - M)] / [S_total / (N - 1)]

with S the weighted sums of squared deviations from the bin means and from
the overall mean (Stellingwerf 1978, eqs. 1-3; with unit weights this is
his s^2 / sigma^2 with non-overlapping bins, M = bins holding points).
theta near 1 means no signal; the returned power is ``1 - theta`` so that
larger is better, and theta itself is the raw statistic.

References
----------
Stellingwerf, R. F. 1978, ApJ 224, 953.
"""

from __future__ import annotations

import numpy as np

from .binning import phase_bin_index
from .gls import _weights

__all__ = ["pdm_theta", "pdm"]

_CHUNK = 1_500_000


def pdm_theta(t, y, w, frequency, n_bins):
    """theta of Stellingwerf (1978) for each frequency (vectorised, chunked)."""
    t = t - t.min()
    w = np.asarray(w, dtype=float)
    sw = w.sum()
    y = y - np.dot(w, y) / sw
    wy = w * y
    total = np.dot(wy, y)
    n = t.size
    theta = np.empty(frequency.size)
    step = max(1, _CHUNK // n)
    for start in range(0, frequency.size, step):
        f = frequency[start : start + step]
        m = f.size
        index = phase_bin_index(f, t, n_bins).ravel()
        bin_w = np.bincount(index, weights=np.tile(w, m), minlength=m * n_bins)
        bin_wy = np.bincount(index, weights=np.tile(wy, m), minlength=m * n_bins)
        filled = bin_w > 0
        between = np.zeros_like(bin_w)
        between[filled] = bin_wy[filled] ** 2 / bin_w[filled]
        # sum over bins of w(y - ybar_bin)^2 = total - sum over bins of (sum wy)^2 / sum w
        within = total - between.reshape(m, n_bins).sum(axis=1)
        n_filled = filled.reshape(m, n_bins).sum(axis=1)
        theta[start : start + step] = (within / (n - n_filled)) / (total / (n - 1))
    return theta


def pdm(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """PDM power ``1 - theta`` and theta (``settings.pdm_bins`` bins)."""
    n_bins = 10 if settings is None else settings.pdm_bins
    y = np.asarray(y, dtype=float)
    w = _weights(y, dy)
    if y.ndim == 1:
        theta = pdm_theta(t, y, w, frequency, n_bins)
    else:
        theta = np.stack(
            [pdm_theta(t, yi, wi, frequency, n_bins) for yi, wi in zip(y, w, strict=True)]
        )
    return 1.0 - theta, theta
