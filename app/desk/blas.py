"""One BLAS thread for the desk process.

The desk runs its numerical work in worker threads and keeps the GUI thread
for drawing; a multi-threaded BLAS on top of that only fights for the cores.
On a busy 2-core machine one small QR of a Fourier fit was seen taking 70 ms
with two BLAS threads and 2 ms with one.  The desk therefore asks the
OpenBLAS libraries bundled with numpy and scipy for a single thread, unless
the user set ``OPENBLAS_NUM_THREADS`` (or ``OMP_NUM_THREADS``) themselves.
"""

from __future__ import annotations

import ctypes
import glob
import os
from pathlib import Path

__all__ = ["single_threaded_blas"]

_SETTERS = (
    "scipy_openblas_set_num_threads64_",
    "scipy_openblas_set_num_threads",
    "openblas_set_num_threads64_",
    "openblas_set_num_threads",
)


def _bundled_openblas() -> list[str]:
    found = []
    for package in ("numpy", "scipy"):
        try:
            module = __import__(package)
        except ImportError:
            continue
        libs = Path(module.__file__).resolve().parent.parent / f"{package}.libs"
        found += sorted(glob.glob(str(libs / "*openblas*.so*")))
    return found


def single_threaded_blas() -> int:
    """Set one thread in every bundled OpenBLAS; returns how many were set."""
    if os.environ.get("OPENBLAS_NUM_THREADS") or os.environ.get("OMP_NUM_THREADS"):
        return 0
    done = 0
    for path in _bundled_openblas():
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for name in _SETTERS:
            setter = getattr(lib, name, None)
            if setter is not None:
                setter.argtypes = [ctypes.c_int]
                setter(1)
                done += 1
                break
    return done
