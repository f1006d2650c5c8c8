"""Folded curve: two cycles, points coloured by time, Fourier fit, residuals."""

from __future__ import annotations

import html
from dataclasses import replace

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QFont, QFontMetrics
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
from phasewise.core.folding import fold_points, phase_fold, two_cycles

from .plots import FastPoints, cache_axes, full_range
from .style import EXCLUDED_COLOUR, MODEL_COLOUR, TIME_BINS, fmt_period, time_colours

__all__ = ["FoldView", "FoldPanel"]

SET_ASIDE_COLOUR = "#D62728"
#: A nudged period is fitted once it rests this long (held keys move the points only).
FIT_DELAY_MS = 120


class FoldView(pg.GraphicsLayoutWidget):
    """One folded curve over phase 0–2 with its residuals below.

    Draws :class:`phasewise.core.folding.FoldModel` (the analysis's model at
    the trial period, from the desk model's ``fold_model``): points used by the fit
    coloured by time, points the analysis set aside as red open circles,
    points excluded by the user as grey crosses.  Items are created once and
    updated with ``setData``.
    """

    def __init__(self, desk, title: str = "", parent=None, workers=None) -> None:
        super().__init__(parent)
        self.desk = desk
        self.workers = workers  # a WorkerPool: fits off the GUI thread (None: in it)
        self._running = None  # the key of the fit running in a worker
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
        self._title_font = QFont()
        self._title_font.setPointSizeF(9)
        self.fold.setTitle(title, size="9pt")
        # a long title must not widen the plot beyond its view (it is clipped instead):
        # the label keeps a fixed height and stops asking for its text's width
        label = self.fold.titleLabel
        label.updateMin = lambda: None
        label.setMinimumWidth(0)
        label.setMinimumHeight(18)
        label.setMaximumHeight(18)
        self.title = title
        self.error_bars = pg.ErrorBarItem(pen=pg.mkPen("#b0b0b0", width=1), beam=0)
        self.error_bars.setVisible(False)
        self.fold.addItem(self.error_bars)
        self.bins = []
        for colour in time_colours(TIME_BINS):
            s = FastPoints(colour, size=4.5, square=True, repeat_x=1.0)
            self.fold.addItem(s)
            self.bins.append(s)
        self.set_aside = pg.ScatterPlotItem(
            size=8, symbol="o", pen=pg.mkPen(SET_ASIDE_COLOUR, width=1.5), brush=None
        )
        self.excluded = pg.ScatterPlotItem(
            size=7, symbol="x", pen=pg.mkPen(EXCLUDED_COLOUR, width=1), brush=None
        )
        self.fold.addItem(self.set_aside)
        self.fold.addItem(self.excluded)
        self.model_curve = pg.PlotCurveItem(pen=pg.mkPen(MODEL_COLOUR, width=2))
        self.fold.addItem(self.model_curve)
        self.resid_points = FastPoints("#444444", size=3.0, square=True, repeat_x=1.0)
        self.resid_set_aside = pg.ScatterPlotItem(
            size=6, symbol="o", pen=pg.mkPen(SET_ASIDE_COLOUR, width=1), brush=None
        )
        self.resid.addItem(self.resid_points)
        self.resid.addItem(self.resid_set_aside)
        self.zero = pg.InfiniteLine(angle=0, pos=0.0, pen=pg.mkPen(EXCLUDED_COLOUR))
        self.resid.addItem(self.zero, ignoreBounds=True)
        self.lc = None
        self.result: dict = {}
        self.band: str | None = None
        self.settings = None
        self.eclipsing = False
        self.show_errors = False
        self.model = None
        self.period = None
        self._range_key = None
        self._drawn = None
        self._pending = None
        self.fit_timer = QTimer(self)
        self.fit_timer.setSingleShot(True)
        self.fit_timer.setInterval(FIT_DELAY_MS)
        self.fit_timer.timeout.connect(self._fit_pending)

    # kept for callers that read these
    @property
    def epoch(self) -> float | None:
        return None if self.model is None else self.model.epoch

    @property
    def fit(self):
        return None if self.model is None or self.model.order is None else self.model

    def _set_title(self, text: str) -> None:
        """Show ``text`` above the fold, cut with "…" where the view is too narrow
        (the whole text stays in the tooltip)."""
        self._title_text = text
        self.fold.titleLabel.setToolTip(text)
        width = max(0, int(self.fold.vb.width()) - 4)
        metrics = QFontMetrics(self._title_font)
        shown = metrics.elidedText(text, Qt.TextElideMode.ElideRight, width) if width else text
        self.fold.setTitle(html.escape(shown), size="9pt")

    def resizeEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        super().resizeEvent(event)
        if getattr(self, "_title_text", None):
            self._set_title(self._title_text)

    def set_star(
        self, lc, band: str | None, settings=None, eclipsing: bool = False, result=None
    ) -> None:
        """New star, band, settings or epoch rule: the next ``set_period`` redraws.

        ``result`` is the stored analysis dict: its ``set_aside`` points and
        ``trend`` are the analysis's decisions the model keeps.
        """
        self.lc, self.band, self.settings = lc, band, settings
        self.result = result or {}
        self.eclipsing = bool(eclipsing)
        self.period = None
        self.model = None  # another star's (or band's) model is not this one's
        self._drawn = None
        self._range_key = None
        self.resid.setLabel(
            "bottom", "Phase (0 = primary minimum)" if eclipsing else "Phase (0 = maximum light)"
        )

    def set_errors_visible(self, on: bool) -> None:
        self.show_errors = bool(on)
        self._draw_errors()

    def clear_fold(self) -> None:
        """Nothing folded.  (Not ``clear``: pyqtgraph binds the layout's ``clear``, which
        removes the plots, to that name on every GraphicsLayoutWidget.)"""
        self.model = None
        self._drawn = None
        self._pending = None
        for s in self.bins:
            s.setData([], [])
        for item in (self.set_aside, self.excluded, self.resid_set_aside):
            item.setData([], [])
        self.model_curve.setData([], [])
        self.resid_points.setData([], [])
        self.error_bars.setVisible(False)
        self._set_title(self.title)

    def set_period(self, period: float | None, epoch_hint: float | None = None) -> None:
        """Fold at ``period`` and draw the core model there.

        A model not fitted yet is fitted once the period (or the star: J/K
        held) rests for :data:`FIT_DELAY_MS`: meanwhile the points are drawn at
        once (folded with the last model's epoch, or for a new star with the
        analysis's, ``core.folding.fold_points``) and the line waits; with
        ``workers`` the fit runs in one of them, and the line is drawn if it
        is still wanted when it arrives.
        """
        lc = self.lc
        self.fit_timer.stop()
        if lc is None or self.band is None or period is None or period <= 0:
            self.clear_fold()
            return
        key = (float(period), id(lc), self.band, id(self.settings), self.eclipsing)
        if self._drawn == key:
            return  # nothing moved (the other fold's period did)
        if self._running == key and self._pending == key:
            return  # being fitted already
        args = (lc, float(period), self.settings, self.band, self.eclipsing, self.result)
        if self.desk.cached_fold_model(*args) is None:
            if self.model is not None and self._drawn is not None and self._drawn[1:] == key[1:]:
                preview = _points_only(self.model, float(period))
            else:
                try:
                    preview = fold_points(lc, float(period), self.band, self.eclipsing, self.result)
                except PhasewiseError:
                    preview = None  # the fit says why
            if preview is not None:
                self._draw(preview)
            self._pending = key
            self.fit_timer.start()
            return
        self._fit(key, args)

    @property
    def busy(self) -> bool:
        """A model is waiting to be fitted, or being fitted."""
        return self.fit_timer.isActive() or self._running is not None

    def _fit_pending(self) -> None:
        key = self._pending
        if key is None or key[1] != id(self.lc):
            return
        args = (self.lc, key[0], self.settings, self.band, self.eclipsing, self.result)
        if self.workers is None:
            self._fit(key, args)
            return
        # a 50,000-point fit takes half a second: the window keeps taking keys meanwhile
        self._running = key
        self.workers.start(
            self.desk.fold_model,
            *args,
            on_result=lambda model, k=key: self._fitted(k, model),
            on_error=lambda message, k=key: self._fitted(k, None, message),
        )

    def _fitted(self, key, model, message: str = "") -> None:
        """A worker's fit arrived: drawn if it is still the one wanted."""
        if self._running == key:
            self._running = None
        if key != self._pending:
            return  # the period, star or band moved on meanwhile
        self._pending = None
        if model is None:
            self.clear_fold()
            self._set_title(f"{self.title}no fold: {message}")
            return
        self._drawn = key
        self.period = key[0]
        self.model = model
        self._draw(model)

    def _fit(self, key, args) -> None:
        self._pending = None
        try:
            model = self.desk.fold_model(*args)
        except PhasewiseError as exc:
            self.clear_fold()
            self._set_title(f"{self.title}no fold: {exc}")
            return
        self._drawn = key
        self.period = key[0]
        self.model = model
        self._draw(model)

    def _draw(self, model) -> None:
        phase = phase_fold(model.time, model.period, model.epoch)
        used = model.used
        p_used, m_used = phase[used], model.mag[used]
        edges = np.linspace(0, p_used.size, TIME_BINS + 1).astype(int)  # equal-count time bins
        for i, s in enumerate(self.bins):
            s.setData(p_used[edges[i] : edges[i + 1]], m_used[edges[i] : edges[i + 1]])
        aside, excl = model.set_aside, model.excluded
        self.set_aside.setData(*two_cycles(phase[aside], model.mag[aside]))
        self.excluded.setData(*two_cycles(phase[excl], model.mag[excl]))
        has_model = model.order is not None
        if has_model:
            self.model_curve.setData(model.phase_grid, model.model_grid)
            self.resid_points.setData(p_used, model.residual[used])
            self.resid_set_aside.setData(*two_cycles(phase[aside], model.residual[aside]))
        else:
            self.model_curve.setData([], [])
            self.resid_points.setData([], [])
            self.resid_set_aside.setData([], [])
        self._draw_errors(phase, model)
        text = f"{self.title}P = {fmt_period(model.period)} d"
        if model.rms is not None:
            text += f" · rms {model.rms:.3f} mag (order {model.order})"
        if aside.any():
            text += f" · {int(aside.sum())} set aside"
        if self.result.get("trend"):
            text += " · trend removed"
        self._set_title(text)
        self._set_range(model)

    def _draw_errors(self, phase=None, model=None) -> None:
        model = model if model is not None else self.model
        if not self.show_errors or model is None or model.time.size == 0:
            self.error_bars.setVisible(False)
            return
        if phase is None:
            phase = phase_fold(model.time, model.period, model.epoch)
        x, y, e = two_cycles(phase, model.mag, model.err)
        self.error_bars.setData(x=x, y=y, height=2 * e)
        self.error_bars.setVisible(True)

    def _set_range(self, model) -> None:
        """Cover every point (a new star); the residual panel follows every period."""
        key = (id(self.lc), self.band)
        if self._range_key != key:
            y = full_range(model.mag)
            if y is not None:
                self.fold.setRange(xRange=(0.0, 2.0), yRange=y, padding=0.01)
            self.fold.getViewBox().disableAutoRange()
            self._range_key = key
        r = full_range(model.residual)
        if r is not None:
            s = max(abs(r[0]), abs(r[1]), 1e-3)
            self.resid.setYRange(-s, s, padding=0)
        self.resid.getViewBox().disableAutoRange()


def _points_only(model, period: float):
    """``model``'s points folded at another period, with no line yet (being fitted)."""
    return replace(
        model,
        period=period,
        model_grid=np.empty(0),
        phase_grid=np.empty(0),
        residual=np.full(model.mag.shape, np.nan),
        rms=None,
        order=None,
    )


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

    def __init__(self, desk, parent=None, workers=None) -> None:
        super().__init__(parent)
        self.desk = desk
        self.main = FoldView(desk, "", workers=workers)
        self.alt = FoldView(desk, "Compare: ", workers=workers)
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
            "Red circles: set aside by the analysis; grey crosses: excluded by you. "
            "Line: the analysis model at this period."
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
        session = desk.session
        self.periodEntered.connect(lambda p: session.set_period(p, "entry"))
        self.action.connect(
            lambda key: {
                "halve": session.halve,
                "double": session.double,
                "prev": lambda: session.cycle_candidate(-1),
                "next": lambda: session.cycle_candidate(+1),
                "reset": session.reset_period,
                "use_alternative": desk.use_alternative,
            }[key]()
        )
        self.bandChanged.connect(lambda _band: self.redraw())
        desk.subscribe("star", self._star_shown)
        # the mask, the settings or the class (epoch kind) changed: same star, same period
        desk.subscribe("lightcurve", lambda _id: self.redraw())
        desk.subscribe("settings", self.redraw)
        desk.subscribe("verdict", lambda sid: self.redraw() if sid == desk.star_id else None)
        session.subscribe("period", lambda _p, _source: self.show_trial())

    # ------------------------------------------------------ the desk model
    def _star_shown(self, _star_id: str) -> None:
        bands = list(self.desk.lc.bands) if self.desk.lc is not None else []
        self.set_bands(bands, self.desk.primary_band())
        self.redraw()

    def redraw(self) -> None:
        """Fold the desk's current star in the chosen band at the trial period."""
        desk = self.desk
        band = self.band_box.currentText() or None
        if desk.lc is None or band is None or desk.settings is None:
            # the model is fitted with the ledger's own settings: it waits for them (and
            # for the analysis modules, which load in the background after the first star)
            self.set_star(None, None)
            self.show_trial()
            self.main._set_title("loading the analysis…" if desk.lc is not None else "")
            return
        self.set_star(desk.lc, band, desk.settings, desk.eclipsing(), desk.result)
        self.show_trial()

    def show_trial(self) -> None:
        desk = self.desk
        self.show_period(desk.session.period, desk.session.step(), desk.result.get("epoch_max"))
        self.show_alternative(desk.alternative_period())

    def set_bands(self, bands, current: str | None) -> None:
        self.band_box.blockSignals(True)
        self.band_box.clear()
        self.band_box.addItems(list(bands))
        if current in bands:
            self.band_box.setCurrentText(current)
        self.band_box.blockSignals(False)

    def set_star(self, lc, band, settings=None, eclipsing: bool = False, result=None) -> None:
        self.main.set_star(lc, band, settings, eclipsing, result)
        self.alt.set_star(lc, band, settings, eclipsing, result)

    def set_errors_visible(self, on: bool) -> None:
        self.main.set_errors_visible(on)
        self.alt.set_errors_visible(on)

    @property
    def busy(self) -> bool:
        """A fold waits to fit its model (the period is still moving)."""
        return self.main.busy or self.alt.busy

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
