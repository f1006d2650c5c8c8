"""The population view beside the real desk: room for the folds, ranges and freshness."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QSettings

from phasewise.app.desk import MainWindow
from phasewise.app.desk.main_window import MIN_FOLD_HEIGHT
from phasewise.app.population import attach

from .conftest import dispose
from .population_fakes import build_ledger


@pytest.fixture
def desk_with_population(qtbot, tmp_path):
    window = MainWindow(settings=QSettings(str(tmp_path / "l.ini"), QSettings.Format.IniFormat))
    view = attach(window)
    window.show()
    ledger = build_ledger(tmp_path / "n.ledger.sqlite")
    window.set_ledger(ledger)
    window.show_view("population")
    window.wait_idle()
    yield window, view, ledger
    dispose(window)
    ledger.close()


@pytest.mark.parametrize("size", [(1280, 800), (1600, 1000)])
def test_population_view_leaves_the_folds_their_room(desk_with_population, qtbot, size):
    window, view, _ = desk_with_population
    window.resize(*size)
    window.show_view("population")
    qtbot.wait(50)
    assert window.views["population"].isVisible()
    assert view.height() >= 300 and view.width() >= 600
    for fold in (window.fold.main, window.fold.alt):
        assert fold.height() >= MIN_FOLD_HEIGHT * 0.6, (size, fold.height())
    # docked back under the plots by the person: the folds still keep their minimum
    window.views["population"].setFloating(False)
    qtbot.wait(50)
    assert window.fold.height() >= MIN_FOLD_HEIGHT


def _bounds(plot):
    x, y = plot.shown_xy()
    return (float(np.min(x)), float(np.max(x))), (float(np.min(y)), float(np.max(y)))


def test_population_ranges_follow_the_list_filter(desk_with_population, qtbot):
    window, view, _ = desk_with_population
    plot = view.plots["period_amplitude"]
    before = plot._viewbox.viewRange()
    window.star_list.filter_edit.setText("NX-C0")
    qtbot.waitUntil(lambda: 0 < len(plot.shown_star_ids()) < len(view.points), timeout=3000)
    (x0, x1), (y0, y1) = _bounds(plot)
    (vx0, vx1), (vy0, vy1) = plot._viewbox.viewRange()
    assert vx0 <= x0 and x1 <= vx1 and min(vy0, vy1) <= y0 and y1 <= max(vy0, vy1)
    # the frame closed in on the stars left (it was the whole field before)
    assert (vx1 - vx0) < (before[0][1] - before[0][0])


def test_population_view_follows_a_reanalysis_through_the_ledger_events(
    desk_with_population, qtbot
):
    """A result written to the ledger (as a re-analysis in a worker does), with no window
    signal at all, reaches the diagrams through Ledger.subscribe."""
    import threading

    window, view, ledger = desk_with_population
    star = next(p for p in view.points if p.amplitude_by_band)
    band = next(iter(star.amplitude_by_band))
    stored = ledger.result(star.star_id)
    result = dict(stored.result)
    new_amplitude = round(float(star.amplitude_by_band[band]) * 0.5, 4)
    result["amplitude_by_band"] = {**result.get("amplitude_by_band", {}), band: new_amplitude}
    if result.get("primary_band") == band:
        result["amplitude"] = new_amplitude
    if result.get("fourier_by_band", {}).get(band):
        fb = dict(result["fourier_by_band"])
        fb[band] = {**fb[band], "peak_to_peak": new_amplitude}
        result["fourier_by_band"] = fb
    digest = stored.settings_hash if hasattr(stored, "settings_hash") else None
    writer = threading.Thread(target=lambda: ledger.store_results([(star.star_id, digest, result)]))
    writer.start()
    writer.join()

    def amplitude():
        point = next(p for p in view.points if p.star_id == star.star_id)
        return point.amplitude_by_band.get(band)

    qtbot.waitUntil(lambda: amplitude() == pytest.approx(new_amplitude), timeout=5000)
