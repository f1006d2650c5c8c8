"""Build a ledger from photometry files: import, analyse, store (no Qt).

Runs inside a worker; ``report`` and ``cancelled`` come from the worker.
"""

from __future__ import annotations

from pathlib import Path

from phasewise.core.errors import ReadError

__all__ = ["build_ledger"]


def build_ledger(services, files, mapping, target, settings, report=None, cancelled=None):
    """Import every star of ``files`` into a new ledger at ``target`` and analyse it.

    Returns the ledger path.  The ledger is closed at the end so the window
    can open it afresh.  If the import fails (or imports no star), no
    ledger file is left at ``target`` and the error is raised.
    """
    target = Path(target)
    cancelled_import = False
    # built beside the target and moved into place only when the import succeeded:
    # a failed import leaves no ledger behind (it would block the retry)
    with services.building_ledger(target) as ledger:
        services.record_settings(ledger, settings)
        added = 0
        for i, path in enumerate(files):
            if report is not None:
                report(0, 0, f"reading {Path(path).name} ({i + 1} of {len(files)})")
            source = services.open_photometry(path, mapping)
            added += services.add_stars(ledger, source.stars(), source_file=path) or 0
            if cancelled is not None and cancelled():
                cancelled_import = True
                break
        if added == 0:
            raise ReadError("no star was imported", file=str(files[0]) if files else None)
    if cancelled_import:
        return target
    services.analyse_ledger(target, settings, report=report, cancelled=cancelled)
    return target
