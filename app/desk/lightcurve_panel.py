"""Light curve: magnitude against time, bands apart, points excludable."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtWidgets import QCheckBox, QHBoxLayout, QLabel, QSizePolicy, QVBoxLayout, QWidget

from .plots import Heading, SymbolPoints, full_range, make_plot, points_in_polygon, set_labels
from .style import EXCLUDED_COLOUR, band_style

__all__ = ["LightCurvePanel"]

MAX_BANDS = 8


class LightCurvePanel(QWidget):
    """Magnitude against time (bright up), one symbol and colour per band.

    Signals
    -------
    exclusionRequested(indices, exclude)
        Point indices (into the full light curve) the user selected; ``exclude``
        is False when the user asked to restore them.
    """

    exclusionRequested = Signal(object, bool)

    def __init__(self, desk=None, parent=None) -> None:
        super().__init__(parent)
        self.desk = desk
        self.plot = make_plot(select=True)
        self.vb = self.plot.getPlotItem().getViewBox()
        self.vb.invertY(True)
        # the legend is one row above the view, never over the points it describes
        item = self.plot.getPlotItem()
        self.legend = pg.LegendItem(labelTextSize="9pt", colCount=1, verSpacing=-6, horSpacing=6)
        item.layout.removeItem(item.titleLabel)  # this plot has no title
        item.titleLabel.setVisible(False)
        item.layout.addItem(self.legend, 0, 1)
        item.layout.setAlignment(self.legend, Qt.AlignmentFlag.AlignLeft)
        item.layout.setRowFixedHeight(0, 20)
        self.legend.setMaximumHeight(20)
        # a narrow panel clips the legend's row rather than widening the plot past its view
        self.legend.setMinimumWidth(0)
        self.legend.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
        self.scatter = []
        self.errors = []
        for i in range(MAX_BANDS):
            colour, symbol = band_style(i)
            # one symbol, pen and brush per band (not per point): a star switch stays cheap
            s = SymbolPoints(symbol, 6, pen=pg.mkPen(colour, width=1), brush=pg.mkBrush(colour))
            e = pg.ErrorBarItem(pen=pg.mkPen(colour, width=1), beam=0)
            e.setVisible(False)
            self.plot.addItem(e)
            self.plot.addItem(s)
            self.scatter.append(s)
            self.errors.append(e)
        self.excluded = pg.ScatterPlotItem(
            size=7, symbol="x", pen=pg.mkPen(EXCLUDED_COLOUR, width=1), brush=None
        )
        self.plot.addItem(self.excluded)
        self.legend.addItem(self.excluded, "excluded")

        self.show_errors = QCheckBox("Errors")
        self.show_errors.setToolTip("Show error bars (E)")
        self.lasso_box = QCheckBox("Lasso")
        self.lasso_box.setToolTip("Select with a free-hand lasso instead of a rectangle")
        self.select_box = QCheckBox("Select")
        self.select_box.setToolTip(
            "Drag a rectangle (or a lasso) to exclude points (Shift+drag works too); "
            "hold Ctrl while releasing to restore them. (S)"
        )
        self.info = QLabel()
        self.info.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        bar = QHBoxLayout()
        heading = Heading("Light curve")
        bar.addWidget(heading, 1)
        bar.addWidget(self.select_box)
        bar.addWidget(self.lasso_box)
        bar.addWidget(self.show_errors)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(bar)
        layout.addWidget(self.plot, 1)
        layout.addWidget(self.info)

        self.show_errors.toggled.connect(self._toggle_errors)
        self.select_box.toggled.connect(self._toggle_select)
        self.vb.sigRectSelected.connect(self._rect_selected)
        self.vb.sigLassoSelected.connect(self.select_lasso)
        self.lasso_box.toggled.connect(lambda on: setattr(self.vb, "lasso", on))
        self.lc = None
        self.t0 = 0.0
        set_labels(self.plot, "Time (d)", "Magnitude (mag)")
        if desk is not None:
            desk.subscribe("star", lambda _id: self.set_lightcurve(desk.lc))
            desk.subscribe("lightcurve", lambda _id: self.set_lightcurve(desk.lc))
            desk.subscribe("ledger", self._ledger_shown)

    def _ledger_shown(self) -> None:
        writable = not self.desk.read_only
        self.select_box.setEnabled(writable)
        self.lasso_box.setEnabled(writable)
        if self.desk.ledger is None:
            self.set_lightcurve(None)

    # ------------------------------------------------------------- drawing
    def set_lightcurve(self, lc) -> None:
        self.lc = lc
        if lc is None:
            for s, e in zip(self.scatter, self.errors, strict=True):
                s.setData([], [])
                e.setVisible(False)
            self.excluded.setData([], [])
            self.info.setText("")
            return
        t = np.asarray(lc.time, dtype=float)
        finite = np.isfinite(t)
        self.t0 = float(np.floor(t[finite].min())) if finite.any() else 0.0
        x = t - self.t0
        good = lc.good
        bands = list(lc.bands)
        band = np.asarray(lc.band).astype(str)  # once, not per band (or per point)
        # bands with only excluded points still deserve a legend entry
        for b in np.unique(band).tolist():
            if b not in bands:
                bands.append(b)
        entries = []
        for i in range(MAX_BANDS):
            s, e = self.scatter[i], self.errors[i]
            if i < len(bands):
                sel = good & (band == bands[i])
                s.setData(x[sel], lc.mag[sel])
                if self.show_errors.isChecked() and lc.has_errors:
                    e.setData(x=x[sel], y=lc.mag[sel], height=2 * lc.mag_err[sel])
                    e.setVisible(True)
                else:
                    e.setVisible(False)
                entries.append((s.legend_sample, f"{bands[i]} ({int(sel.sum())})"))
            else:
                s.setData([], [])
                e.setVisible(False)
        bad = ~good & np.isfinite(x) & np.isfinite(lc.mag)
        self.excluded.setData(x[bad], lc.mag[bad])
        if bad.any():  # the line below the plot counts them too; no room wasted on "(0)"
            entries.append((self.excluded, f"excluded ({int(bad.sum())})"))
        self._set_legend(entries)
        set_labels(self.plot, f"Time − {self.t0:.0f} ({lc.time_scale}, d)", "Magnitude (mag)")
        self.info.setText(f"{lc.n_good} of {lc.n_points} points · {lc.baseline:.0f} d")
        self.info.setToolTip(
            f"{lc.star_id}: {lc.n_good} good of {lc.n_points} points, "
            f"baseline {lc.baseline:.1f} d, bands {', '.join(bands)}"
        )
        self._set_range(x, lc.mag, np.isfinite(x) & np.isfinite(lc.mag))

    def _set_legend(self, entries) -> None:
        """Legend rows; only their texts change when the next star has the same bands."""
        items = [item for item, _ in entries]
        if items == [sample.item for sample, _ in self.legend.items]:
            for (_, label), (_, text) in zip(self.legend.items, entries, strict=True):
                if label.text != text:
                    label.setText(text)
            return
        self.legend.clear()
        self.legend.setColumnCount(max(1, len(entries)))  # one row, no empty columns
        for item, text in entries:
            self.legend.addItem(item, text)

    def _set_range(self, x, mag, sel) -> None:
        if not sel.any():
            return
        # every point inside, excluded ones too: an outlier off-scale is a hidden decision
        self.vb.setRange(xRange=full_range(x[sel], 0.02), yRange=full_range(mag[sel]), padding=0)
        self.vb.disableAutoRange()

    def _toggle_errors(self, _on: bool) -> None:
        if self.lc is not None:
            rng = self.vb.viewRange()
            self.set_lightcurve(self.lc)
            self.vb.setRange(xRange=rng[0], yRange=rng[1], padding=0)

    def _toggle_select(self, on: bool) -> None:
        self.vb.select_mode = on

    # ----------------------------------------------------------- selection
    def points_in(self, rect: QRectF) -> np.ndarray:
        """Indices of the light curve's points inside a data rectangle."""
        if self.lc is None:
            return np.zeros(0, dtype=int)
        x = np.asarray(self.lc.time, dtype=float) - self.t0
        y = np.asarray(self.lc.mag, dtype=float)
        inside = (x >= rect.left()) & (x <= rect.right()) & (y >= rect.top()) & (y <= rect.bottom())
        return np.flatnonzero(inside)

    def select_lasso(self, vertices, restore: bool = False) -> None:
        """Ask to exclude (or restore) the points inside a lasso (data coordinates)."""
        if self.lc is None:
            return
        x = np.asarray(self.lc.time, dtype=float) - self.t0
        inside = points_in_polygon(x, np.asarray(self.lc.mag, dtype=float), vertices)
        idx = np.flatnonzero(inside)
        if idx.size:
            self.exclusionRequested.emit(idx, not restore)

    def _rect_selected(self, rect: QRectF, restore: bool) -> None:
        self.select_rect(rect, restore)

    def select_rect(self, rect: QRectF, restore: bool = False) -> None:
        """Ask to exclude (or restore) the points inside ``rect`` (data coordinates)."""
        idx = self.points_in(rect)
        if idx.size:
            self.exclusionRequested.emit(idx, not restore)
