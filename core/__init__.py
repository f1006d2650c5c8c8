"""Phasewise core: the science of vetting variable-star light curves.

Pure Python on numpy, scipy and astropy.  Nothing in this package imports Qt;
every number the desktop window shows is computed here.
"""

__version__ = "0.1.0"
