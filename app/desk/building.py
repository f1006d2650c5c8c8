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
        services.record_settings(ledger, settings)
        for i, path in enumerate(files):
            if report is not None:
                report(0, 0, f"reading {Path(path).name} ({i + 1} of {len(files)})")
            source = services.open_photometry(path, mapping)
            services.add_stars(ledger, source.stars(), source_file=path)
            if cancelled is not None and cancelled():
                return target
    finally:
        if hasattr(ledger, "close"):
            ledger.close()
    services.analyse_ledger(target, settings, report=report, cancelled=cancelled)
    return target
