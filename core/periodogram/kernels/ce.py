"""Conditional entropy kernel.

Magnitudes are scaled to [0, 1] and binned with the phase into an
n_phase x n_mag table of probabilities p(m, phi); the conditional entropy
(Graham et al. 2013, eq. 4)

    H = sum p(m, phi) ln[ p(phi) / p(m, phi) ]

is lowest at the true period.  H lies between 0 and the entropy of the
magnitudes alone, H(m) = -sum p(m) ln p(m) (no information from the phase);
the returned power is ``1 - H / H(m)``, the fraction of the magnitudes'
entropy the phase explains (larger is better, in [0, 1], near 0 for noise),
and H is the raw statistic.  Errors are not used (as in the paper).

References
----------
Graham, M. J. et al. 2013, MNRAS 434, 2629.
"""

from __future__ import annotations

import numpy as np

from .binning import phase_bin_index

__all__ = ["conditional_entropy", "magnitude_entropy", "ce"]

_CHUNK = 1_500_000


def conditional_entropy(t, y, frequency, n_phase, n_mag):
    """H(m | phi) for each frequency (vectorised, chunked)."""
    t = t - t.min()
    span = y.max() - y.min()
    scaled = (y - y.min()) / span if span > 0 else np.zeros_like(y)
    mag_bin = np.minimum((scaled * n_mag).astype(np.intp), n_mag - 1)
    n = t.size
    cells = n_phase * n_mag
    entropy = np.empty(frequency.size)
    step = max(1, _CHUNK // n)
    for start in range(0, frequency.size, step):
        f = frequency[start : start + step]
        m = f.size
        # joint (phase, magnitude) cell: offsets m*n_phase become m*cells once scaled
        index = phase_bin_index(f, t, n_phase)
        index *= n_mag
        index += mag_bin
        p_joint = np.bincount(index.ravel(), minlength=m * cells).reshape(m, n_phase, n_mag) / n
        p_phase = p_joint.sum(axis=2, keepdims=True)
        with np.errstate(divide="ignore", invalid="ignore"):
            terms = p_joint * np.log(p_phase / p_joint)
        entropy[start : start + step] = np.where(p_joint > 0, terms, 0.0).sum(axis=(1, 2))
    return entropy


def magnitude_entropy(y, n_mag):
    """H(m) of the magnitudes binned as :func:`conditional_entropy` bins them."""
    span = y.max() - y.min()
    scaled = (y - y.min()) / span if span > 0 else np.zeros_like(y)
    counts = np.bincount(np.minimum((scaled * n_mag).astype(np.intp), n_mag - 1))
    p = counts[counts > 0] / y.size
    return float(-(p * np.log(p)).sum())


def ce(t, y, dy, frequency, settings=None, *, grid=None, n_threads=1):
    """Conditional-entropy power ``1 - H / H(m)`` and H."""
    n_phase = 10 if settings is None else settings.ce_phase_bins
    n_mag = 5 if settings is None else settings.ce_mag_bins
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        entropy = conditional_entropy(t, y, frequency, n_phase, n_mag)
        return 1.0 - entropy / magnitude_entropy(y, n_mag), entropy
    entropy = np.stack([conditional_entropy(t, yi, frequency, n_phase, n_mag) for yi in y])
    h_mag = np.array([magnitude_entropy(yi, n_mag) for yi in y])
    return 1.0 - entropy / h_mag[:, None], entropy
