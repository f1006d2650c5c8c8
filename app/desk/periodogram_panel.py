"""Periodogram: power against frequency or period, candidates marked."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QObject, Qt, QTimer, Signal
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QGraphicsItem,
    QHBoxLayout,
    QLabel,
    QSizePolicy,
    QVBoxLayout,
    QWidget,
)

from phasewise.core.folding import snap_to_peak

from .plots import Heading, make_plot, set_labels
from .style import MARKER_COLOUR, fmt_period

__all__ = ["PeriodogramPanel", "PeriodogramFeed", "METHODS"]

#: (core method name, menu text)
METHODS = (
    ("gls", "Generalized Lomb–Scargle"),
    ("mhgls", "Multi-harmonic periodogram"),
    ("pdm", "Phase dispersion minimisation"),
    ("ce", "Conditional entropy"),
)
MAX_LABELS = 8
#: A new star's periodogram starts this long after it is shown (held keys skip it).
PERIODOGRAM_DELAY_MS = 60
FAP_STYLES = ((0.1, "#999999"), (0.01, "#666666"), (0.001, "#333333"))


class PeriodogramPanel(QWidget):
    """The periodogram of the current star.

    Signals
    -------
    peakPicked(frequency)
        The user clicked near a peak; the frequency is the snapped maximum.
    methodChanged(method)
        The user chose another periodogram method.
    windowRequested(bool)
        The spectral window is wanted (compute it) or hidden.
    """

    peakPicked = Signal(float)
    methodChanged = Signal(str)
    windowRequested = Signal(bool)

    def __init__(self, desk=None, services=None, workers=None, parent=None) -> None:
        super().__init__(parent)
        self.plot = make_plot()
        self.item = self.plot.getPlotItem()
        self.vb = self.item.getViewBox()
        self.curve = pg.PlotDataItem(
            pen=pg.mkPen("#0072B2", width=1),
            clipToView=True,
            autoDownsample=True,
            downsampleMethod="peak",
        )
        self.window_curve = pg.PlotDataItem(
            pen=pg.mkPen(110, 110, 110, 200, width=1),
            clipToView=True,
            autoDownsample=True,
            downsampleMethod="peak",
        )
        self.window_curve.setVisible(False)
        self.item.addItem(self.window_curve)
        self.item.addItem(self.curve)
        # the curves stay put while the period marker moves: repaint them from a pixmap
        for item in (self.curve.curve, self.window_curve.curve):
            item.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        self.cand_points = pg.ScatterPlotItem(
            size=9, symbol="t", pen=pg.mkPen("#D55E00"), brush=pg.mkBrush("#D55E00")
        )
        self.item.addItem(self.cand_points)
        self.labels = []
        for _ in range(MAX_LABELS):
            text = pg.TextItem(color="#202020", anchor=(0.5, 1.2))
            text.setVisible(False)
            self.item.addItem(text, ignoreBounds=True)
            self.labels.append(text)
        self.fap_lines = []
        # the lines are named in the status line, not on the plot: labels on three
        # close lines overlapped each other and the candidates' numbers
        for _fap, colour in FAP_STYLES:
            line = pg.InfiniteLine(
                angle=0, movable=False, pen=pg.mkPen(colour, style=Qt.PenStyle.DotLine)
            )
            line.setVisible(False)
            self.item.addItem(line, ignoreBounds=True)
            self.fap_lines.append(line)
        self.marker = pg.InfiniteLine(angle=90, movable=False, pen=pg.mkPen(MARKER_COLOUR, width=2))
        self.item.addItem(self.marker, ignoreBounds=True)

        self.method_box = QComboBox()
        self.method_box.setSizeAdjustPolicy(
            QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon
        )
        self.method_box.setMinimumContentsLength(5)
        self.method_box.setToolTip("Periodogram method (recomputed in the background)")
        for key, text in METHODS:
            self.method_box.addItem(text, key)
        self.axis_box = QComboBox()
        self.axis_box.addItems(["Frequency", "Period"])
        self.axis_box.setSizeAdjustPolicy(
            QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon
        )
        self.axis_box.setMinimumContentsLength(5)
        self.axis_box.setToolTip("Power against frequency or period (F)")
        self.log_box = QCheckBox("Log")
        self.log_box.setToolTip("Logarithmic frequency/period axis")
        self.window_box = QCheckBox("Window")
        self.window_box.setToolTip(
            "Show the spectral window centred on the trial period: its side peaks are where "
            "aliases of that period fall (W)"
        )
        self.full_range = False  # False: zoomed on the candidates
        self.status = QLabel()
        self.status.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.candidate_list = QLabel()
        self.candidate_list.setWordWrap(True)
        self.candidate_list.setTextFormat(Qt.TextFormat.RichText)
        bar = QHBoxLayout()
        heading = Heading("Periodogram")
        bar.addWidget(heading, 1)
        bar.addWidget(self.method_box)
        bar.addWidget(self.axis_box)
        bar.addWidget(self.log_box)
        bar.addWidget(self.window_box)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(bar)
        layout.addWidget(self.plot, 1)
        layout.addWidget(self.candidate_list)
        layout.addWidget(self.status)

        self.view = None  # PeriodogramView
        self.window_power = None
        self.candidates: list[dict] = []
        self.frequency = None  # marked frequency
        self.method_box.currentIndexChanged.connect(
            lambda _i: self.methodChanged.emit(self.method_box.currentData())
        )
        self.axis_box.currentIndexChanged.connect(lambda _i: self._redraw(reset_range=True))
        self.log_box.toggled.connect(self._log_toggled)
        self.window_box.toggled.connect(self._window_toggled)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        self._update_labels()
        self.feed = PeriodogramFeed(self, desk, services, workers) if desk is not None else None

    def set_period_axis(self, on: bool) -> None:
        self.axis_box.setCurrentIndex(1 if on else 0)

    # ---------------------------------------------------------- coordinates
    @property
    def period_axis(self) -> bool:
        return self.axis_box.currentIndex() == 1

    def _x(self, frequency):
        """Display x of frequencies (period if toggled; log10 if log axis)."""
        f = np.asarray(frequency, dtype=float)
        with np.errstate(divide="ignore"):
            x = 1.0 / f if self.period_axis else f
            if self.log_box.isChecked():
                x = np.log10(x)
        return x

    def _frequency_at(self, x: float) -> float:
        if self.log_box.isChecked():
            x = 10.0**x
        return 1.0 / x if self.period_axis else x

    def _update_labels(self) -> None:
        power_label = "Power"
        if self.view is not None and self.view.method in ("pdm", "ce"):
            power_label = "Power (larger = better)"
        if self.period_axis:
            set_labels(self.plot, "Period (d)", power_label)
        else:
            set_labels(self.plot, "Frequency (cycles/d)", power_label)

    # ------------------------------------------------------------- drawing
    def set_computing(self, text: str = "computing…") -> None:
        self.status.setText(text)

    def clear(self) -> None:
        self.view = None
        self.window_power = None
        self.candidates = []
        self.curve.setData([], [])
        self.window_curve.setData([], [])
        self.cand_points.setData([], [])
        self.candidate_list.setText("")
        for t in self.labels:
            t.setVisible(False)
        for line in self.fap_lines:
            line.setVisible(False)

    def set_periodogram(self, view, candidates=()) -> None:
        """Show a :class:`~app.desk.services.PeriodogramView` and candidates."""
        self.view = view
        self.window_power = None
        self.candidates = list(candidates)
        index = self.method_box.findData(view.method)
        if index >= 0 and index != self.method_box.currentIndex():
            self.method_box.blockSignals(True)
            self.method_box.setCurrentIndex(index)
            self.method_box.blockSignals(False)
        faps = [f"{fap:g}" for fap, _level in view.fap_levels]
        self.status.setText(
            f"{len(view.frequency):,} frequencies, {len(self.candidates)} candidates"
            + (f" · dotted: FAP {', '.join(faps)} (low to high)" if faps else "")
            + " · Z: whole grid / candidates"
        )
        self._redraw(reset_range=True)
        if self.window_box.isChecked():
            self.windowRequested.emit(True)

    def set_window(self, power) -> None:
        self.window_power = None if power is None else np.asarray(power, dtype=float)
        self._redraw(reset_range=False)

    def set_frequency(self, frequency: float | None) -> None:
        self.frequency = frequency
        if frequency is None or not np.isfinite(frequency) or frequency <= 0:
            self.marker.setVisible(False)
            return
        self.marker.setVisible(True)
        self.marker.setValue(float(self._x(frequency)))
        if self.window_power is not None and self.window_box.isChecked():
            self._draw_window()

    def _redraw(self, reset_range: bool) -> None:
        self._update_labels()
        view = self.view
        if view is None:
            return
        f, p = view.frequency, view.power
        positive = f > 0
        f, p = f[positive], p[positive]
        # curves take linear x (pyqtgraph's log mode maps them and labels the axis
        # in decades); markers, labels and ranges are in view coordinates (self._x)
        lin = 1.0 / f if self.period_axis else f
        x = self._x(f)
        if self.period_axis:  # keep x increasing for clip-to-view
            x, lin, p_draw = x[::-1], lin[::-1], p[::-1]
        else:
            p_draw = p
        self.curve.setData(lin, p_draw)
        self._draw_window()
        cf = np.array([c["frequency"] for c in self.candidates], dtype=float)
        cp = np.array([c["power"] for c in self.candidates], dtype=float)
        self.cand_points.setData(self._x(cf), cp)
        listing, details = [], []
        for i, c in enumerate(self.candidates):
            marks = ", ".join(str(m) for m in (c.get("marks") or ()))
            listing.append(
                f"<b>{i + 1}</b>: {fmt_period(c['period'])} d"
                + (f" <i>({marks})</i>" if marks else "")
            )
            details.extend(f"{i + 1}: {d}" for d in _mark_text(c))
        self._place_labels()
        self.candidate_list.setText(" · ".join(listing) if listing else "no candidates")
        self.candidate_list.setToolTip("\n".join(details) or "no marks")
        levels = dict(view.fap_levels)
        for (fap, _colour), line in zip(FAP_STYLES, self.fap_lines, strict=True):
            if fap in levels and np.isfinite(levels[fap]):
                line.setValue(levels[fap])
                line.setVisible(True)
            else:
                line.setVisible(False)
        self.set_frequency(self.frequency)
        if reset_range and x.size:
            top = float(np.nanmax(p)) if p.size else 1.0
            self.vb.setRange(
                xRange=self._x_range(x),
                yRange=(min(0.0, float(np.nanmin(p))), top * 1.18),
                padding=0.02,
            )
            self.vb.disableAutoRange()
            self._place_labels()

    def _x_range(self, x) -> tuple[float, float]:
        """The whole grid, or (by default) the candidates and the trial period with room."""
        finite = x[np.isfinite(x)]
        lo, hi = float(finite.min()), float(finite.max())
        if self.full_range or not self.candidates:
            return lo, hi
        freqs = [c["frequency"] for c in self.candidates]
        if self.frequency:
            freqs.append(self.frequency)
        cx = self._x(np.asarray(freqs, dtype=float))
        cx = cx[np.isfinite(cx)]
        if cx.size == 0:
            return lo, hi
        c0, c1 = float(cx.min()), float(cx.max())
        # room for the peaks' flanks and the nearest aliases
        pad = max(0.25 * (c1 - c0), 0.05 * (hi - lo))
        return max(lo, c0 - pad), min(hi, c1 + pad)

    def toggle_full_range(self) -> None:
        """Switch between the candidates' zoom and the whole frequency grid."""
        self.full_range = not self.full_range
        self._redraw(reset_range=True)

    def _draw_window(self) -> None:
        """The spectral window shifted to the trial frequency (both sides), half-height.

        ``W(f - f0)`` is where a pure signal at ``f0`` leaks power: its side
        peaks are the aliases of ``f0``.  Drawn in frequency and in period alike.
        """
        view = self.view
        if view is None or self.window_power is None or not self.window_box.isChecked():
            self.window_curve.setVisible(False)
            return
        f, w = np.asarray(view.frequency, float), self.window_power
        f0 = self.frequency or (self.candidates[0]["frequency"] if self.candidates else None)
        if f0 is None or f.size != w.size:
            self.window_curve.setVisible(False)
            return
        fx = np.concatenate([f0 - f[::-1], f0 + f])
        wy = np.concatenate([w[::-1], w])
        keep = (fx > 0) & np.isfinite(wy)
        fx, wy = fx[keep], wy[keep]
        top = float(np.nanmax(view.power)) if view.power.size else 1.0
        wmax = float(np.nanmax(wy)) if wy.size else 1.0
        wy = wy * (0.5 * top / wmax if wmax > 0 else 1.0)
        if self.period_axis:  # keep x increasing for clip-to-view
            fx, wy = (1.0 / fx)[::-1], wy[::-1]
        self.window_curve.setData(fx, wy)
        self.window_curve.setVisible(True)

    def _place_labels(self) -> None:
        """Candidate numbers over their peaks, raised a line where they would overlap."""
        shown = self.candidates[: len(self.labels)]
        (x0, x1), (y0, y1) = self.vb.viewRange()
        width_px, height_px = max(self.vb.width(), 1.0), max(self.vb.height(), 1.0)
        placed: list[tuple[float, float]] = []  # label centres (pixels)
        for i, text in enumerate(self.labels):
            if i >= len(shown):
                text.setVisible(False)
                continue
            c = shown[i]
            x, power = float(self._x(c["frequency"])), float(c["power"])
            px = (x - x0) / (x1 - x0) * width_px if x1 > x0 else 0.0
            py = (y1 - power) / (y1 - y0) * height_px if y1 > y0 else 0.0
            text.setText(str(i + 1))
            box = text.boundingRect()  # pixels: the text item does not scale with the view
            gap_x, gap_y = box.width() + 2.0, box.height() + 1.0
            line = 0
            while any(
                abs(px - qx) < gap_x and abs(py - line * gap_y - qy) < gap_y for qx, qy in placed
            ):
                line += 1
            placed.append((px, py - line * gap_y))
            text.setAnchor((0.5, 1.2))
            text.setPos(x, power + line * gap_y * (y1 - y0) / height_px)
            text.setVisible(True)

    def _log_toggled(self, on: bool) -> None:
        self.item.setLogMode(x=on, y=False)
        self._redraw(reset_range=True)

    def _window_toggled(self, on: bool) -> None:
        if on and self.window_power is None:
            self.windowRequested.emit(True)
        self._redraw(reset_range=False)

    # --------------------------------------------------------------- input
    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton or self.view is None:
            return
        pos = ev.scenePos()
        if not self.vb.sceneBoundingRect().contains(pos):
            return
        x = self.vb.mapSceneToView(pos).x()
        self.pick_at(self._frequency_at(x))
        ev.accept()

    def pick_at(self, frequency: float) -> float | None:
        """Snap a frequency to the nearest peak's maximum and announce it."""
        if self.view is None or not np.isfinite(frequency):
            return None
        i = snap_to_peak(self.view.frequency, self.view.power, frequency)
        f = float(self.view.frequency[i])
        self.peakPicked.emit(f)
        return f


def _mark_text(candidate: dict) -> list[str]:
    """Short text of a candidate's marks (core writes one detail string per mark)."""
    marks = [str(m) for m in (candidate.get("marks") or ())]
    details = candidate.get("mark_details") or ()
    if isinstance(details, dict):  # tolerate a mapping mark -> detail
        details = [details.get(m, "") for m in marks]
    details = [str(d) for d in details]
    if len(details) == len(marks) and all(details):
        return details
    return marks


class PeriodogramFeed(QObject):
    """Computes the current star's periodogram in a worker, cached in the desk model.

    Listens to the desk model: a new star or new settings start a periodogram
    (a moment later, so stars skipped by a held key never start one); the
    trial period moves the marker; a click on a peak sets the trial period.
    """

    def __init__(self, panel: PeriodogramPanel, desk, services, workers) -> None:
        super().__init__(panel)
        self.panel, self.desk, self.services, self.workers = panel, desk, services, workers
        self.method: str | None = None  # chosen here; None: the analysis settings' own
        self.worker = None
        self.pending = None
        self.started_key = None  # the periodogram being computed
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(PERIODOGRAM_DELAY_MS)
        self.timer.timeout.connect(self._start)
        desk.subscribe("star", lambda _id: self.show())
        desk.subscribe("settings", self.show)
        desk.session.subscribe("period", lambda period, _source: self._mark(period))
        panel.peakPicked.connect(lambda f: desk.session.set_period(1.0 / f, "peak"))
        panel.methodChanged.connect(self._method_changed)
        panel.windowRequested.connect(self._compute_window)

    @property
    def busy(self) -> bool:
        return self.timer.isActive()

    def settings(self):
        pg_settings = self.services.periodogram_settings(self.desk.settings)
        if self.method and pg_settings.method != self.method:
            pg_settings = self.services.replace_periodogram(pg_settings, method=self.method)
        return pg_settings

    def _mark(self, period) -> None:
        self.panel.set_frequency(1.0 / period if period else None)

    def show(self) -> None:
        panel, desk, lc = self.panel, self.desk, self.desk.lc
        if lc is None or lc.too_few_points:
            panel.clear()
            panel.set_computing("no periodogram (too few points)" if lc is not None else "")
            return
        pg_settings = self.settings()
        key = (desk.star_id, repr(pg_settings))
        view = desk.periodogram(key)
        if view is not None:
            panel.set_periodogram(view, self._candidates_for(view))
            self._mark(desk.session.period)
            return
        running = self.worker is not None and not self.worker.done.is_set()
        if key == self.started_key and (self.busy or running):
            return  # already on its way (new settings that leave the periodogram alone)
        panel.clear()
        panel.set_computing("computing periodogram…")
        self.started_key = key
        if self.worker is not None:
            self.worker.cancel()  # the user moved on: skip a periodogram still queued
        self.pending = (key, desk.star_id, lc, pg_settings)
        self.timer.start()

    def _start(self) -> None:
        if self.pending is None:
            return
        key, star_id, lc, pg_settings = self.pending
        self.pending = None

        def done(view) -> None:
            self.desk.keep_periodogram(key, view)
            if self.desk.star_id == star_id:
                self.panel.set_periodogram(view, self._candidates_for(view))
                self._mark(self.desk.session.period)

        self.worker = self.workers.start(
            self.services.compute_periodogram,
            lc,
            pg_settings,
            on_result=done,
            on_error=lambda msg: self.panel.set_computing(f"error: {msg}"),
        )

    def _candidates_for(self, view) -> list:
        """The analysis' candidates for its own method, else those of this periodogram."""
        result = self.desk.result
        if view.method == result.get("method") and result.get("candidates"):
            return list(result["candidates"])
        return list(view.candidates)

    def _method_changed(self, method: str) -> None:
        self.method = method
        self.show()

    def _compute_window(self, _on: bool) -> None:
        view, lc, star_id = self.panel.view, self.desk.lc, self.desk.star_id
        if view is None or lc is None:
            return
        t, _m, _e = lc.arrays()

        def done(power) -> None:
            if self.desk.star_id == star_id:
                self.panel.set_window(power)

        self.workers.start(self.services.spectral_window, t, view.frequency, on_result=done)
