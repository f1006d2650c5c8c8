"""Trigonometric sums on a regular frequency grid, with reused transform plans.

For points ``t_i`` with strengths ``c_i`` and the grid ``f_j = fmin + j df``
(j = 0 .. n-1)::

    S_j = sum_i c_i exp(+2 pi i f_j t_i)

is one type-1 non-uniform FFT (FINUFFT, Barnett, Magland & af Klinteberg
2019, SIAM J. Sci. Comput. 41, C479): with ``x_i = 2 pi df t_i`` and the
modes ``k = j - n//2``, ``S_j = sum_i [c_i exp(i (n//2 + fmin/df) x_i)]
exp(i k x_i)``.

Creating a FINUFFT plan costs about as much as executing it (FFTW set-up
and work arrays of the grid's size), and it depends only on the number of
modes, not on the points.  Plans are therefore kept, one per size and
thread count, in a small per-thread cache (a plan is not safe to share
between threads); each call only sets the points and executes.  Stars with
different baselines have grids of different sizes, so the number of modes
is rounded up to one of a few sizes (:func:`plan_size`, eight per octave)
and the modes beyond the grid are dropped: the grid itself (its first
frequency, step and size) is the one asked for, and the sums on it are the
same, while one plan serves every grid of up to 12.5% fewer frequencies.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

import numpy as np

__all__ = ["EPS", "trig_sums", "plan_size", "clear_plans"]

#: Requested relative precision of the transform (nifty-ls uses the same
#: default for float64).
EPS = 1e-9

#: FFTW planner flag "estimate": planning by rule, not by timing trials.
_FFTW_ESTIMATE = 64

#: Plans kept per thread (grid sizes differ between the main search, the
#: residual searches, the spectral window and the small noise boxes of
#: prewhitening) ...
MAX_PLANS = 8
#: ... and the most grid points they may hold together: a plan's work arrays
#: take about 40 bytes per grid point, so this bounds them near 120 MB per
#: thread (the newest plan is always kept).
MAX_PLAN_MODES = 3_000_000

_local = threading.local()


def _plan(n_modes: int, n_threads: int):
    import finufft

    cache: OrderedDict = getattr(_local, "plans", None)
    if cache is None:
        cache = _local.plans = OrderedDict()
    key = (n_modes, n_threads)
    plan = cache.get(key)
    if plan is None:
        plan = finufft.Plan(
            1,
            (n_modes,),
            n_trans=1,
            eps=EPS,
            dtype="complex128",
            nthreads=n_threads,
            upsampfac=1.25,
            fftw=_FFTW_ESTIMATE,
        )
        cache[key] = plan
        while len(cache) > 1 and (
            len(cache) > MAX_PLANS or sum(k[0] for k in cache) > MAX_PLAN_MODES
        ):
            cache.popitem(last=False)
    else:
        cache.move_to_end(key)
    return plan


def plan_size(n: int) -> int:
    """The number of modes a grid of ``n`` frequencies is computed with.

    ``n`` rounded up to ``m 2**k`` with ``m`` in 8..16: at most 12.5% more
    modes, and few distinct sizes (eight per octave), so plans are reused
    across grids of nearly the same size.
    """
    n = int(n)
    if n <= 16:
        return n
    k = n.bit_length() - 4  # n >> k lies in 8..15
    return -(-n // (1 << k)) << k


def clear_plans() -> None:
    """Drop this thread's cached plans (frees their work arrays)."""
    _local.plans = OrderedDict()


def trig_sums(t, c, fmin: float, df: float, n: int, *, n_threads: int = 1) -> np.ndarray:
    """``sum_i c_i exp(2 pi i (fmin + j df) t_i)`` for j = 0 .. n-1.

    Parameters
    ----------
    t : array of float, shape (N,)
        Times; a small origin (centred times) keeps the phases exact.
    c : array, shape (N,)
        Real or complex strengths.
    fmin, df : float
        First frequency and step of the grid (cycles per unit of ``t``).
    n : int
        Grid size.
    n_threads : int
        Threads of the transform.
    """
    t = np.asarray(t, dtype=float)
    n = int(n)
    size = plan_size(n)  # modes beyond the grid's n are computed and dropped
    x = (2.0 * np.pi * df) * t
    shift = size // 2 + fmin / df
    strengths = np.asarray(c) * np.exp(1j * shift * x)
    # the modes k are integers: the points may be wrapped into [-pi, pi)
    wrapped = np.mod(x + np.pi, 2.0 * np.pi) - np.pi
    plan = _plan(size, int(n_threads))
    plan.setpts(wrapped)
    sums = plan.execute(np.ascontiguousarray(strengths, dtype=complex))
    return sums[:n] if size != n else sums
