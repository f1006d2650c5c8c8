"""What the desk shows at its default size: the periodogram's zoom, the spectral window,
labels apart, the star list's key columns (pytest-qt, offscreen, demo stars)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from PySide6.QtCore import QSettings
from PySide6.QtGui import QFontMetrics

from phasewise.app.desk import MainWindow
from phasewise.app.desk.star_list import FIELDS, ID_SAMPLE, VISUAL_ORDER

from .conftest import dispose
from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def test_periodogram_zooms_to_the_candidates_and_z_shows_the_grid(desk, qtbot):
    panel = desk.periodogram
    qtbot.waitUntil(lambda: bool(panel.candidates), timeout=10000)
    f = panel.view.frequency
    (x0, x1), _ = panel.vb.viewRange()
    cand = np.array([c["frequency"] for c in panel.candidates])
    assert x0 <= cand.min() and cand.max() <= x1
    assert (x1 - x0) < 0.5 * (f.max() - f.min())  # zoomed in, not the whole grid
    desk.acts["pg_range"].trigger()
    (g0, g1), _ = panel.vb.viewRange()
    assert g0 <= f[f > 0].min() + 1e-9 and g1 >= 0.99 * f.max()
    desk.acts["pg_range"].trigger()
    assert panel.vb.viewRange()[0][1] == pytest.approx(x1)


@pytest.mark.parametrize("period_axis", [False, True])
def test_spectral_window_is_drawn_on_both_axes(desk, qtbot, period_axis):
    panel = desk.periodogram
    qtbot.waitUntil(lambda: bool(panel.candidates), timeout=10000)
    desk.acts["period_axis"].setChecked(period_axis)
    desk.acts["window"].setChecked(True)
    qtbot.waitUntil(lambda: panel.window_power is not None, timeout=20000)
    assert panel.window_curve.isVisible()
    x, y = panel.window_curve.getData()
    (v0, v1), _ = panel.vb.viewRange()
    inside = (x >= v0) & (x <= v1)
    assert inside.sum() > 10 and np.nanmax(y[inside]) > 0
    # centred on the trial period (W(f - f0), both sides): drawn right up to it
    trial = desk.session.period if period_axis else 1.0 / desk.session.period
    assert np.min(np.abs(x - trial)) < 0.01 * trial
    assert (x < trial).any() and (x > trial).any()


def test_candidate_numbers_do_not_overlap(desk, qtbot):
    panel = desk.periodogram
    for star in ("CAL-V001", "CAL-V002", "CAL-V003"):
        desk.select_star(star)
        qtbot.waitUntil(lambda: bool(panel.candidates), timeout=20000)
        desk.wait_idle()
        rects = [t.sceneBoundingRect() for t in panel.labels if t.isVisible()]
        assert len(rects) == min(len(panel.candidates), len(panel.labels))
        for a, b in itertools.combinations(rects, 2):
            assert not a.intersects(b), star


@pytest.mark.parametrize("size", [(1280, 800), (1600, 1000)])
def test_star_list_shows_long_ids_and_the_key_columns(qtbot, tmp_path, subset_copy, size):
    window = MainWindow(settings=QSettings(str(tmp_path / "l.ini"), QSettings.Format.IniFormat))
    try:
        window.resize(*size)
        window.show()
        window.open_ledger(subset_copy)
        qtbot.wait(50)
        view = window.star_list.view
        metrics = view.fontMetrics()
        assert view.columnWidth(0) > metrics.horizontalAdvance(ID_SAMPLE)
        visible = view.viewport().width()
        header = view.horizontalHeader()
        for field in (
            "star_id",
            "suggested_class",
            "verdict_class",
            "period",
            "amplitude",
            "fap",
            "flags",
        ):
            col = FIELDS.index(field)
            right = header.sectionViewportPosition(col) + header.sectionSize(col)
            assert right <= visible, field
        assert [header.logicalIndex(v) for v in range(len(VISUAL_ORDER))] == [
            FIELDS.index(f) for f in VISUAL_ORDER
        ]
        _check_plots_readable(window, qtbot)
    finally:
        dispose(window)


def _check_plots_readable(window, qtbot) -> None:
    """At this size nothing is drawn over the points, and no title is cut mid-word."""
    assert window.wait_idle()
    qtbot.wait(50)
    # the light curve and the periodogram share their row (neither squeezed to a sliver)
    left, right = window.top_splitter.sizes()
    assert min(left, right) >= 0.35 * (left + right)
    # the light curve's legend is a row above the view, never over the points
    panel = window.lightcurve
    assert panel.legend.items, "no legend entries"
    view = panel.vb.sceneBoundingRect()
    assert not panel.legend.sceneBoundingRect().intersects(view)
    # fold titles: shown whole, or cut with an ellipsis inside the view; whole in the tooltip
    for fold in (window.fold.main, window.fold.alt):
        text = fold._title_text
        assert text and fold.fold.titleLabel.toolTip() == text
        shown = fold.fold.titleLabel.text
        assert shown == text or shown.endswith("…")
        width = QFontMetrics(fold._title_font).horizontalAdvance(shown)
        assert width <= fold.fold.vb.width()
