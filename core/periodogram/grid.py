"""The frequency grid of a period search, built from the data's baseline."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ..errors import GridTooLargeError, PhasewiseError
from .settings import DEFAULT_FMAX, PeriodogramSettings

__all__ = ["RegularGrid", "grid_parameters", "grid_size", "frequency_grid", "regular_grid_of"]


class RegularGrid(NamedTuple):
    """A uniform grid ``fmin + df * arange(n)`` in cycles/day."""

    fmin: float
    df: float
    n: int

    def frequencies(self) -> np.ndarray:
        return self.fmin + self.df * np.arange(self.n)

    @property
    def fmax(self) -> float:
        return self.fmin + self.df * (self.n - 1)


def grid_parameters(
    time: np.ndarray, settings: PeriodogramSettings, *, check_limit: bool = True
) -> RegularGrid:
    """The grid a search over ``time`` uses, without building it.

    ``fmin`` defaults to 1/T (T the baseline), ``fmax`` to 50 c/d, and the
    step is 1/(oversampling T): each peak of width ~1/T is sampled
    ``oversampling`` times (common practice, no source).

    Raises
    ------
    GridTooLargeError
        If the grid has more than ``settings.max_frequencies`` points (unless
        ``check_limit=False``); the message gives the size and the limit, and
        the error carries them as ``n_frequencies`` and ``limit``.
    """
    time = np.asarray(time, dtype=float)
    baseline = float(np.max(time) - np.min(time)) if time.size > 1 else 0.0
    if not baseline > 0:
        raise PhasewiseError(
            "a frequency grid needs at least two distinct times (the baseline is 0)",
            field="time",
        )
    fmin = 1.0 / baseline if settings.fmin is None else float(settings.fmin)
    fmax = DEFAULT_FMAX if settings.fmax is None else float(settings.fmax)
    if fmax <= fmin:
        raise PhasewiseError(
            f"fmax={fmax:g} c/d is not above fmin={fmin:g} c/d (baseline {baseline:g} d)",
            field="fmax",
        )
    df = 1.0 / (settings.oversampling * baseline)
    n = int(np.floor((fmax - fmin) / df)) + 1
    if check_limit and n > settings.max_frequencies:
        error = GridTooLargeError(
            f"the grid has {n:,} frequencies ({fmin:g}-{fmax:g} c/d, step {df:.3g} c/d), "
            f"more than the limit of {settings.max_frequencies:,}; narrow the range, "
            "lower the oversampling or raise the limit",
            field="max_frequencies",
        )
        error.n_frequencies, error.limit = n, settings.max_frequencies
        raise error
    return RegularGrid(fmin, df, n)


def grid_size(time: np.ndarray, settings: PeriodogramSettings) -> int:
    """Number of frequencies of the grid for ``time``, whatever the limit (to ask first)."""
    return grid_parameters(time, settings, check_limit=False).n


def frequency_grid(time: np.ndarray, settings: PeriodogramSettings) -> np.ndarray:
    """Frequencies (cycles/day) searched for ``time``; see :func:`grid_parameters`."""
    return grid_parameters(time, settings).frequencies()


def regular_grid_of(frequency: np.ndarray) -> RegularGrid | None:
    """The :class:`RegularGrid` of an array if it is uniform (to 1e-9 of a step), else None."""
    n = frequency.size
    if n < 2:
        return None
    fmin = float(frequency[0])
    df = (float(frequency[-1]) - fmin) / (n - 1)
    if not df > 0:
        return None
    expected = fmin + df * np.arange(n)
    if np.max(np.abs(frequency - expected)) > 1e-9 * df:
        return None
    return RegularGrid(fmin, df, n)
