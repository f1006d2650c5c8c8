"""Phasewise: find periods, classify and vet variable-star light curves.

``phasewise.core`` is the science (numpy, scipy, astropy; never Qt) and
``phasewise.app`` the front ends (the command line, and the desktop window,
which needs the ``gui`` extra).  In the repository they are the top-level
``core/`` and ``app/`` folders; an installed wheel holds them under this
package.  Importing Phasewise changes nothing in the process: no environment
variable, no global configuration of numpy, astropy or Qt.
"""

__version__ = "0.2.0"
