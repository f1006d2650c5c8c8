"""Folded curve: two cycles, points coloured by time, Fourier fit, residuals."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QHBoxLayout,
    QLabel,
    QPushButton,
    QSizePolicy,
    QSplitter,
    QVBoxLayout,
    QWidget,
)

from phasewise.core.errors import PhasewiseError
from phasewise.core.folding import phase_fold, phase_grid_times

from .plots import FastPoints, cache_axes
from .style import EXCLUDED_COLOUR, MODEL_COLOUR, TIME_BINS, fmt_period, time_colours

__all__ = ["FoldView", "FoldPanel"]

MODEL_POINTS = 400
#: Above this many points the fit and residuals of a nudge use a fixed sample
#: of the points (all points are still drawn), so a redraw stays quick.
MAX_FIT_POINTS = 8000


class FoldView(pg.GraphicsLayoutWidget):
    """One folded curve over phase 0–2 with its residuals below.

    Keeps a fixed set of items (one scatter per time bin, the model curve,
    the residual scatter) and only calls ``setData`` when the period moves.
    """

    def __init__(self, services, title: str = "", parent=None) -> None:
        super().__init__(parent)
        self.services = services
        self.ci.layout.setSpacing(2)
        self.ci.setContentsMargins(2, 2, 6, 2)
        self.fold = self.addPlot(row=0, col=0)
        self.resid = self.addPlot(row=1, col=0)
        self.ci.layout.setRowStretchFactor(0, 3)
        self.ci.layout.setRowStretchFactor(1, 1)
        for p in (self.fold, self.resid):
            p.showGrid(x=True, y=True, alpha=0.15)
            p.setMenuEnabled(False)
            for name in ("left", "bottom"):
                p.getAxis(name).enableAutoSIPrefix(False)
            p.getAxis("left").setWidth(52)
        self.resid.setXLink(self.fold)
        cache_axes(self.fold)
        cache_axes(self.resid)
        self.fold.getViewBox().invertY(True)
        self.resid.getViewBox().invertY(True)
        self.fold.setLabel("left", "Magnitude (mag)")
        self.resid.setLabel("left", "O − C (mag)")
        self.resid.setLabel("bottom", "Phase (0 = maximum light)")
        self.fold.hideAxis("bottom")
        self.fold.setTitle(title, size="9pt")
        # a long title must not widen the plot beyond its view (it is clipped instead):
        # the label keeps a fixed height and stops asking for its text's width
        label = self.fold.titleLabel
        label.updateMin = lambda: None
        label.setMinimumWidth(0)
        label.setMinimumHeight(18)
        label.setMaximumHeight(18)
        self.title = title
        self.bins = []
        for colour in time_colours(TIME_BINS):
            s = FastPoints(colour, size=4.5, square=True, repeat_x=1.0)
            self.fold.addItem(s)
            self.bins.append(s)
        self.model_curve = pg.PlotCurveItem(pen=pg.mkPen(MODEL_COLOUR, width=2))
        self.fold.addItem(self.model_curve)
        self.resid_points = FastPoints("#444444", size=3.0, square=True, repeat_x=1.0)
        self.resid.addItem(self.resid_points)
        self.zero = pg.InfiniteLine(angle=0, pos=0.0, pen=pg.mkPen(EXCLUDED_COLOUR))
        self.resid.addItem(self.zero, ignoreBounds=True)
        self.t = self.m = self.e = None
        self.slices: list[slice] = []
        self.sample = slice(None)
        self.order = 4
        self.form = "sine"
        self.period = None
        self.epoch = None
        self.fit = None
        self._range_set = False
        self._drawn = None

    def _set_title(self, text: str) -> None:
        self.fold.setTitle(text, size="9pt")

    def set_data(self, time, mag, err, order: int = 4, form: str = "sine") -> None:
        """New points (one band): sort by time bin once, so a nudge only folds."""
        t = np.asarray(time, dtype=float)
        keep = np.isfinite(t) & np.isfinite(mag)
        t, m, e = t[keep], np.asarray(mag, float)[keep], np.asarray(err, float)[keep]
        order_idx = np.argsort(t, kind="stable")
        self.t, self.m, self.e = t[order_idx], m[order_idx], e[order_idx]
        self._drawn = None
        n = self.t.size
        edges = np.linspace(0, n, TIME_BINS + 1).astype(int)  # equal-count time bins
        self.slices = [slice(edges[i], edges[i + 1]) for i in range(TIME_BINS)]
        self.order = max(1, int(order or 4))
        self.form = form or "sine"
        self.period = None
        self._range_set = False
        self._drawn = None
        if n > MAX_FIT_POINTS:
            rng = np.random.default_rng(n)  # the same sample at every nudge
            self.sample = np.sort(rng.choice(n, MAX_FIT_POINTS, replace=False))
        else:
            self.sample = slice(None)

    def clear(self) -> None:
        self.t = None
        self._drawn = None
        for s in self.bins:
            s.setData([], [])
        self.model_curve.setData([], [])
        self.resid_points.setData([], [])
        self._set_title(self.title)

    def set_period(self, period: float | None, epoch_hint: float | None = None) -> None:
        """Fold at ``period``; fit the Fourier series there and draw."""
        if self.t is None or self.t.size == 0 or period is None or period <= 0:
            self.clear()
            return
        if self._drawn == (float(period), id(self.t)):
            return  # nothing moved (the other fold's period did)
        self._drawn = (float(period), id(self.t))
        self.period = float(period)
        self.fit = None
        ts, ms, es = self.t[self.sample], self.m[self.sample], self.e[self.sample]
        try:
            self.fit = self.services.fit_fourier(
                ts, ms, es, 1.0 / self.period, self.order, form=self.form
            )
            epoch = float(self.fit.epoch_max)
        except (PhasewiseError, np.linalg.LinAlgError, ValueError):
            # too few points for the order, a singular fit: show the fold without a model
            epoch = epoch_hint if epoch_hint is not None else float(self.t[0])
        self.epoch = epoch
        phase = phase_fold(self.t, self.period, epoch)
        for s, sl in zip(self.bins, self.slices, strict=True):
            s.setData(phase[sl], self.m[sl])  # drawn again at phase + 1 by the item
        if self.fit is not None:
            grid_phase, grid_t = phase_grid_times(self.period, epoch, MODEL_POINTS)
            self.model_curve.setData(grid_phase, np.asarray(self.fit.model(grid_t)))
            resid = ms - np.asarray(self.fit.model(ts))
            self.resid_points.setData(phase[self.sample], resid)
        else:
            self.model_curve.setData([], [])
            self.resid_points.setData([], [])
        rms = ""
        if self.fit is not None:
            rms = f" · rms {float(self.fit.residual_std):.3f} mag"
            if isinstance(self.sample, np.ndarray):
                rms += f" (fit on {self.sample.size:,} of {self.t.size:,} points)"
        self._set_title(f"{self.title}P = {fmt_period(self.period)} d{rms}")
        if not self._range_set:
            self._set_range()

    def _set_range(self) -> None:
        lo, hi = np.nanpercentile(self.m, [0.5, 99.5]) if self.m.size else (0, 1)
        pad = 0.08 * (hi - lo if hi > lo else 1.0)
        self.fold.setRange(xRange=(0.0, 2.0), yRange=(lo - pad, hi + pad), padding=0.01)
        self.fold.getViewBox().disableAutoRange()
        if self.fit is not None:
            r = self.m[self.sample] - np.asarray(self.fit.model(self.t[self.sample]))
            s = float(np.nanpercentile(np.abs(r), 99.5)) if r.size else 0.1
            s = s if s > 0 else 0.1
            self.resid.setYRange(-1.15 * s, 1.15 * s, padding=0)
        self.resid.getViewBox().disableAutoRange()
        self._range_set = True


class FoldPanel(QWidget):
    """The folded curve at the trial period, and a second fold beside it.

    Signals
    -------
    periodEntered(float)
        The user typed a period.
    action(str)
        A button was pressed: ``"halve"``, ``"double"``, ``"prev"``,
        ``"next"``, ``"reset"``, ``"use_alternative"``.
    bandChanged(str)
    """

    periodEntered = Signal(float)
    action = Signal(str)
    bandChanged = Signal(str)

    def __init__(self, services, parent=None) -> None:
        super().__init__(parent)
        self.main = FoldView(services, "")
        self.alt = FoldView(services, "Compare: ")
        self.spin = QDoubleSpinBox()
        self.spin.setDecimals(8)
        self.spin.setRange(1e-4, 1e5)
        self.spin.setKeyboardTracking(False)
        self.spin.setSuffix(" d")
        self.spin.setToolTip("Trial period in days; arrows nudge it")
        self.spin.setMinimumWidth(130)
        self.band_box = QComboBox()
        self.band_box.setToolTip("Band shown in the folds")
        self.step_label = QLabel()
        self.alt_label = QLabel()
        buttons = []
        for key, text, tip in (
            ("halve", "½ P", "Halve the period"),
            ("double", "2 P", "Double the period"),
            ("prev", "◀ Cand.", "Previous candidate"),
            ("next", "Cand. ▶", "Next candidate"),
            ("reset", "Reset", "Back to the analysed period"),
            ("use_alternative", "Use alternative", "Take the second fold's period"),
        ):
            b = QPushButton(text)
            b.setToolTip(tip)
            b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            b.clicked.connect(lambda _c=False, k=key: self.action.emit(k))
            buttons.append(b)
        bar = QHBoxLayout()
        bar.addWidget(QLabel("<b>Folded curve</b>  Period:"))
        bar.addWidget(self.spin)
        bar.addWidget(self.step_label)
        bar.addWidget(QLabel("Band:"))
        bar.addWidget(self.band_box)
        bar.addStretch(1)
        buttons_row = QHBoxLayout()
        for b in buttons:
            buttons_row.addWidget(b)
        buttons_row.addStretch(1)
        self.legend_text = (
            "Points coloured by time of observation: dark purple = earliest, yellow = latest. "
            "Line: Fourier fit."
        )
        self.legend = QLabel(self.legend_text)
        self.legend.setStyleSheet("color: #444;")
        self.legend.setWordWrap(True)
        self.legend.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.splitter = QSplitter(Qt.Orientation.Horizontal)
        self.splitter.addWidget(self.main)
        self.splitter.addWidget(self.alt)
        self.splitter.setSizes([600, 400])
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(bar)
        layout.addLayout(buttons_row)
        layout.addWidget(self.splitter, 1)
        layout.addWidget(self.legend)
        self.spin.valueChanged.connect(self._spin_changed)
        self.band_box.currentIndexChanged.connect(
            lambda _i: self.bandChanged.emit(self.band_box.currentText())
        )
        self._updating = False

    def set_bands(self, bands, current: str | None) -> None:
        self.band_box.blockSignals(True)
        self.band_box.clear()
        self.band_box.addItems(list(bands))
        if current in bands:
            self.band_box.setCurrentText(current)
        self.band_box.blockSignals(False)

    def set_data(self, time, mag, err, order=4, form="sine") -> None:
        self.main.set_data(time, mag, err, order, form)
        self.alt.set_data(time, mag, err, order, form)

    def show_period(self, period: float | None, step: float, epoch_hint=None) -> None:
        self._updating = True
        if period:
            self.spin.setSingleStep(step if step > 0 else period * 1e-4)
            self.spin.setValue(period)
        self._updating = False
        self.step_label.setText(f"step {step:.2e} d" if step else "")
        self.main.set_period(period, epoch_hint)

    def show_alternative(self, period: float | None) -> None:
        self.alt.set_period(period)

    def _spin_changed(self, value: float) -> None:
        if not self._updating:
            self.periodEntered.emit(float(value))
