"""Phasewise core: the science of vetting variable-star light curves.

Pure Python on numpy, scipy and astropy.  Nothing in this package imports Qt;
every number the desktop window shows is computed here.
"""

import os as _os

__version__ = "0.1.0"

# Per-star work is many small matrix problems: threaded BLAS only spins and
# fights the process pool for cores (measured: decompose 1 ms with one thread,
# ~300 ms with default threads on a loaded 2-core machine).  This only takes
# effect if numpy is not imported yet; the user's own setting wins.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_name, "1")
