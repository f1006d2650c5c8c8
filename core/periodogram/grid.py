"""The frequency grid of a period search, built from the data's baseline."""

from __future__ import annotations

import threading
from collections import OrderedDict
from typing import NamedTuple

import numpy as np

from ..errors import GridTooLargeError, PhasewiseError
from .settings import DEFAULT_FMAX, PeriodogramSettings

__all__ = [
    "RegularGrid",
    "Sampling",
    "sampling_step",
    "sampling_of",
    "default_fmax",
    "grid_parameters",
    "grid_size",
    "frequency_grid",
    "regular_grid_of",
]

#: Share of consecutive time differences that must lie within
#: :data:`REGULAR_TOLERANCE` of their median for sampling to count as regular.
REGULAR_SHARE = 0.8
REGULAR_TOLERANCE = 0.1

#: Lowest oversampling a default grid is coarsened to before a long series
#: is refused as too large (peaks are still sampled twice per width 1/T).
MIN_DEFAULT_OVERSAMPLING = 2.0

#: Sampling results kept per thread, keyed by the times' values: one star's
#: analysis asks for the same times' sampling about ten times (every grid,
#: every residual search, the period choice's warning), and a sort of the
#: times each time cost more than the key.
SAMPLING_MEMO_ENTRIES = 8

_sampling_local = threading.local()


class Sampling(NamedTuple):
    """The typical sampling step (days) and whether the sampling is regular."""

    step: float
    regular: bool

    @property
    def nyquist(self) -> float | None:
        """Pseudo-Nyquist frequency 1/(2 step) of regular sampling, else None."""
        return 0.5 / self.step if self.regular and self.step > 0 else None


def sampling_of(time: np.ndarray) -> Sampling:
    """The typical sampling step of ``time`` and whether sampling is regular.

    Regular: at least 80% of the consecutive time differences lie within
    10% of their median (our rule).  The step is then the median difference;
    for irregular sampling it is the 5th percentile of the differences (the
    shortest spacing the data use often).  Only regular sampling has a
    pseudo-Nyquist frequency 1/(2 step) about which peaks reflect; irregular
    sampling reaches above it (Eyer & Bartholdi 1999, from memory).
    """
    time = np.ascontiguousarray(time, dtype=float)
    key = time.tobytes()
    cache: OrderedDict = getattr(_sampling_local, "cache", None)
    if cache is None:
        cache = _sampling_local.cache = OrderedDict()
    known = cache.get(key)
    if known is not None:
        cache.move_to_end(key)
        return known
    t = np.unique(time)
    if t.size < 3:
        found = Sampling(float("nan"), False)
    else:
        dt = np.diff(t)
        median = float(np.median(dt))
        share = np.mean(np.abs(dt - median) <= REGULAR_TOLERANCE * median)
        regular = bool(share >= REGULAR_SHARE)
        found = Sampling(median if regular else float(np.percentile(dt, 5)), regular)
    cache[key] = found
    while len(cache) > SAMPLING_MEMO_ENTRIES:
        cache.popitem(last=False)
    return found


def clear_sampling_memo() -> None:
    """Drop this thread's kept sampling results."""
    _sampling_local.cache = OrderedDict()


def sampling_step(time: np.ndarray) -> tuple[float, bool]:
    """``(step, regular)`` of :func:`sampling_of` as a plain tuple."""
    s = sampling_of(time)
    return s.step, s.regular


def default_fmax(time: np.ndarray) -> float:
    """Highest frequency searched when none is given (c/d).

    :data:`DEFAULT_FMAX` (the shortest periods of the classes we know), or
    the pseudo-Nyquist frequency of regular sampling if that is lower: above
    it every peak is a reflection of one below (30-minute sampling: 24 c/d;
    weekly: 1/14 c/d).
    """
    nyquist = sampling_of(time).nyquist
    return DEFAULT_FMAX if nyquist is None else min(DEFAULT_FMAX, nyquist)


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

    ``fmin`` defaults to 1/T (T the baseline), ``fmax`` to
    :func:`default_fmax` (50 c/d, or the pseudo-Nyquist frequency of
    regular sampling), and the step is 1/(oversampling T): each peak of
    width ~1/T is sampled ``oversampling`` times (common practice, no
    source).  On the default range a grid above ``max_frequencies`` is
    first coarsened down to :data:`MIN_DEFAULT_OVERSAMPLING` points per
    peak width, so long series work without settings.

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
    fmax = default_fmax(time) if settings.fmax is None else float(settings.fmax)
    if fmax <= fmin:
        raise PhasewiseError(
            f"fmax={fmax:g} c/d is not above fmin={fmin:g} c/d (baseline {baseline:g} d)",
            field="fmax",
        )
    oversampling = settings.oversampling
    n = int(np.floor((fmax - fmin) * oversampling * baseline)) + 1
    if settings.fmax is None and settings.fmin is None and n > settings.max_frequencies:
        # a long series on the default range: sample each peak less finely
        # (down to MIN_DEFAULT_OVERSAMPLING) before refusing it
        coarse = (settings.max_frequencies - 1) / ((fmax - fmin) * baseline)
        oversampling = max(MIN_DEFAULT_OVERSAMPLING, min(oversampling, coarse))
    df = 1.0 / (oversampling * baseline)
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
