"""Fixtures shared by the desk's test modules (import the names you use)."""

from __future__ import annotations

import pytest

from .conftest import dispose


@pytest.fixture(name="desk")
def desk_window(qtbot, qsettings, subset_copy):
    """The window on a copy of the six analysed demo stars, first periodogram and fold drawn."""
    from phasewise.app.desk import MainWindow

    window = MainWindow(settings=qsettings)
    window.open_ledger(subset_copy)
    window.show()
    qtbot.waitUntil(lambda: window.periodogram.view is not None, timeout=10000)
    # the fold waits for the ledger's settings (the analysis modules load in the background)
    qtbot.waitUntil(lambda: window.fold.main.model is not None, timeout=20000)
    yield window
    dispose(window)
