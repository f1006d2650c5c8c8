"""Phasewise core: the science of vetting variable-star light curves.

Pure Python on numpy, scipy and astropy.  Nothing in this package imports Qt;
every number the desktop window shows is computed here.  Importing it changes
nothing in the process: the one-BLAS-thread limit that per-star work wants is
applied by the programs that run it (:func:`phasewise.core.threads.limit_blas_threads`,
called by the command line, the window and the batch workers), and astropy's
configuration is changed only inside ``set_temp`` blocks.
"""

from .. import __version__

__all__ = ["__version__"]
