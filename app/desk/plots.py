"""Shared pieces of the desk's plots: a view box with rectangle selection."""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QBrush, QColor, QPen
from PySide6.QtWidgets import QGraphicsRectItem

__all__ = ["SelectViewBox", "make_plot"]


class SelectViewBox(pg.ViewBox):
    """A view box whose left-drag selects a rectangle when selection is on.

    Drag with Shift held (or with selection mode on) to select; hold Ctrl
    as well to restore instead of exclude.  The rectangle is emitted in data
    coordinates.
    """

    sigRectSelected = Signal(QRectF, bool)  # rect (data coords), restore?

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.select_mode = False
        self._band = QGraphicsRectItem(0, 0, 1, 1)
        self._band.setPen(QPen(QColor("#CC0066"), 0))
        self._band.setBrush(QBrush(QColor(204, 0, 102, 40)))
        self._band.setZValue(1e9)
        self._band.hide()
        self.addItem(self._band, ignoreBounds=True)

    def mouseDragEvent(self, ev, axis=None) -> None:
        selecting = self.select_mode or bool(ev.modifiers() & Qt.KeyboardModifier.ShiftModifier)
        if ev.button() != Qt.MouseButton.LeftButton or not selecting:
            super().mouseDragEvent(ev, axis)
            return
        ev.accept()
        start = self.mapToView(ev.buttonDownPos())
        end = self.mapToView(ev.pos())
        rect = QRectF(start, end).normalized()
        if ev.isFinish():
            self._band.hide()
            restore = bool(ev.modifiers() & Qt.KeyboardModifier.ControlModifier)
            self.sigRectSelected.emit(rect, restore)
        else:
            self._band.setRect(rect)
            self._band.show()


def make_plot(title: str | None = None, select: bool = False) -> pg.PlotWidget:
    """A white plot widget with readable fonts; optionally a selecting view box."""
    vb = SelectViewBox() if select else pg.ViewBox()
    plot = pg.PlotWidget(viewBox=vb, title=title)
    item = plot.getPlotItem()
    item.showGrid(x=True, y=True, alpha=0.15)
    for name in ("left", "bottom"):
        axis = item.getAxis(name)
        axis.enableAutoSIPrefix(False)
    item.setMenuEnabled(False)
    return plot


def set_labels(plot: pg.PlotWidget, bottom: str, left: str) -> None:
    item = plot.getPlotItem()
    item.setLabel("bottom", bottom)
    item.setLabel("left", left)


__all__ += ["set_labels", "QPointF"]
