"""Shared pieces of the desk's plots: a view box with rectangle selection."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from pyqtgraph import functions as fn
from pyqtgraph.graphicsItems.ScatterPlotItem import renderSymbol
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtGui import QBrush, QColor, QPainter, QPen, QPixmap, QTransform
from PySide6.QtWidgets import QGraphicsRectItem, QLabel, QSizePolicy

__all__ = [
    "SelectViewBox",
    "FastPoints",
    "SymbolPoints",
    "make_plot",
    "set_labels",
    "cache_axes",
    "points_in_polygon",
    "full_range",
]

#: Share of the data range added above and below the points.
RANGE_PAD = 0.06


def full_range(values, pad: float = RANGE_PAD) -> tuple[float, float] | None:
    """(low, high) covering every finite value, padded: no point is ever off-scale."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return None
    lo, hi = float(v.min()), float(v.max())
    span = hi - lo if hi > lo else max(abs(lo) * 1e-3, 0.05)
    return lo - pad * span, hi + pad * span


def points_in_polygon(x, y, polygon) -> np.ndarray:
    """Boolean mask of the points (x, y) inside a closed polygon (even-odd rule).

    ``polygon`` is an (n, 2) array of vertices; vectorised ray casting over
    its edges.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    poly = np.asarray(polygon, dtype=float)
    inside = np.zeros(x.shape, dtype=bool)
    if poly.shape[0] < 3:
        return inside
    xj, yj = poly[-1]
    for xi, yi in poly:
        crosses = (yi > y) != (yj > y)
        with np.errstate(divide="ignore", invalid="ignore"):
            x_cross = (xj - xi) * (y - yi) / (yj - yi) + xi
        inside ^= crosses & (x < x_cross)
        xj, yj = xi, yi
    return inside


class SelectViewBox(pg.ViewBox):
    """A view box whose left-drag selects a rectangle or a lasso when selection is on.

    Drag with Shift held (or with selection mode or the lasso on) to select; hold Ctrl
    as well to restore instead of exclude.  The shape is emitted in data
    coordinates: a rectangle, or the lasso's vertices when ``lasso`` is set.
    """

    sigRectSelected = Signal(QRectF, bool)  # rect (data coords), restore?
    sigLassoSelected = Signal(object, bool)  # (n, 2) vertices (data coords), restore?

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.select_mode = False
        self.lasso = False
        self._lasso_points: list[tuple[float, float]] = []
        self._lasso_item = pg.PlotCurveItem(pen=pg.mkPen("#CC0066", width=1))
        self._lasso_item.setZValue(1e9)
        self.addItem(self._lasso_item, ignoreBounds=True)
        self._band = QGraphicsRectItem(0, 0, 1, 1)
        self._band.setPen(QPen(QColor("#CC0066"), 0))
        self._band.setBrush(QBrush(QColor(204, 0, 102, 40)))
        self._band.setZValue(1e9)
        self._band.hide()
        self.addItem(self._band, ignoreBounds=True)

    def mouseDragEvent(self, ev, axis=None) -> None:
        # the lasso is a selection tool by itself: ticking it needs no Select as well
        selecting = (
            self.select_mode
            or self.lasso
            or bool(ev.modifiers() & Qt.KeyboardModifier.ShiftModifier)
        )
        if ev.button() != Qt.MouseButton.LeftButton or not selecting:
            super().mouseDragEvent(ev, axis)
            return
        ev.accept()
        restore = bool(ev.modifiers() & Qt.KeyboardModifier.ControlModifier)
        if self.lasso:
            if ev.isStart():
                start = self.mapToView(ev.buttonDownPos())
                self._lasso_points = [(start.x(), start.y())]
            p = self.mapToView(ev.pos())
            self._lasso_points.append((p.x(), p.y()))
            xy = np.array(self._lasso_points + self._lasso_points[:1])
            if ev.isFinish():
                self._lasso_item.setData([], [])
                self.sigLassoSelected.emit(np.array(self._lasso_points), restore)
                self._lasso_points = []
            else:
                self._lasso_item.setData(xy[:, 0], xy[:, 1])
            return
        start = self.mapToView(ev.buttonDownPos())
        end = self.mapToView(ev.pos())
        rect = QRectF(start, end).normalized()
        if ev.isFinish():
            self._band.hide()
            self.sigRectSelected.emit(rect, restore)
        else:
            self._band.setRect(rect)
            self._band.show()


class FastPoints(pg.GraphicsObject):
    """Many same-style dots drawn in one ``QPainter.drawPoints`` call.

    ``ScatterPlotItem`` builds a Python record per point on every
    ``setData``; a fold of 100,000 points redrawn per key press needs less.
    The dots are round (or square) pen strokes of a fixed pixel size.
    """

    def __init__(
        self, colour, size: float = 5.0, square: bool = False, repeat_x: float | None = None
    ) -> None:
        super().__init__()
        self.repeat_x = repeat_x  # draw the same dots again shifted by this (a second cycle)
        pen = QPen(pg.mkColor(colour))
        pen.setWidthF(size)
        pen.setCosmetic(True)
        pen.setCapStyle(Qt.PenCapStyle.SquareCap if square else Qt.PenCapStyle.RoundCap)
        self.pen = pen
        self.size = size
        self._poly = fn.create_qpolygonf(0)
        self._bounds = QRectF()
        self._x = np.zeros(0)
        self._y = np.zeros(0)

    def setData(self, x, y) -> None:
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        keep = np.isfinite(x) & np.isfinite(y)
        if not keep.all():
            x, y = x[keep], y[keep]
        self._x, self._y = x, y
        poly = fn.create_qpolygonf(x.size)
        if x.size:
            view = fn.ndarray_from_qpolygonf(poly)
            view[:, 0] = x
            view[:, 1] = y
        self.prepareGeometryChange()
        self._poly = poly
        if x.size:
            shift = self.repeat_x or 0.0
            self._bounds = QRectF(
                float(x.min()), float(y.min()), float(np.ptp(x)) + shift, float(np.ptp(y))
            )
        else:
            self._bounds = QRectF()
        self.update()

    def getData(self):
        return self._x, self._y

    def dataBounds(self, ax, frac=1.0, orthoRange=None):
        values = self._x if ax == 0 else self._y
        if values.size == 0:
            return (None, None)
        top = float(values.max()) + (self.repeat_x or 0.0 if ax == 0 else 0.0)
        return (float(values.min()), top)

    def pixelPadding(self) -> float:
        return self.size

    def boundingRect(self) -> QRectF:
        if self._bounds.isNull() and not self._x.size:
            return QRectF()
        px, py = self.pixelWidth() or 0.0, self.pixelHeight() or 0.0
        return self._bounds.adjusted(
            -self.size * px, -self.size * py, self.size * px, self.size * py
        )

    def paint(self, painter, *args) -> None:
        if self._x.size:
            # map to device pixels ourselves, so a wide pen gives true squares/dots
            transform = painter.transform()
            painter.save()
            painter.resetTransform()
            painter.setPen(self.pen)
            painter.drawPoints(transform.map(self._poly))
            if self.repeat_x:
                shifted = QTransform(transform)
                shifted.translate(self.repeat_x, 0.0)
                painter.drawPoints(shifted.map(self._poly))
            painter.restore()


class SymbolPoints(FastPoints):
    """Many points of one symbol, pen and brush: one pre-drawn symbol stamped at each.

    ``ScatterPlotItem`` keeps a style record (and a style key) per point, so
    a 50,000-point curve costs a few hundred ms per ``setData``; here a star
    switch only copies the coordinates.  ``symbol`` is a pyqtgraph symbol
    name.  ``legend_sample`` is an empty scatter item of the same style for
    a legend (clicking it there shows or hides these points).
    """

    def __init__(self, symbol: str, size: float, pen, brush=None) -> None:
        super().__init__("k", size=size)
        self.symbol = symbol
        self.symbol_pen = pg.mkPen(pen)
        self.symbol_brush = pg.mkBrush(brush) if brush is not None else pg.mkBrush(None)
        self._stamp = None  # (device pixel ratio, pixmap)
        self._fragments = pg.Qt.internals.PrimitiveArray(QPainter.PixmapFragment, 10)
        self.legend_sample = _LegendSample(self, symbol, size, self.symbol_pen, self.symbol_brush)

    def _pixmap(self, dpr: float) -> QPixmap:
        if self._stamp is None or self._stamp[0] != dpr:
            image = renderSymbol(
                self.symbol, self.size, self.symbol_pen, self.symbol_brush, dpr=dpr
            )
            self._stamp = (dpr, QPixmap.fromImage(image))
        return self._stamp[1]

    def paint(self, painter, option, widget=None) -> None:
        if not self._x.size:
            return
        dpr = widget.devicePixelRatioF() if widget is not None else 1.0
        pixmap = self._pixmap(dpr)
        # the mapped polygon is held while the array is used: the array is a view
        # of its memory, not a copy (read through a freed temporary polygon, it
        # crashed the window while a worker thread allocated at the same time)
        mapped = painter.transform().map(self._poly)
        # far off-view points must not overflow Qt's integer device coordinates
        xy = np.clip(fn.ndarray_from_qpolygonf(mapped), -(2.0**30), 2.0**30)
        del mapped  # xy is a new array now
        self._fragments.resize(xy.shape[0])
        frags = self._fragments.ndarray()
        frags[:, 0:2] = xy
        frags[:, 2:6] = (0.0, 0.0, pixmap.width(), pixmap.height())
        frags[:, 6:10] = (1.0 / dpr, 1.0 / dpr, 0.0, 1.0)
        painter.save()
        painter.resetTransform()
        painter.drawPixmapFragments(*self._fragments.drawargs(), pixmap)
        painter.restore()


class _LegendSample(pg.ScatterPlotItem):
    """A legend's picture of a :class:`SymbolPoints` (it holds no points itself)."""

    def __init__(self, target, symbol, size, pen, brush) -> None:
        super().__init__(symbol=symbol, size=size, pen=pen, brush=brush)
        self.target = target

    def setVisible(self, visible: bool) -> None:
        super().setVisible(visible)
        self.target.setVisible(visible)


def cache_axes(plot_item) -> None:
    """Keep axes (and their grid lines) as cached pixmaps: a nudge repaints only data.

    Grid lines stop at the minor ticks: the finest level roughly tripled the
    cost of redrawing an axis after a range change (measured offscreen).
    """
    from PySide6.QtWidgets import QGraphicsItem

    for name in ("left", "bottom", "right", "top"):
        axis = plot_item.getAxis(name)
        axis.setStyle(maxTickLevel=1)
        axis.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)


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
    cache_axes(item)
    return plot


def set_labels(plot: pg.PlotWidget, bottom: str, left: str) -> None:
    item = plot.getPlotItem()
    item.setLabel("bottom", bottom)
    item.setLabel("left", left)


class Heading(QLabel):
    """A panel's bold heading that gives way to the panel's controls.

    It asks for no width; when it cannot be shown whole it is not drawn at
    all (a clipped "Periodog" or a lone "l" reads as a glitch).
    """

    def __init__(self, text: str, parent=None) -> None:
        super().__init__(f"<b>{text}</b>", parent)
        self.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.setMinimumWidth(0)
        self.setToolTip(text)

    def paintEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        if self.width() >= super().sizeHint().width():
            super().paintEvent(event)
