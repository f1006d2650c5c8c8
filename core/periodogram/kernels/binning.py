"""Phase binning shared by the binned statistics (PDM, conditional entropy)."""

from __future__ import annotations

import numpy as np

__all__ = ["phase_bin_index"]


def phase_bin_index(frequency: np.ndarray, t: np.ndarray, n_bins: int) -> np.ndarray:
    """Phase-bin number of every point at every frequency, offset per frequency.

    Returns an (m, n) int array: for frequency row ``i`` the bins of its points,
    plus ``i * n_bins``, so that one ``np.bincount`` over the ravelled array
    gives the per-frequency bin sums of a whole chunk at once.
    """
    phase = np.multiply.outer(frequency, t)
    phase -= np.floor(phase)
    phase *= n_bins
    index = phase.astype(np.intp)
    np.minimum(index, n_bins - 1, out=index)
    index += (np.arange(frequency.size) * n_bins)[:, None]
    return index
