"""The population view: every star of the ledger in the field's diagnostic diagrams.

Diagrams are computed by :mod:`core.diagrams`, the field summary by
:func:`core.physics.population_summary`; this widget only draws them and
turns clicks and rectangles into signals the desk connects to its star list.

Signals
-------
star_selected(str)
    A point was clicked: open that star.
stars_brushed(list)
    A rectangle was drawn on a diagram: select these stars in the star list
    (an empty list clears the selection).
outliers_changed(dict)
    ``{star_id: reason}`` of the stars the outlier rule flags, after each
    recomputation, for the star list's flags column.
summary_updated()
    The field summary (computed in a worker thread: it derives every star's
    physics) is shown; ``summary_ready`` is True.

Slots the desk calls
--------------------
``set_ledger(ledger)`` / ``refresh()`` / ``update_stars(ids)``, ``set_current_star(star_id)``,
``set_visible_stars(ids or None)`` (the list's filters),
``set_selected_stars(ids)`` (the list's selection).
"""

from __future__ import annotations

from collections.abc import Collection, Iterable, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from phasewise.core import diagrams as dg
from phasewise.core.errors import PhasewiseError

from .plot import DiagramPlot
from .style import class_style, symbol_glyph
from .summary import SummaryPanel

__all__ = ["PopulationView", "CAUTION", "BACKGROUND_READ_STARS"]

CAUTION = (
    "Suggestions and distances come from empirical relations with known scatter and "
    "calibration ranges; the astronomer decides."
)

#: Ledgers of more stars than this are read in a worker thread (about 0.1 s
#: per thousand stars: smaller ones are read at once).
BACKGROUND_READ_STARS = 5000

_GRID = (
    ("period_amplitude", 0, 0),
    ("phi31_logp", 0, 1),
    ("r21_logp", 0, 2),
    ("period_ratio", 1, 0),
    ("period_luminosity", 1, 1),
    ("colour_magnitude", 1, 2),
)


def _stored_physics(ledger: Any) -> dict:
    """The physics settings of the ledger's analysis settings, if it has any."""
    if ledger is None:
        return {}
    try:
        current = ledger.analysis_settings()
    except Exception:  # noqa: BLE001 - an unreadable setting must not stop the view
        return {}
    if not current:
        return {}
    physics = (current[0] or {}).get("physics")
    return dict(physics) if isinstance(physics, dict) else {}


class _SummaryRelay(QtCore.QObject):
    """Carries a finished summary from the worker thread to the GUI thread."""

    done = QtCore.Signal(int, object)
    failed = QtCore.Signal(int, str)


class _SummaryJob(QtCore.QRunnable):
    """``core.diagrams.field_state`` off the GUI thread (it derives every star's physics)."""

    def __init__(self, generation: int, points: Any, settings: dict, relay: _SummaryRelay):
        super().__init__()
        self.generation = generation
        self.points = points
        self.settings = settings
        self.relay = relay

    def run(self) -> None:
        try:
            state = dg.field_state(self.points, **self.settings)
        except PhasewiseError as exc:
            self.relay.failed.emit(self.generation, str(exc))
        except Exception as exc:  # noqa: BLE001 - shown in the panel, never a silent worker death
            self.relay.failed.emit(self.generation, f"{type(exc).__name__}: {exc}")
        else:
            self.relay.done.emit(self.generation, state)


class _ReadRelay(QtCore.QObject):
    """Carries the progress and the points of a ledger read to the GUI thread."""

    progress = QtCore.Signal(int, int, int)
    done = QtCore.Signal(int, object)
    failed = QtCore.Signal(int, str)


class _ReadJob(QtCore.QRunnable):
    """``core.diagrams.point_table`` off the GUI thread (seconds on a survey's ledger)."""

    def __init__(self, generation: int, ledger: Any, relay: _ReadRelay):
        super().__init__()
        self.generation = generation
        self.ledger = ledger
        self.relay = relay

    def run(self) -> None:
        def progress(done: int, total: int) -> None:
            self.relay.progress.emit(self.generation, done, total)

        try:
            table = dg.point_table(self.ledger, progress=progress)
        except Exception as exc:  # noqa: BLE001 - shown in the view, never a silent worker death
            self.relay.failed.emit(self.generation, f"{type(exc).__name__}: {exc}")
        else:
            self.relay.done.emit(self.generation, table)


class PopulationView(QtWidgets.QWidget):
    """Diagrams of all stars, linked to the star list, with the field summary beside them.

    Parameters
    ----------
    ledger : core.ledger.Ledger, optional
        Read with :func:`core.diagrams.point_table` when the view is shown
        (at once if it is visible); call :meth:`update_stars` or
        :meth:`refresh` after verdicts change.
    outlier_rule : core.diagrams.OutlierRule, optional
    """

    star_selected = QtCore.Signal(str)
    stars_brushed = QtCore.Signal(list)
    outliers_changed = QtCore.Signal(dict)
    summary_updated = QtCore.Signal()

    def __init__(
        self,
        ledger: Any = None,
        parent: QtWidgets.QWidget | None = None,
        *,
        outlier_rule: dg.OutlierRule | None = None,
    ) -> None:
        super().__init__(parent)
        self.setObjectName("population_view")
        self.ledger = ledger
        self.outlier_rule = outlier_rule or dg.OutlierRule()
        self.table = dg.PointTable.from_points(())
        self.diagrams: dict[str, dg.Diagram] = {}
        self.outliers: tuple[dg.OutlierFlag, ...] = ()
        self.field: dg.FieldState | None = None
        self._current: str | None = None
        self._visible: set[str] | None = None
        self._selected: set[str] = set()
        self._updating = False
        self._relation_chosen = False  # the person picked a P–L relation (or none)
        self._field_points: dg.PointTable | None = None
        self._field_settings: dict | None = None
        self._physics_settings: dict = {}
        self._stale = False  # the ledger changed while the view was hidden
        self._job_points: dict[int, tuple] = {}
        self._summary_generation = 0
        self._summary_done = 0
        self._pool = QtCore.QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self._read_pool = QtCore.QThreadPool(self)
        self._read_pool.setMaxThreadCount(1)
        # no Qt parent: a job still running when the view goes keeps its relay alive
        self._relay = _SummaryRelay()
        self._relay.done.connect(self._on_summary)
        self._relay.failed.connect(self._on_summary_failed)
        self._read_generation = 0
        self._reading = False
        self._changed_while_reading: set[str] = set()
        self._read_relay = _ReadRelay()
        self._read_relay.progress.connect(self._on_read_progress)
        self._read_relay.done.connect(self._on_read)
        self._read_relay.failed.connect(self._on_read_failed)

        self.plots: dict[str, DiagramPlot] = {}
        self._build()
        if ledger is not None:
            self.set_ledger(ledger)

    # ------------------------------------------------------------------ layout
    def _build(self) -> None:
        bar = QtWidgets.QHBoxLayout()
        bar.setContentsMargins(4, 2, 4, 2)
        self.band_box = QtWidgets.QComboBox(toolTip="Band of the period–amplitude and P–L diagrams")
        self.blue_box = QtWidgets.QComboBox(toolTip="Bluer band of the colour")
        self.red_box = QtWidgets.QComboBox(toolTip="Redder band of the colour")
        self.relation_box = QtWidgets.QComboBox(
            toolTip="Period–luminosity relation drawn at the fitted distance modulus"
        )
        # long citations must not widen the toolbar beyond a narrow dock
        self.relation_box.setSizeAdjustPolicy(
            QtWidgets.QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon
        )
        self.relation_box.setMinimumContentsLength(22)
        self.relation_box.view().setMinimumWidth(420)
        self.brush_button = QtWidgets.QToolButton(
            text="Select region",
            checkable=True,
            toolTip="Drag a rectangle on a diagram to select its stars in the list "
            "(Shift+drag works in any mode; Esc clears)",
        )
        self.reset_button = QtWidgets.QToolButton(text="Reset zoom")
        self.export_button = QtWidgets.QToolButton(
            text="Export…", popupMode=QtWidgets.QToolButton.ToolButtonPopupMode.InstantPopup
        )
        menu = QtWidgets.QMenu(self.export_button)
        for key, title in dg.DIAGRAMS.items():
            menu.addAction(f"{title} as PNG or SVG…", lambda k=key: self._export_dialog(k))
        menu.addSeparator()
        menu.addAction("All diagrams (PNG and SVG) to a folder…", self._export_all_dialog)
        self.export_button.setMenu(menu)
        for label, widget in (
            ("Band", self.band_box),
            ("Colour", self.blue_box),
            ("−", self.red_box),
            ("P–L relation", self.relation_box),
        ):
            bar.addWidget(QtWidgets.QLabel(label))
            bar.addWidget(widget)
        bar.addStretch(1)
        for widget in (self.brush_button, self.reset_button, self.export_button):
            bar.addWidget(widget)

        self.progress_label = QtWidgets.QLabel()
        self.progress_label.setContentsMargins(6, 0, 6, 0)
        self.progress_label.setVisible(False)
        self.legend_label = QtWidgets.QLabel(textFormat=QtCore.Qt.TextFormat.RichText)
        self.legend_label.setWordWrap(True)
        self.legend_label.setContentsMargins(6, 0, 6, 0)

        grid_host = QtWidgets.QWidget()
        grid = QtWidgets.QGridLayout(grid_host)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.setSpacing(4)
        for key, row, col in _GRID:
            plot = DiagramPlot()
            plot.setObjectName(f"diagram_{key}")
            plot.setMinimumSize(220, 200)
            plot.star_clicked.connect(self._on_star_clicked)
            plot.brushed.connect(self._on_brushed)
            self.plots[key] = plot
            grid.addWidget(plot, row, col)

        left = QtWidgets.QWidget()
        left_layout = QtWidgets.QVBoxLayout(left)
        left_layout.setContentsMargins(0, 0, 0, 0)
        left_layout.addLayout(bar)
        left_layout.addWidget(self.progress_label)
        left_layout.addWidget(self.legend_label)
        left_layout.addWidget(grid_host, 1)

        self.summary_panel = SummaryPanel(caution=CAUTION)
        self.summary_panel.extinction_changed.connect(self._on_extinction)

        self.splitter = QtWidgets.QSplitter(QtCore.Qt.Orientation.Horizontal)
        self.splitter.addWidget(left)
        self.splitter.addWidget(self.summary_panel)
        self.splitter.setStretchFactor(0, 4)
        self.splitter.setStretchFactor(1, 1)
        self.splitter.setSizes([1180, 420])
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.splitter)

        self.band_box.currentTextChanged.connect(self._on_bands)
        self.blue_box.currentTextChanged.connect(self._on_bands)
        self.red_box.currentTextChanged.connect(self._on_bands)
        self.relation_box.currentIndexChanged.connect(self._on_bands)
        self.brush_button.toggled.connect(self._on_brush_mode)
        self.reset_button.clicked.connect(self.reset_zoom)
        clear = QtGui.QShortcut(QtGui.QKeySequence(QtCore.Qt.Key.Key_Escape), self)
        clear.setContext(QtCore.Qt.ShortcutContext.WidgetWithChildrenShortcut)
        clear.activated.connect(lambda: self._on_brushed([]))

    # ---------------------------------------------------------------- data in
    def set_ledger(self, ledger: Any) -> None:
        """Show the stars of another ledger (the diagrams fit the new stars).

        The extinction and the other physics settings start from those the
        ledger's analysis used.
        """
        self.ledger = ledger
        self.table = dg.PointTable.from_points(())
        self._read_generation += 1  # a read of the previous ledger is dropped
        self._reading = False
        self.progress_label.setVisible(False)
        self._physics_settings = _stored_physics(ledger)
        ebv = self._physics_settings.get("ebv")
        if isinstance(ebv, (int, float)):
            blocker = QtCore.QSignalBlocker(self.summary_panel.ebv_box)
            self.summary_panel.set_extinction(float(ebv))
            del blocker
        # reading every star's result takes seconds on a large ledger: a hidden
        # view (a closed dock) reads it when it is first shown
        self._stale = True
        if self.isVisible():
            self.refresh()

    def showEvent(self, event: QtGui.QShowEvent) -> None:  # noqa: N802 (Qt naming)
        super().showEvent(event)
        if self._stale and self.ledger is not None:
            self.refresh()

    def refresh(self) -> None:
        """Re-read the ledger (after verdicts or analyses changed) and redraw.

        A ledger of more than :data:`BACKGROUND_READ_STARS` stars is read in a
        worker thread, its progress shown above the diagrams; the zoom is kept
        once stars are shown.
        """
        if self.ledger is None:
            return
        self._stale = False
        self._read_generation += 1
        self._changed_while_reading.clear()
        if self.ledger.n_stars <= BACKGROUND_READ_STARS:
            self._reading = False
            self.set_points(dg.point_table(self.ledger), auto_range=not len(self.table))
            return
        self._reading = True
        self.progress_label.setText("Reading the stars of the ledger…")
        self.progress_label.setVisible(True)
        self._read_pool.start(_ReadJob(self._read_generation, self.ledger, self._read_relay))

    def _on_read_progress(self, generation: int, done: int, total: int) -> None:
        if generation == self._read_generation and self._reading:
            self.progress_label.setText(f"Reading the stars of the ledger: {done:,} of {total:,}…")

    def _on_read(self, generation: int, points: object) -> None:
        if generation != self._read_generation:
            return  # a newer read is under way, or the ledger changed
        self._reading = False
        self.progress_label.setVisible(False)
        self.set_points(points, auto_range=not len(self.table))
        changed, self._changed_while_reading = self._changed_while_reading, set()
        if changed:
            self.update_stars(changed)

    def _on_read_failed(self, generation: int, message: str) -> None:
        if generation == self._read_generation:
            self._reading = False
            self.progress_label.setText(f"The stars could not be read: {message}")

    def is_reading(self) -> bool:
        """True while the ledger is being read in the background."""
        return self._reading

    def update_stars(self, star_ids: Iterable[str]) -> None:
        """Re-read these stars from the ledger (after their verdicts changed) and redraw."""
        if self.ledger is None or self._stale:
            return  # all stars are read when the view is next shown
        if self._reading:
            self._changed_while_reading.update(str(s) for s in star_ids)
            return  # read again when the whole read has arrived
        fresh = [
            dg.star_point(self.ledger, str(s))
            for s in set(star_ids)
            if self.table.row_of(str(s)) is not None
        ]
        if fresh:
            self.set_points(self.table.with_points(fresh), auto_range=False)

    @property
    def points(self) -> list[dg.StarPoint]:
        """The stars shown, a :class:`core.diagrams.StarPoint` each (made on each call)."""
        return self.table.points()

    def set_points(
        self, points: dg.PointTable | Sequence[dg.StarPoint], *, auto_range: bool = True
    ) -> None:
        """Show these stars (the ledger's table, or any list of points)."""
        self.table = dg.as_table(points)
        self._fill_band_boxes()
        self._recompute(auto_range=auto_range)

    def set_current_star(self, star_id: str | None) -> None:
        """Ring the current star in every diagram."""
        self._current = None if star_id is None else str(star_id)
        for plot in self.plots.values():
            plot.set_current(self._current)

    def set_visible_stars(self, star_ids: Collection[str] | None) -> None:
        """Apply the star list's filters: draw only these stars (None: all)."""
        self._visible = None if star_ids is None else {str(s) for s in star_ids}
        for plot in self.plots.values():
            plot.set_visible(self._visible)
            plot.auto_range()  # the ranges follow the filter: no stale, empty frame
        self._update_legend()

    def set_selected_stars(self, star_ids: Iterable[str]) -> None:
        """Mark the star list's selection in every diagram (emits nothing)."""
        self._selected = {str(s) for s in star_ids}
        for plot in self.plots.values():
            plot.set_selected(self._selected)

    def selected_stars(self) -> set[str]:
        return set(self._selected)

    def extinction(self) -> float:
        """The colour excess E(B−V) assumed for the field [mag]."""
        return self.summary_panel.extinction()

    def set_extinction(self, ebv: float) -> None:
        """Set E(B−V) and recompute the summary and the guide lines."""
        self.summary_panel.set_extinction(ebv)

    def outlier_reasons(self) -> dict[str, str]:
        """``{star_id: reason}`` for every star the outlier rule flags."""
        reasons: dict[str, list[str]] = {}
        for flag in self.outliers:
            reasons.setdefault(flag.star_id, []).append(flag.reason())
        return {sid: "; ".join(texts) for sid, texts in reasons.items()}

    # ----------------------------------------------------------------- export
    def export_diagram(self, key: str, path: str | Path, width_px: int | None = None) -> Path:
        """Write one diagram as PNG or SVG (chosen by the suffix)."""
        plot = self.plots[key]
        return plot.export(path) if width_px is None else plot.export(path, width_px)

    def export_all(
        self,
        folder: str | Path,
        formats: Sequence[str] = ("png", "svg"),
        width_px: int | None = None,
    ) -> list[Path]:
        """Write every diagram in each format to ``folder``; returns the files written."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        written = []
        for key in self.plots:
            for fmt in formats:
                written.append(self.export_diagram(key, folder / f"{key}.{fmt}", width_px))
        return written

    def _export_dialog(self, key: str) -> None:
        path, _ = QtWidgets.QFileDialog.getSaveFileName(
            self, f"Export {dg.DIAGRAMS[key]}", f"{key}.png", "PNG image (*.png);;SVG (*.svg)"
        )
        if path:
            self._guarded(lambda: self.export_diagram(key, path))

    def _export_all_dialog(self) -> None:
        folder = QtWidgets.QFileDialog.getExistingDirectory(self, "Export all diagrams")
        if folder:
            self._guarded(lambda: self.export_all(folder))

    def _guarded(self, action) -> None:
        try:
            action()
        except (PhasewiseError, OSError) as exc:
            QtWidgets.QMessageBox.warning(self, "Export failed", str(exc))

    # --------------------------------------------------------------- compute
    def _fill_band_boxes(self) -> None:
        bands = dg.available_bands(self.table)
        self._updating = True
        try:
            for box, preferred in (
                (self.band_box, ("V",)),
                (self.blue_box, ("V", "B", "g")),
                (self.red_box, ("I", "R", "i", "r")),
            ):
                current = box.currentText()
                box.clear()
                box.addItems(bands)
                choice = (
                    current
                    if current in bands
                    else next((b for b in preferred if b in bands), bands[0] if bands else "")
                )
                box.setCurrentText(choice)
            if self.red_box.currentText() == self.blue_box.currentText() and len(bands) > 1:
                self.red_box.setCurrentText(
                    next(b for b in bands if b != self.blue_box.currentText())
                )
            self._fill_relations()
        finally:
            self._updating = False

    def _fill_relations(self) -> None:
        current = self.relation_box.currentData()
        self.relation_box.clear()
        self.relation_box.addItem("none", None)
        present = set(self.table.class_counts())
        default = 0
        for name, label, classes in dg.pl_relations(self.band_box.currentText(), with_classes=True):
            self.relation_box.addItem(label, name)
            if not default and present & set(classes):
                default = self.relation_box.count() - 1
        index = self.relation_box.findData(current) if self._relation_chosen else -1
        self.relation_box.setCurrentIndex(index if index >= 0 else default)

    def _recompute(self, *, auto_range: bool = True) -> None:
        """Redraw the diagrams now; compute the field summary in the background."""
        band = self.band_box.currentText()
        blue, red = self.blue_box.currentText(), self.red_box.currentText()
        points = self.table
        settings = {
            "physics_settings": self._physics_settings,
            "ebv": self.summary_panel.extinction(),
            "pl_band": band,
            "pl_relation": self.relation_box.currentData(),
            "blue": blue,
            "red": red,
        }
        # keep the last guide lines on screen until the new summary arrives, when they fit
        same = self._field_settings == settings and self._field_points is points
        guides = self.field if self.field is not None and same else None
        self.diagrams = {
            "period_amplitude": dg.period_amplitude(points, band),
            "phi31_logp": dg.phi31_logp(points),
            "r21_logp": dg.r21_logp(points),
            "period_ratio": dg.period_ratio(points),
            "period_luminosity": dg.period_luminosity(points, band),
            "colour_magnitude": dg.colour_magnitude(points, blue, red),
        }
        if not (blue and red and blue != red):
            self.diagrams["colour_magnitude"] = dg.colour_magnitude([], "V", "I")
        self.outliers = dg.find_outliers(
            [d for k, d in self.diagrams.items() if k != "colour_magnitude" or blue != red],
            self.outlier_rule,
        )
        if guides is not None:
            self._with_guides(guides)
        flagged = {f.star_id for f in self.outliers}
        for key, plot in self.plots.items():
            plot.show_state(
                self.diagrams[key],
                visible=self._visible,
                outliers=flagged,
                selected=self._selected,
                current=self._current,
                auto_range=auto_range,
            )
        self._update_legend()
        self.outliers_changed.emit(self.outlier_reasons())
        if not same or not self.summary_ready:
            self._start_summary(points, **settings)

    def _with_guides(self, state: dg.FieldState) -> None:
        """Put the summary's guide lines on the P–L and colour–magnitude diagrams."""
        for key, lines in (
            ("period_luminosity", state.pl_lines),
            ("colour_magnitude", state.strip_lines),
        ):
            self.diagrams[key] = replace(self.diagrams[key], lines=tuple(lines))

    # ------------------------------------------------------------- summary work
    @property
    def summary_ready(self) -> bool:
        """True when the summary shown belongs to the current stars and settings."""
        return self._summary_done == self._summary_generation

    def _start_summary(self, points: dg.PointTable, **settings: Any) -> None:
        self._summary_generation += 1
        self.summary_panel.show_pending()
        self._job_points = {self._summary_generation: (points, settings)}
        job = _SummaryJob(self._summary_generation, points, settings, self._relay)
        self._pool.start(job)

    def _on_summary(self, generation: int, state: object) -> None:
        if generation != self._summary_generation:
            return  # a newer request is under way
        self.field = state
        self._field_points, self._field_settings = self._job_points.pop(generation)
        self._with_guides(state)
        for key in ("period_luminosity", "colour_magnitude"):
            self.plots[key].set_diagram(self.diagrams[key], auto_range=False)
        self.summary_panel.show_field(state, self.outliers, self.outlier_rule)
        self._summary_done = generation
        self.summary_updated.emit()

    def _on_summary_failed(self, generation: int, message: str) -> None:
        if generation == self._summary_generation:
            self.summary_panel.show_error(message)
            self._summary_done = generation
            self.summary_updated.emit()

    def wait_for_summary(self, timeout_ms: int = 30000) -> bool:
        """Process events until the summary is ready (for scripts and screenshots)."""
        timer = QtCore.QElapsedTimer()
        timer.start()
        while not self.summary_ready and timer.elapsed() < timeout_ms:
            QtWidgets.QApplication.processEvents(QtCore.QEventLoop.ProcessEventsFlag.AllEvents, 50)
            self._pool.waitForDone(20)
        QtWidgets.QApplication.processEvents()
        return self.summary_ready

    def wait_for_points(self, timeout_ms: int = 60000) -> bool:
        """Process events until a background read has arrived (scripts, screenshots)."""
        timer = QtCore.QElapsedTimer()
        timer.start()
        while self._reading and timer.elapsed() < timeout_ms:
            QtWidgets.QApplication.processEvents(QtCore.QEventLoop.ProcessEventsFlag.AllEvents, 50)
            self._read_pool.waitForDone(20)
        QtWidgets.QApplication.processEvents()
        return not self._reading

    def closeEvent(self, event: QtGui.QCloseEvent) -> None:  # noqa: N802 (Qt naming)
        self._summary_generation += 1  # drop what is still being computed
        self._read_generation += 1
        self._read_pool.waitForDone()
        self._pool.waitForDone()
        super().closeEvent(event)

    def _update_legend(self) -> None:
        shown = None
        if self._visible is not None:
            visible = self._visible
            shown = np.fromiter((s in visible for s in self.table.star_ids), bool, len(self.table))
        counts = self.table.class_counts(shown)
        parts = []
        for code in sorted(counts, key=lambda c: (-counts[c], c)):
            style = class_style(code)
            parts.append(
                f'<span style="color:{style.colour}; font-size:13pt">'
                f"{symbol_glyph(style.symbol)}</span>&nbsp;{code}&nbsp;({counts[code]})"
            )
        marks = (
            '<span style="font-size:13pt">◯</span>&nbsp;<b>current star</b> · '
            "○&nbsp;selected · "
            '<span style="color:#E41A1C; font-size:13pt">○</span>&nbsp;outlier · '
            "━&nbsp;P–L relation · ╍&nbsp;instability strip (from memory) · "
            "┈&nbsp;published period ratios"
        )
        self.legend_label.setText("&nbsp;&nbsp; ".join(parts) + "&nbsp;&nbsp;|&nbsp;&nbsp;" + marks)

    # ----------------------------------------------------------------- events
    def _on_bands(self, *_: Any) -> None:
        if self._updating:
            return
        if self.sender() is self.relation_box:
            self._relation_chosen = True
        if self.sender() is self.band_box:
            self._updating = True
            try:
                self._fill_relations()
            finally:
                self._updating = False
        self._recompute()

    def _on_extinction(self, _ebv: float) -> None:
        self._recompute(auto_range=False)

    def _on_brush_mode(self, on: bool) -> None:
        for plot in self.plots.values():
            plot.set_brush_mode(on)

    def reset_zoom(self) -> None:
        """Fit every diagram to its stars."""
        for plot in self.plots.values():
            plot.auto_range()

    def _on_star_clicked(self, star_id: str) -> None:
        self.set_current_star(star_id)
        self.star_selected.emit(star_id)

    def _on_brushed(self, star_ids: list) -> None:
        self.set_selected_stars(star_ids)
        self.stars_brushed.emit(list(star_ids))
