"""Period search: frequency grid, periodograms, spectral window, candidates, FAP.

The front :func:`compute_periodogram` validates once and dispatches to a
registry of pure numpy kernels (:data:`KERNELS`) that share one signature;
see :mod:`core.periodogram.kernels`.
"""

from __future__ import annotations

from ..errors import GridTooLargeError
from .candidates import Candidate, candidate_marks, find_candidates
from .compute import MIN_POINTS, compute_periodogram, search_bands
from .eclipse_search import EclipseSearch, EclipseSearchSettings, eclipse_search
from .fap import baluev_fap, effective_points, f_test_fap
from .grid import (
    RegularGrid,
    Sampling,
    default_fmax,
    frequency_grid,
    grid_parameters,
    grid_size,
    regular_grid_of,
    sampling_of,
)
from .kernels import KERNELS, METHOD_KERNELS, REFERENCE_KERNELS, Kernel
from .result import Periodogram
from .settings import DEFAULT_FMAX, METHODS, PeriodogramSettings
from .shared import shared_epoch_periodograms
from .window import WindowPeak, candidate_windows, spectral_window, window_peaks

__all__ = [
    "PeriodogramSettings",
    "METHODS",
    "DEFAULT_FMAX",
    "MIN_POINTS",
    "GridTooLargeError",
    "RegularGrid",
    "Sampling",
    "sampling_of",
    "default_fmax",
    "grid_parameters",
    "grid_size",
    "frequency_grid",
    "regular_grid_of",
    "compute_periodogram",
    "search_bands",
    "Periodogram",
    "spectral_window",
    "window_peaks",
    "candidate_windows",
    "WindowPeak",
    "find_candidates",
    "candidate_marks",
    "Candidate",
    "baluev_fap",
    "effective_points",
    "eclipse_search",
    "EclipseSearch",
    "EclipseSearchSettings",
    "f_test_fap",
    "shared_epoch_periodograms",
    "Kernel",
    "KERNELS",
    "METHOD_KERNELS",
    "REFERENCE_KERNELS",
]
