"""A star switch draws the new star's points at once and its model lines once it rests.

pytest-qt, offscreen, on the six analysed demo stars (core.analysis results in a
real ledger).  The speed itself is measured by ``benchmarks/bench_desk.py``.
"""

from __future__ import annotations

import threading

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QColor

from phasewise.app.desk.plots import SymbolPoints
from phasewise.app.desk.style import band_style

from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def _drawn(view):
    """Phases and magnitudes of the points a fold draws as used by the fit."""
    x = np.concatenate([s.getData()[0] for s in view.bins])
    y = np.concatenate([s.getData()[1] for s in view.bins])
    return x, y


def test_new_star_shows_its_points_first_and_its_model_line_when_it_rests(desk, qtbot):
    view = desk.fold.main
    desk.select_star("CAL-V004")
    # no event processed yet: the points are there, the fit waits for the star to rest
    assert view.busy and view.model is None
    assert view.model_curve.getData()[0] is None or len(view.model_curve.getData()[0]) == 0
    x_before, y_before = _drawn(view)
    assert x_before.size > 0
    qtbot.waitUntil(lambda: view.model is not None, timeout=20000)
    model = view.model
    assert model.order is not None and len(view.model_curve.getData()[0]) > 0
    # the same points, now folded on the fitted model's epoch
    x_after, y_after = _drawn(view)
    used = model.used
    assert x_before.size == x_after.size == int(used.sum())
    np.testing.assert_allclose(np.sort(y_before), np.sort(model.mag[used]), atol=1e-9)
    np.testing.assert_allclose(np.sort(y_after), np.sort(model.mag[used]), atol=1e-9)


def test_holding_next_star_fits_only_the_star_it_rests_on_off_the_gui_thread(
    desk, qtbot, monkeypatch
):
    fitted, threads = [], set()
    original = desk.desk.fold_model

    def counting(lc, *args, **kwargs):
        fitted.append(lc.star_id)
        threads.add(threading.current_thread())
        return original(lc, *args, **kwargs)

    monkeypatch.setattr(desk.desk, "fold_model", counting)
    for _ in range(4):
        qtbot.keyClick(desk, Qt.Key.Key_J)  # key presses closer together than the rest delay
    assert desk.current_star == "CAL-V005"
    qtbot.waitUntil(lambda: desk.fold.main.model is not None, timeout=20000)
    desk.wait_idle()
    assert fitted and set(fitted) == {"CAL-V005"}
    # fitted in the window's workers: the window keeps taking keys meanwhile
    assert threading.main_thread() not in threads
    assert desk.fold.main.model.time.size == np.sum(
        np.asarray(desk.desk.lc.band) == desk.fold.main.band
    )


def test_light_curve_bands_are_one_item_each_with_their_own_symbol(desk):
    panel = desk.lightcurve
    lc = desk.desk.lc
    bands = list(lc.bands)
    assert len(bands) >= 2  # the demo stars have two bands
    for i, band in enumerate(bands):
        item = panel.scatter[i]
        colour, symbol = band_style(i)
        sel = lc.good & (np.asarray(lc.band) == band)
        x, y = item.getData()
        np.testing.assert_array_equal(y, np.asarray(lc.mag)[sel])
        np.testing.assert_allclose(x, np.asarray(lc.time)[sel] - panel.t0)
        assert item.symbol == symbol
        assert item.legend_sample.opts["symbol"] == symbol
        assert item.symbol_brush.color() == pg.mkColor(colour)
    # the legend's entries are the bands' samples
    samples = [sample.item for sample, _ in panel.legend.items]
    assert samples[: len(bands)] == [panel.scatter[i].legend_sample for i in range(len(bands))]


def test_symbol_points_are_painted_where_their_data_are(qtbot):
    plot = pg.PlotWidget()
    qtbot.addWidget(plot)
    plot.resize(300, 240)
    colour = "#0072B2"
    item = SymbolPoints("t", 12, pen=pg.mkPen(colour), brush=pg.mkBrush(colour))
    x = np.array([1.0, 2.0, 3.0])
    y = np.array([5.0, 3.0, 4.0])
    item.setData(x, y)
    plot.addItem(item)
    plot.setRange(xRange=(0, 4), yRange=(2, 6), padding=0)
    plot.show()
    qtbot.waitExposed(plot)
    image = plot.grab().toImage()
    vb = plot.getPlotItem().getViewBox()
    want = QColor(colour)
    for xi, yi in zip(x, y, strict=True):
        pos = plot.mapFromScene(vb.mapViewToScene(QPointF(xi, yi)))
        scale = image.devicePixelRatio()
        pixel = image.pixelColor(int(pos.x() * scale), int(pos.y() * scale))
        assert (pixel.red(), pixel.green(), pixel.blue()) == (want.red(), want.green(), want.blue())
    # clicking the legend's sample hides the points themselves
    item.legend_sample.setVisible(False)
    assert not item.isVisible()
