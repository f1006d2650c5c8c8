"""Build a ledger from photometry files: import, analyse, store (no Qt).

Runs inside a worker; ``report`` and ``cancelled`` come from the worker.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["build_ledger"]


def build_ledger(services, files, mapping, target, settings, report=None, cancelled=None):
    """Import every star of ``files`` into a new ledger at ``target`` and analyse it.

    Returns the ledger path.  The ledger is closed at the end so the window
    can open it afresh.
    """
    target = Path(target)
    ledger = services.create_ledger(target)
    try:
        lightcurves = []
        for path in files:
            source = services.open_photometry(path, mapping)
            for lc in source.stars():
                services.add_star(ledger, lc)
                lightcurves.append(lc.star_id)
                if cancelled is not None and cancelled():
                    return target
        services.analyse_all(ledger, lightcurves, settings, report=report, cancelled=cancelled)
    finally:
        if hasattr(ledger, "close"):
            ledger.close()
    return target
