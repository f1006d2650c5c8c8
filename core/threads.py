"""One BLAS thread per process, applied by the programs that run analyses.

Per-star work is many small matrix problems: threaded BLAS only spins and
fights the process pool for cores (measured: a Fourier decomposition 1 ms with
one thread and ~300 ms with default threads on a loaded 2-core machine; a
700 x 41 QR 0.2 ms against 10 ms).  Importing :mod:`phasewise.core` does not do
this by itself; the command line, the window and the batch workers call
:func:`limit_blas_threads` when they start.
"""

from __future__ import annotations

import os

__all__ = ["BLAS_THREAD_VARIABLES", "limit_blas_threads"]

#: The variables BLAS builds read at load time.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def limit_blas_threads(*, environment: bool = True) -> bool:
    """Limit this process's BLAS to one thread, unless the user chose a number.

    Parameters
    ----------
    environment : bool
        Also set the variables (``setdefault``), so that processes this one
        spawns start with one thread.

    Returns
    -------
    bool
        False when the user set one of :data:`BLAS_THREAD_VARIABLES` (their
        choice wins and nothing is changed).
    """
    if any(name in os.environ for name in BLAS_THREAD_VARIABLES):
        return False
    if environment:
        for name in BLAS_THREAD_VARIABLES:
            os.environ[name] = "1"
    from threadpoolctl import threadpool_limits

    threadpool_limits(limits=1, user_api="blas")
    return True
