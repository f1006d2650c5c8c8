"""Phasewise core: the science of vetting variable-star light curves.

Pure Python on numpy, scipy and astropy.  Nothing in this package imports Qt;
every number the desktop window shows is computed here.
"""

import os as _os

__version__ = "0.1.0"

# Per-star work is many small matrix problems: threaded BLAS only spins and
# fights the process pool for cores (measured: decompose 1 ms with one thread,
# ~300 ms with default threads on a loaded 2-core machine; a 700 x 41 QR
# 0.2 ms against 10 ms).  The environment variables take effect if numpy is
# not imported yet; if it is (a script or the window imported it first), the
# loaded BLAS is limited at run time.  The user's own setting wins.
_BLAS_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def _one_blas_thread() -> None:
    import sys

    user_set = any(name in _os.environ for name in _BLAS_VARIABLES)
    for name in _BLAS_VARIABLES:
        _os.environ.setdefault(name, "1")
    if "numpy" in sys.modules and not user_set:
        from threadpoolctl import threadpool_limits

        threadpool_limits(limits=1, user_api="blas")


_one_blas_thread()
