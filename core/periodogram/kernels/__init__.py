"""Registry of periodogram kernels.

Every kernel is a pure function of bare float arrays with one signature::

    kernel(t, y, dy, frequency, settings, *, grid=None, n_threads=1)
        -> (power, statistic)

``t`` in days (any origin), ``y`` of shape (N,) or (n_stars, N) sharing ``t``,
``dy`` like ``y`` or None (equal weights; ``inf`` = zero weight),
``frequency`` in cycles/day, ``grid`` the :class:`~core.periodogram.grid.RegularGrid`
of ``frequency`` when it is uniform (fast kernels need it).  ``power`` is
larger-is-better; ``statistic`` is the method's raw statistic (PDM theta,
conditional entropy H) or None.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from .ce import ce
from .gls import gls_exact, gls_nufft
from .mhgls import mhgls_exact, mhgls_nufft
from .pdm import pdm

__all__ = ["Kernel", "KERNELS", "METHOD_KERNELS", "REFERENCE_KERNELS"]


@dataclass(frozen=True)
class Kernel:
    """One registered kernel: its function, citation and what it computes."""

    name: str
    function: Callable
    method: str
    citation: str
    statistic: str | None = None  # name of the raw statistic, if any
    exact: bool = False  # a slow direct reference


KERNELS: dict[str, Kernel] = {
    k.name: k
    for k in (
        Kernel("gls", gls_nufft, "gls", "Zechmeister & Kürster 2009, A&A 496, 577 (via nifty-ls)"),
        Kernel("gls_exact", gls_exact, "gls", "Zechmeister & Kürster 2009, eq. 5", exact=True),
        Kernel(
            "mhgls", mhgls_nufft, "mhgls", "Schwarzenberg-Czerny 1996, ApJ 460, L107 (nifty-ls)"
        ),
        Kernel("mhgls_exact", mhgls_exact, "mhgls", "Schwarzenberg-Czerny 1996", exact=True),
        Kernel("pdm", pdm, "pdm", "Stellingwerf 1978, ApJ 224, 953", statistic="theta"),
        Kernel("ce", ce, "ce", "Graham et al. 2013, MNRAS 434, 2629", statistic="entropy"),
    )
}

#: The kernel used for each public method.
METHOD_KERNELS = {"gls": "gls", "mhgls": "mhgls", "pdm": "pdm", "ce": "ce"}

#: The slow reference each kernel is checked against (PDM and CE are direct already).
REFERENCE_KERNELS = {
    "gls": "gls_exact",
    "gls_exact": "gls_exact",
    "mhgls": "mhgls_exact",
    "mhgls_exact": "mhgls_exact",
    "pdm": "pdm",
    "ce": "ce",
}
