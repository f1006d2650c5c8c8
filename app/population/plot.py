"""One diagnostic diagram as a pyqtgraph plot with click and rectangle brushing.

The plot owns a fixed set of items (the selected stars, the outliers, the
current star, guide lines and their labels, and one scatter item per class
style, made when a style first appears) and refreshes them with ``setData``;
nothing is rebuilt when the data, the filter or the selection change.

Each class style (colour, symbol, size) is drawn by its own scatter item with
one symbol, brush and size for all its points: pyqtgraph then draws every
point from one cached symbol picture, where per-point styles cost it a lookup
per point (seconds at 100,000 stars).  Which points are shown and marked is
found with numpy over the diagram's arrays, never a Python loop per point.
"""

from __future__ import annotations

from collections.abc import Collection, Iterable
from pathlib import Path

import numpy as np
import pyqtgraph as pg
from pyqtgraph.exporters import ImageExporter
from PySide6 import QtCore, QtGui, QtSvg, QtWidgets

from phasewise.core.diagrams import Diagram
from phasewise.core.errors import PhasewiseError

from .style import class_style

__all__ = [
    "BrushViewBox",
    "DiagramPlot",
    "EXPORT_WIDTH_PX",
    "FIGURE_SIZE",
    "OneStyleScatter",
    "clip_polyline",
]

#: Width of an exported PNG: 2400 px is 8 inches at 300 dpi.
EXPORT_WIDTH_PX = 2400
#: Size of an exported figure in screen pixels (about 7.5 × 6.25 inches at 96 dpi).
FIGURE_SIZE = (720, 600)

_LINE_PENS = {
    "relation": dict(color="#1A1A1A", width=2.0),
    "strip": dict(color="#555555", width=1.5, style=QtCore.Qt.PenStyle.DashLine),
    "guide": dict(color="#8A8A8A", width=1.2, style=QtCore.Qt.PenStyle.DotLine),
}
CURRENT_COLOUR = "#000000"
#: Up to this many wanted stars are found by comparing ids; more through an id index.
_FEW = 8
SELECTED_COLOUR = "#202020"
OUTLIER_COLOUR = "#E41A1C"


def clip_polyline(
    x: np.ndarray, y: np.ndarray, x_range: tuple[float, float], y_range: tuple[float, float]
) -> tuple[np.ndarray, np.ndarray]:
    """The parts of a polyline inside a rectangle (Liang–Barsky per segment).

    Pieces are separated by NaN, to be drawn with ``connect="finite"``.
    """
    out_x: list[float] = []
    out_y: list[float] = []
    for k in range(len(x) - 1):
        xa, ya, dx, dy = x[k], y[k], x[k + 1] - x[k], y[k + 1] - y[k]
        t0, t1 = 0.0, 1.0
        keep = True
        for p, q in (
            (-dx, xa - x_range[0]),
            (dx, x_range[1] - xa),
            (-dy, ya - y_range[0]),
            (dy, y_range[1] - ya),
        ):
            if p == 0:
                keep = keep and q >= 0
            elif p < 0:
                t0 = max(t0, q / p)
            else:
                t1 = min(t1, q / p)
        if keep and t0 <= t1:
            out_x += [xa + t0 * dx, xa + t1 * dx, np.nan]
            out_y += [ya + t0 * dy, ya + t1 * dy, np.nan]
    return np.array(out_x), np.array(out_y)


class OneStyleScatter(pg.ScatterPlotItem):
    """A scatter item whose points all take the item's symbol, size, pen and brush.

    pyqtgraph looks up each new point's picture in its symbol atlas by a key
    made per point (about 10 µs each: seconds for a survey); here every point
    has the same picture, looked up once.  Per-point styles must not be given
    (``setData`` with lists of symbols, sizes, pens or brushes), nor hover styles.
    """

    def updateSpots(self, dataSet=None):  # noqa: N802, N803 (pyqtgraph naming)
        data = self.data if dataSet is None else dataSet
        if self.opts["pxMode"] and self.opts["useCache"] and len(data):
            new = data["sourceRect"]["w"] == 0
            if np.any(new):
                style = (
                    self.opts["symbol"],
                    self.opts["size"],
                    self.opts["pen"],
                    self.opts["brush"],
                )
                (rect,) = self.fragmentAtlas[[style]]
                data["sourceRect"][new] = rect
                self.invalidate()  # pyqtgraph's own path does this when it sets rectangles
        super().updateSpots(dataSet)


class BrushViewBox(pg.ViewBox):
    """A view box where a left drag with Shift (or in brush mode) draws a selection rectangle.

    Emits ``brushed(QRectF)`` in data coordinates when the drag ends.  Without
    Shift and outside brush mode, dragging pans as usual.
    """

    brushed = QtCore.Signal(object)

    def __init__(self) -> None:
        super().__init__()
        self.brush_mode = False
        self._band = QtWidgets.QGraphicsRectItem()
        self._band.setPen(pg.mkPen("#0072B2", width=1.5, style=QtCore.Qt.PenStyle.DashLine))
        self._band.setBrush(pg.mkBrush(0, 114, 178, 40))
        self._band.setZValue(1e9)
        self._band.hide()
        self.addItem(self._band, ignoreBounds=True)

    def mouseDragEvent(self, ev, axis=None):  # noqa: N802 (Qt naming)
        shift = bool(ev.modifiers() & QtCore.Qt.KeyboardModifier.ShiftModifier)
        left = ev.button() == QtCore.Qt.MouseButton.LeftButton
        if not (left and axis is None and (self.brush_mode or shift)):
            super().mouseDragEvent(ev, axis)
            return
        ev.accept()
        start = self.mapToView(ev.buttonDownPos())
        end = self.mapToView(ev.pos())
        rect = QtCore.QRectF(start, end).normalized()
        if ev.isFinish():
            self._band.hide()
            self.brushed.emit(rect)
        else:
            self._band.setRect(rect)
            self._band.show()


class DiagramPlot(pg.PlotWidget):
    """A population diagram: points coloured by class, current star and selection marked.

    Signals
    -------
    star_clicked(str)
        A point was clicked.
    brushed(list)
        A rectangle was drawn; the visible stars inside it (possibly empty).
    """

    star_clicked = QtCore.Signal(str)
    brushed = QtCore.Signal(list)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        self._viewbox = BrushViewBox()
        super().__init__(parent, background="w", viewBox=self._viewbox)
        self.diagram: Diagram | None = None
        self._class_of: dict[str, str] = {}
        self._visible: set[str] | None = None
        self._selected: set[str] = set()
        self._outliers: set[str] = set()
        self._current: str | None = None
        self._shown: np.ndarray = np.zeros(0, dtype=int)  # diagram indices drawn
        self._ids: np.ndarray = np.zeros(0, dtype=object)  # the diagram's star ids (shared)
        self._codes: np.ndarray = np.zeros(0, dtype=str)  # and class codes
        self._index_of: dict[str, int] | None = None  # star id -> diagram index, when needed
        self._shown_mask: np.ndarray = np.zeros(0, dtype=bool)
        self._brushes: dict[str, QtGui.QBrush] = {}
        # one scatter item per class style: (colour, symbol, size) -> item
        self._class_items: dict[tuple[str, str, float], pg.ScatterPlotItem] = {}
        self._legend_classes: tuple[str, ...] = ()

        item = self.getPlotItem()
        item.showGrid(x=True, y=True, alpha=0.15)
        item.hideButtons()
        item.setMenuEnabled(False)
        tick_font = QtGui.QFont()
        tick_font.setPointSizeF(9.5)
        for name in ("left", "bottom"):
            axis = item.getAxis(name)
            axis.setPen(pg.mkPen("#222222"))
            axis.setTextPen(pg.mkPen("#222222"))
            axis.setStyle(tickFont=tick_font)
            axis.enableAutoSIPrefix(False)  # "(x0.001)" beside a magnitude axis misleads
        for name in ("top", "right"):
            item.showAxis(name)
            item.getAxis(name).setStyle(showValues=False)
            item.getAxis(name).setPen(pg.mkPen("#222222"))

        self.selected_marks = OneStyleScatter(
            pxMode=True, symbol="o", size=13, brush=None, pen=pg.mkPen(SELECTED_COLOUR, width=1.3)
        )
        self.outlier_marks = OneStyleScatter(
            pxMode=True, symbol="o", size=15, brush=None, pen=pg.mkPen(OUTLIER_COLOUR, width=1.6)
        )
        self.current_mark = OneStyleScatter(
            pxMode=True, symbol="o", size=21, brush=None, pen=pg.mkPen(CURRENT_COLOUR, width=2.6)
        )
        for z, overlay in enumerate((self.selected_marks, self.outlier_marks, self.current_mark)):
            overlay.setZValue(11 + z)
            item.addItem(overlay)
        self.lines: list[pg.PlotDataItem] = []
        self.line_labels: list[pg.TextItem] = []
        self.export_legend = pg.LegendItem(
            offset=(-10, 10),
            labelTextSize="10pt",
            labelTextColor="#111111",
            verSpacing=-4,
            pen=pg.mkPen("#999999"),
            brush=pg.mkBrush(255, 255, 255, 230),
        )
        self.export_legend.setParentItem(item.getViewBox())
        # scale with the figure when a PNG is rendered larger than the screen
        self.export_legend.setFlag(
            QtWidgets.QGraphicsItem.GraphicsItemFlag.ItemIgnoresTransformations, False
        )
        self.export_legend.hide()
        self._legend_samples: dict[str, pg.ScatterPlotItem] = {}
        self._viewbox.brushed.connect(self._on_brush)

    # ----------------------------------------------------------------- state
    @property
    def brush_mode(self) -> bool:
        return self._viewbox.brush_mode

    def set_brush_mode(self, on: bool) -> None:
        """Left drag selects a rectangle (True) or pans (False; Shift-drag still selects)."""
        self._viewbox.brush_mode = bool(on)

    def set_diagram(self, diagram: Diagram, *, auto_range: bool = True) -> None:
        """Show a diagram's points and guide lines."""
        self.diagram = diagram
        self._class_of = {}  # built on the first tooltip
        self._ids = np.asarray(diagram.star_ids, dtype=object)
        self._codes = np.asarray(diagram.class_codes, dtype=str)
        self._index_of = None
        item = self.getPlotItem()
        label_style = {"font-size": "11pt", "color": "#111111"}
        item.setLabel("bottom", diagram.x_label, **label_style)
        item.setLabel("left", diagram.y_label, **label_style)
        self._viewbox.invertY(diagram.invert_y)
        self._set_lines(diagram)
        self._refresh_points()
        if auto_range:
            self.auto_range()

    def show_state(
        self,
        diagram: Diagram,
        *,
        visible: Collection[str] | None,
        outliers: Iterable[str],
        selected: Iterable[str],
        current: str | None,
        auto_range: bool = True,
    ) -> None:
        """Set the diagram and every mark at once (one refresh instead of five)."""
        self._visible = None if visible is None else set(visible)
        self._outliers = set(outliers)
        self._selected = set(selected)
        self._current = current
        self.set_diagram(diagram, auto_range=auto_range)

    def set_visible(self, star_ids: Collection[str] | None) -> None:
        """Draw only these stars (None: all)."""
        self._visible = None if star_ids is None else set(star_ids)
        self._refresh_points()

    def set_selected(self, star_ids: Iterable[str]) -> None:
        self._selected = set(star_ids)
        self._refresh_marks()

    def set_outliers(self, star_ids: Iterable[str]) -> None:
        self._outliers = set(star_ids)
        self._refresh_marks()

    def set_current(self, star_id: str | None) -> None:
        self._current = star_id
        self._refresh_marks()

    def shown_star_ids(self) -> list[str]:
        """Ids of the points drawn now (after the filter)."""
        if self.diagram is None:
            return []
        return self._ids[self._shown].tolist()

    def shown_counts(self) -> dict[str, int]:
        """Points drawn now, per class."""
        if self.diagram is None or not len(self._shown):
            return {}
        codes, counts = np.unique(self._codes[self._shown], return_counts=True)
        return {str(c): int(n) for c, n in zip(codes, counts, strict=True)}

    def shown_xy(self) -> tuple[np.ndarray, np.ndarray]:
        """Coordinates of the points drawn now (in the diagram's order)."""
        if self.diagram is None:
            return np.zeros(0), np.zeros(0)
        return self.diagram.x[self._shown], self.diagram.y[self._shown]

    def class_items(self) -> list[pg.ScatterPlotItem]:
        """The scatter items that draw points now (one per class style)."""
        return [item for item in self._class_items.values() if len(item.data)]

    def data_to_widget(self, x: float, y: float) -> QtCore.QPoint:
        """Widget pixel position of a data point (for tests and tools)."""
        scene = self._viewbox.mapViewToScene(QtCore.QPointF(x, y))
        return self.mapFromScene(scene)

    def auto_range(self) -> None:
        """Fit the view to the points drawn (and to reference ratios, which frame them)."""
        guides = [
            line
            for line, guide in zip(
                self.lines, self.diagram.lines if self.diagram else (), strict=False
            )
            if guide.kind == "guide"
        ]
        if len(self._shown):
            self._viewbox.autoRange(padding=0.08, items=[*self.class_items(), *guides])
        else:
            self._viewbox.setRange(xRange=(0, 1), yRange=(0, 1), padding=0)

    # ---------------------------------------------------------------- export
    def export(self, path: str | Path, width_px: int = EXPORT_WIDTH_PX) -> Path:
        """Write the diagram as PNG or SVG (by the file's suffix), with a class legend.

        The figure is drawn apart from the screen at :data:`FIGURE_SIZE` (so its
        fonts and proportions do not depend on the window), with the stars now
        shown, the outlier rings and the current view range, without the
        current-star and selection rings.  A PNG is ``width_px`` pixels wide.
        """
        path = Path(path)
        suffix = path.suffix.lower()
        if suffix not in (".png", ".svg"):
            raise PhasewiseError(
                f"cannot export a diagram as {suffix or 'a file without suffix'}; use .png or .svg",
                file=str(path),
            )
        if self.diagram is None:
            raise PhasewiseError("no diagram to export yet", file=str(path))
        figure = DiagramPlot()
        figure.setAttribute(QtCore.Qt.WidgetAttribute.WA_DontShowOnScreen, True)
        figure.resize(*FIGURE_SIZE)
        try:
            figure.set_diagram(self.diagram, auto_range=False)
            figure.set_visible(self._visible)
            figure.set_outliers(self._outliers)
            x_range, y_range = self._viewbox.viewRange()
            figure._viewbox.setRange(xRange=x_range, yRange=y_range, padding=0)
            figure.show()
            QtWidgets.QApplication.processEvents()
            figure._write(path, suffix, width_px)
        finally:
            figure.close()
            figure.deleteLater()
        if not path.exists():
            raise PhasewiseError("the diagram could not be written", file=str(path))
        return path

    def _write(self, path: Path, suffix: str, width_px: int) -> None:
        self._update_export_legend()
        self.export_legend.show()
        self.export_legend.updateSize()
        self._place_export_legend()
        self._clip_lines_to_view()
        if suffix == ".png":
            exporter = ImageExporter(self.getPlotItem())
            exporter.parameters()["width"] = int(width_px)
            exporter.parameters()["antialias"] = True
            exporter.export(str(path))
        else:
            self._export_svg(path)

    def _place_export_legend(self) -> None:
        """Put the legend in the corner of the view with the fewest points."""
        (x0, x1), (y0, y1) = self._viewbox.viewRange()
        x, y = self.shown_xy()
        xm, ym = (x0 + x1) / 2, (y0 + y1) / 2
        top_is_high = not self.diagram.invert_y if self.diagram else True
        corners = {}
        for right in (True, False):
            for top in (True, False):
                in_x = x >= xm if right else x < xm
                high = top == top_is_high
                in_y = y >= ym if high else y < ym
                corners[(right, top)] = int(np.count_nonzero(in_x & in_y))
        right, top = min(corners, key=lambda c: (corners[c], not c[0], not c[1]))
        self.export_legend.anchor(
            itemPos=(1 if right else 0, 0 if top else 1),
            parentPos=(1 if right else 0, 0 if top else 1),
            offset=(-10 if right else 10, 10 if top else -10),
        )

    def _clip_lines_to_view(self) -> list:
        """Cut guide lines to the view (SVG output does not keep the view's clipping)."""
        (x0, x1), (y0, y1) = self._viewbox.viewRange()
        saved = []
        for line in self.lines:
            if not line.isVisible():
                continue
            x, y = line.getData()
            if x is None or not len(x):
                continue
            saved.append((line, (np.array(x), np.array(y))))
            cx, cy = clip_polyline(np.asarray(x), np.asarray(y), (x0, x1), (y0, y1))
            line.setData(cx, cy, connect="finite")
        return saved

    def _export_svg(self, path: Path) -> None:
        # pyqtgraph's SVGExporter cannot parse the closing "Z" Qt 6.12 writes in paths;
        # Qt's own SVG generator renders the same scene as vector graphics with real text.
        item = self.getPlotItem()
        scene = item.scene()
        source = item.sceneBoundingRect()
        size = QtCore.QSize(int(source.width()), int(source.height()))
        generator = QtSvg.QSvgGenerator()
        generator.setFileName(str(path))
        generator.setSize(size)
        generator.setViewBox(QtCore.QRect(QtCore.QPoint(0, 0), size))
        # the screen's resolution: axis pictures recorded on screen replay at their size
        generator.setResolution(int(round(self.logicalDpiY())))
        generator.setTitle(self.diagram.title if self.diagram else "diagram")
        generator.setDescription("Phasewise population diagram")
        items = [i for i in scene.items() if hasattr(i, "setExportMode")]
        painter = QtGui.QPainter(generator)
        try:
            # export mode: symbols are drawn as vector paths, not copied from a pixmap atlas
            for graphics_item in items:
                graphics_item.setExportMode(True, {"antialias": True, "painter": painter})
            target = QtCore.QRectF(0, 0, size.width(), size.height())
            painter.fillRect(target, QtGui.QColor("white"))
            scene.render(painter, target, source)
        finally:
            painter.end()
            for graphics_item in items:
                graphics_item.setExportMode(False)

    # -------------------------------------------------------------- internal
    def _brush(self, code: str) -> QtGui.QBrush:
        if code not in self._brushes:
            self._brushes[code] = pg.mkBrush(class_style(code).colour)
        return self._brushes[code]

    def _class_item(self, key: tuple[str, str, float]) -> pg.ScatterPlotItem:
        """The scatter item of a class style, made on first use."""
        item = self._class_items.get(key)
        if item is None:
            colour, symbol, size = key
            item = OneStyleScatter(
                pxMode=True,
                hoverable=True,
                tip=self._tip,
                symbol=symbol,
                size=size,
                brush=pg.mkBrush(colour),
                pen=pg.mkPen(None),
            )
            item.setZValue(10)
            item.sigClicked.connect(self._on_click)
            self.getPlotItem().addItem(item)
            self._class_items[key] = item
        return item

    def _indices(self, wanted: Collection[str]) -> np.ndarray:
        """Sorted diagram indices of the stars in ``wanted`` (work per wanted star, not per point)."""
        if self.diagram is None or not wanted:
            return np.zeros(0, dtype=int)
        if len(wanted) <= _FEW:  # the current star, a small selection: no index kept
            keep = np.zeros(len(self._ids), dtype=bool)
            for sid in wanted:
                keep |= self._ids == sid
            return np.flatnonzero(keep)
        if self._index_of is None:
            self._index_of = {sid: i for i, sid in enumerate(self.diagram.star_ids)}
        index_of = self._index_of
        if len(index_of) < len(self._ids):  # a star drawn twice: every one of its points
            keep = np.isin(self._ids.astype(str), np.array([str(s) for s in wanted], dtype=str))
            return np.flatnonzero(keep)
        found = np.fromiter((index_of.get(sid, -1) for sid in wanted), dtype=int, count=len(wanted))
        return np.unique(found[found >= 0])

    def _refresh_points(self) -> None:
        diagram = self.diagram
        if diagram is None:
            return
        if self._visible is None:
            shown = np.arange(len(diagram))
        else:
            shown = self._indices(self._visible)
        self._shown = shown
        self._shown_mask = np.zeros(len(diagram), dtype=bool)
        self._shown_mask[shown] = True
        # the stars of each class style, in the diagram's order
        groups: dict[tuple[str, str, float], list[np.ndarray]] = {}
        codes, inverse = np.unique(self._codes[shown], return_inverse=True)
        for k, code in enumerate(codes):
            style = class_style(str(code))
            key = (style.colour, style.symbol, float(style.size))
            groups.setdefault(key, []).append(shown[inverse.ravel() == k])
        for key in groups:
            self._class_item(key)
        # the most numerous style at the bottom: a rare class is not buried under a common one
        order = sorted(groups, key=lambda key: -sum(len(part) for part in groups[key]))
        for key, item in self._class_items.items():
            if key not in groups:
                item.setData(x=[], y=[])
                continue
            index = np.sort(np.concatenate(groups[key]))
            item.setZValue(10 + 0.5 * order.index(key) / len(order))
            item.setData(x=diagram.x[index], y=diagram.y[index], data=self._ids[index])
        title = f"{diagram.title}  (n = {len(shown)})"
        if not len(shown):
            title = f"{diagram.title}: no stars to draw"
        self.setToolTip(diagram.note)
        self.getPlotItem().setTitle(title, size="11pt", color="#111111")
        self._refresh_marks()

    def _marks(self, wanted: Collection[str]) -> tuple[np.ndarray, np.ndarray]:
        diagram = self.diagram
        if diagram is None or not wanted:
            return np.zeros(0), np.zeros(0)
        index = self._indices(wanted)
        index = index[self._shown_mask[index]]
        return diagram.x[index], diagram.y[index]

    def _refresh_marks(self) -> None:
        self.selected_marks.setData(*self._marks(self._selected))
        self.outlier_marks.setData(*self._marks(self._outliers))
        self.current_mark.setData(*self._marks({self._current} if self._current else set()))

    def _set_lines(self, diagram: Diagram) -> None:
        item = self.getPlotItem()
        while len(self.lines) < len(diagram.lines):
            line = pg.PlotDataItem()
            line.setZValue(5)
            label = pg.TextItem(color="#333333", anchor=(0, 1))
            label.setZValue(6)
            item.addItem(line, ignoreBounds=True)
            item.addItem(label, ignoreBounds=True)
            self.lines.append(line)
            self.line_labels.append(label)
        previous = None
        guide_levels = [float(g.y[0]) for g in diagram.lines if g.kind == "guide" and len(g.y)]
        top_level = max(guide_levels) if guide_levels else None
        n_labels = 0
        for k, (line, label) in enumerate(zip(self.lines, self.line_labels, strict=True)):
            if k >= len(diagram.lines):
                line.setData([], [])
                line.hide()
                label.hide()
                continue
            guide = diagram.lines[k]
            line.setData(guide.x, guide.y, pen=pg.mkPen(**_LINE_PENS.get(guide.kind, {})))
            line.opts["name"] = guide.label
            line.show()
            # only reference ratios are labelled in the plot; relations and the strip
            # are named in the legend above the diagrams and in exported figures
            if guide.kind == "guide" and guide.label != previous and len(guide.x):
                label.setText(guide.label)
                # above its line, except the topmost one (below it, so it stays in view);
                # labels alternate left and right so that close ratios do not overlap
                below = top_level is not None and float(guide.y[0]) >= top_level
                right = n_labels % 2 == 1
                n_labels += 1
                label.setAnchor((1 if right else 0, 0 if below else 1))
                end = -1 if right else 0
                label.setPos(float(guide.x[end]), float(guide.y[end]))
                label.show()
            else:
                label.hide()
            previous = guide.label

    def _update_export_legend(self) -> None:
        diagram = self.diagram
        counts = self.shown_counts()
        classes = tuple(sorted(counts))
        lines = tuple((line, line.opts.get("name")) for line in self.lines if line.isVisible())
        key = classes + tuple(name for _, name in lines) + (len(self.outlier_marks.data) > 0,)
        if key == self._legend_classes or diagram is None:
            return
        self._legend_classes = key
        self.export_legend.clear()
        for code in classes:
            sample = self._legend_samples.get(code)
            if sample is None:
                style = class_style(code)
                sample = pg.ScatterPlotItem(
                    symbol=style.symbol, size=style.size + 2, brush=self._brush(code), pen=None
                )
                self._legend_samples[code] = sample
            self.export_legend.addItem(sample, f"{code} ({counts[code]})")
        seen = set()
        for line, name in lines:
            if name and name not in seen:
                seen.add(name)
                self.export_legend.addItem(line, name)
        if len(self.outlier_marks.data):
            self.export_legend.addItem(self.outlier_marks, "outlier (far from its class)")

    def _tip(self, x: float, y: float, data: object) -> str:
        if not self._class_of and self.diagram is not None:
            self._class_of = dict(zip(self.diagram.star_ids, self.diagram.class_codes, strict=True))
        code = self._class_of.get(str(data), "")
        return f"{data}  {code}\nx = {x:.4g}, y = {y:.4g}\nclick: open · Shift+drag: select"

    def _on_click(self, item, points, event) -> None:
        # the topmost item took the click: add the points of the other classes under it
        points = list(points)
        for other in self.class_items():
            if other is not item:
                points.extend(other.pointsAt(event.pos()))
        if not points:
            return
        # overlapping symbols: take the one whose centre is nearest the click
        click = event.scenePos()

        def pixels(point) -> float:
            centre = self._viewbox.mapViewToScene(point.pos())
            return (centre.x() - click.x()) ** 2 + (centre.y() - click.y()) ** 2

        nearest = min(points, key=pixels)
        self.star_clicked.emit(str(nearest.data()))

    def _on_brush(self, rect: QtCore.QRectF) -> None:
        if self.diagram is None:
            return
        inside = self.diagram.inside((rect.left(), rect.right()), (rect.top(), rect.bottom()))
        if self._visible is not None:
            inside = [sid for sid in inside if sid in self._visible]
        self.brushed.emit(inside)
