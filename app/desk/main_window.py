"""The vetting desk's main window: star list, plots, star sheet, verdicts."""

from __future__ import annotations

from collections import OrderedDict
from pathlib import Path

import numpy as np
from PySide6.QtCore import QByteArray, QSettings, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QApplication,
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMessageBox,
    QSplitter,
    QToolBar,
    QWidget,
)

from phasewise.core.classes import is_eclipsing
from phasewise.core.errors import LedgerError, PhasewiseError
from phasewise.core.vetting import NON_PERIODIC_CLASSES, VettingSession

from .dialogs import AnalysisSettingsDialog, ClassPicker, ColumnMappingDialog, ShortcutSheet
from .fold_panel import FoldPanel
from .icons import icon
from .lightcurve_panel import LightCurvePanel
from .periodogram_panel import PeriodogramPanel
from .services import CoreServices
from .star_list import StarListWidget
from .star_sheet import CLASS_CODES, StarSheet, suggestion_class
from .style import configure_pyqtgraph
from .workers import WorkerPool

__all__ = ["MainWindow"]

MAX_RECENT = 8
STAR_CACHE = 256
PERIODOGRAM_CACHE = 64
PERIODOGRAM_DELAY_MS = 60
#: Heights (px) below which the plots never shrink, whatever is docked beside them.
MIN_TOP_HEIGHT = 180
MIN_FOLD_HEIGHT = 260
EXPORT_FORMATS = (
    ("ecsv", "ECSV (*.ecsv)"),
    ("fits", "FITS (*.fits)"),
    ("votable", "VOTable (*.xml *.vot)"),
    ("csv", "CSV (*.csv)"),
)


def _get(obj, name, default=None):
    if obj is None:
        return default
    if isinstance(obj, dict):
        return obj.get(name, default)
    return getattr(obj, name, default)


def _leaf_actions(menu) -> list:
    """A menu's actions with its submenus' actions in their place (the F1 sheet lists
    the digit keys of *Relabel as*)."""
    out = []
    for action in menu.actions():
        if action.isSeparator():
            continue
        sub = action.menu()
        out.extend(_leaf_actions(sub) if sub is not None else [action])
    return out


def _preload_science() -> None:
    """Import the core modules the first star needs, in the background.

    They take a good part of a second to import (scipy); a thread started
    now overlaps that with building the window and reading the ledger.
    """
    import threading

    def load() -> None:
        import phasewise.core.fourier  # noqa: F401
        import phasewise.core.periodogram  # noqa: F401

    threading.Thread(target=load, name="preload-core", daemon=True).start()


class MainWindow(QMainWindow):
    """The vetting desk.

    Parameters
    ----------
    services : CoreServices, optional
        The calls into core (default: the real ones).
    settings : QSettings, optional
        Where window layout and recent files persist.

    Extension points for other views (e.g. the population view):
    :meth:`add_view`, :meth:`show_view`, :meth:`select_star`,
    :meth:`select_stars`, :meth:`visible_star_ids`, and the signals
    ``starChanged(str)``, ``ledgerChanged()``, ``verdictChanged(str)``,
    ``filterChanged()``.
    """

    starChanged = Signal(str)
    ledgerChanged = Signal()
    verdictChanged = Signal(str)
    filterChanged = Signal()

    def __init__(self, services: CoreServices | None = None, settings: QSettings | None = None):
        super().__init__()
        _preload_science()
        configure_pyqtgraph()
        self.services = services or CoreServices()
        self.qsettings = settings or QSettings("Phasewise", "Phasewise")
        self.analysis_settings = None
        self.ledger = None
        self.ledger_path: Path | None = None
        self.session = VettingSession()
        self.workers = WorkerPool(self)
        self.lc = None
        self.result: dict | None = None
        self.verdict = None
        self.views: dict[str, QDockWidget] = {}
        self._stars: OrderedDict = OrderedDict()
        self._periodograms: OrderedDict = OrderedDict()
        self._pg_method: str | None = None
        self._pg_worker = None
        self._pg_pending = None
        self._pg_timer = QTimer(self)
        self._pg_timer.setSingleShot(True)
        self._pg_timer.setInterval(PERIODOGRAM_DELAY_MS)
        self._pg_timer.timeout.connect(self._start_periodogram)
        self.setWindowTitle("Phasewise — vetting desk")
        self.setWindowIcon(icon("phasewise"))
        self._build_panels()
        self._build_actions()
        self._build_menus()
        self._build_toolbar()
        self._connect()
        self.statusBar().showMessage("Open a ledger (File ▸ Open ledger) or build one from files.")
        self.resize(1600, 1000)
        self._layout_restored = self._restore_layout()

    # ================================================================ layout
    def _build_panels(self) -> None:
        self.star_list = StarListWidget()
        self.lightcurve = LightCurvePanel()
        self.periodogram = PeriodogramPanel()
        self.fold = FoldPanel(self.services)
        self.sheet = StarSheet()
        self.top_splitter = QSplitter(Qt.Orientation.Horizontal)
        self.top_splitter.addWidget(self.lightcurve)
        self.top_splitter.addWidget(self.periodogram)
        self.centre_splitter = QSplitter(Qt.Orientation.Vertical)
        self.centre_splitter.addWidget(self.top_splitter)
        self.centre_splitter.addWidget(self.fold)
        self.centre_splitter.setSizes([420, 560])
        # no view docked below may squeeze the plots away
        self.centre_splitter.setChildrenCollapsible(False)
        self.top_splitter.setMinimumHeight(MIN_TOP_HEIGHT)
        self.fold.setMinimumHeight(MIN_FOLD_HEIGHT)
        self.main_splitter = QSplitter(Qt.Orientation.Horizontal)
        self.main_splitter.addWidget(self.star_list)
        self.main_splitter.addWidget(self.centre_splitter)
        self.main_splitter.addWidget(self.sheet)
        for index, stretch in enumerate((1, 3, 1)):
            self.main_splitter.setStretchFactor(index, stretch)
        self.setCentralWidget(self.main_splitter)
        self.splitters = {
            "main": self.main_splitter,
            "centre": self.centre_splitter,
            "top": self.top_splitter,
            "folds": self.fold.splitter,
        }
        self.setDockOptions(
            QMainWindow.DockOption.AllowTabbedDocks | QMainWindow.DockOption.AnimatedDocks
        )
        self.progress_label = QLabel()
        self.statusBar().addPermanentWidget(self.progress_label)
        self.read_only_label = QLabel(
            "<b style='color:#B03000'>Read-only ledger: verdicts cannot be recorded</b>"
        )
        self.read_only_label.setToolTip(
            "The ledger's file or folder is not writable here. Copy it to a writable folder "
            "to record verdicts."
        )
        self.read_only_label.setVisible(False)
        self.statusBar().addPermanentWidget(self.read_only_label)
        self.read_only = False

    def _action(self, text, slot, keys=(), icon_name=None, checkable=False, tip=None) -> QAction:
        action = QAction(text, self)
        if icon_name:
            action.setIcon(icon(icon_name))
        seqs = []
        for k in keys if isinstance(keys, (list, tuple)) else (keys,):
            if isinstance(k, QKeySequence.StandardKey):
                seqs.extend(QKeySequence.keyBindings(k))
            else:
                seqs.append(QKeySequence(k))
        if seqs:
            action.setShortcuts(seqs)
            action.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        action.setCheckable(checkable)
        if tip:
            action.setStatusTip(tip)
            action.setToolTip(tip)
        if checkable:
            action.toggled.connect(slot)
        else:
            action.triggered.connect(lambda _checked=False: slot())
        self.addAction(action)
        return action

    def _build_actions(self) -> None:
        K = QKeySequence.StandardKey
        a = self._action
        self.act_new = a("&New ledger from files…", self.new_ledger_dialog, K.New, "new")
        self.act_open = a("&Open ledger…", self.open_ledger_dialog, K.Open, "open")
        self.act_export = a("&Export vetted catalogue…", self.export_dialog, "Ctrl+E", "export")
        self.act_export_lc = a("Light curve…", lambda: self.export_plot_dialog("lightcurve"))
        self.act_export_pg = a("Periodogram…", lambda: self.export_plot_dialog("periodogram"))
        self.act_export_fold = a("Folded curve…", lambda: self.export_plot_dialog("fold"))
        self.act_close = a("&Close window", self.close, (K.Close, K.Quit))
        self.act_undo = a("&Undo verdict", self.undo, K.Undo, "undo")
        self.act_redo = a("&Redo verdict", self.redo, K.Redo, "redo")
        self.act_find = a("&Filter the star list", self.focus_filter, K.Find)
        self.act_errors = a(
            "Error bars", self.lightcurve.show_errors.setChecked, "E", checkable=True
        )
        self.act_select = a(
            "Select points to exclude",
            self.lightcurve.select_box.setChecked,
            "S",
            "select",
            checkable=True,
            tip="Drag a rectangle in the light curve to exclude points; Ctrl to restore",
        )
        self.act_period_axis = a(
            "Periodogram against period", self._toggle_period_axis, "F", checkable=True
        )
        self.act_log = a(
            "Periodogram log axis", self.periodogram.log_box.setChecked, "G", checkable=True
        )
        self.act_window = a(
            "Spectral window", self.periodogram.window_box.setChecked, "W", checkable=True
        )
        self.act_pg_range = a(
            "Periodogram: whole grid / candidates",
            self.periodogram.toggle_full_range,
            "Z",
            tip="Switch the periodogram between the candidates' zoom and the whole grid",
        )
        self.act_advance = a("Go to next star after a verdict", lambda _on: None, checkable=True)
        self.act_advance.setChecked(True)
        self.act_next = a("&Next star", lambda: self.step_star(+1), ("J", "Ctrl+Down"), "next")
        self.act_prev = a("&Previous star", lambda: self.step_star(-1), ("K", "Ctrl+Up"), "prev")
        self.act_next_unrev = a("Next &unreviewed star", self.next_unreviewed, "U")
        self.act_confirm = a(
            "&Confirm suggestion", self.sheet.confirm, ("Y", "Ctrl+Return"), "confirm"
        )
        self.act_reject = a("&Reject", lambda: self.set_verdict("rejected"), "X", "reject")
        self.act_defer = a("&Defer", lambda: self.set_verdict("deferred"), "D", "defer")
        self.act_relabel = a("Re&label as any class…", self.pick_class, "L")
        self.act_note = a("Edit &note", self.focus_note, "N")
        self.class_actions = []
        for i, code in enumerate(CLASS_CODES[:10]):
            key = str((i + 1) % 10)
            self.class_actions.append(a(f"Relabel as {code}", lambda c=code: self.relabel(c), key))
        self.act_nudge_up = a("Period: small step longer", lambda: self.session.nudge(+1), ".")
        self.act_nudge_down = a("Period: small step shorter", lambda: self.session.nudge(-1), ",")
        self.act_nudge_up_large = a(
            "Period: large step longer", lambda: self.session.nudge(+1, True), ">"
        )
        self.act_nudge_down_large = a(
            "Period: large step shorter", lambda: self.session.nudge(-1, True), "<"
        )
        self.act_halve = a("Halve period", self.session.halve, "/", "halve")
        self.act_double = a("Double period", self.session.double, "*", "double")
        self.act_next_cand = a(
            "Next candidate", lambda: self.session.cycle_candidate(+1), "]", "cand_next"
        )
        self.act_prev_cand = a(
            "Previous candidate", lambda: self.session.cycle_candidate(-1), "[", "cand_prev"
        )
        self.act_reset_period = a("Back to analysed period", self.session.reset_period, "Backspace")
        self.act_use_alt = a("Use the alternative period", self.use_alternative, "A")
        self.act_settings = a("Analysis &settings…", self.settings_dialog, K.Preferences)
        self.act_reanalyse = a("Re-analyse this star", self.reanalyse_current, "Ctrl+R")
        self.act_analyse_stale = a(
            "Analyse stars without a fresh result",
            lambda: self.reanalyse_all("stale"),
            "Ctrl+Shift+A",
        )
        self.act_reanalyse_all = a("Re-analyse all stars", self.reanalyse_all, "Ctrl+Shift+R")
        self.act_shortcuts = a("&Keyboard shortcuts", self.show_shortcuts, K.HelpContents)
        self.act_about = a("&About Phasewise", self.show_about)

    def _build_menus(self) -> None:
        bar = self.menuBar()
        m = bar.addMenu("&File")
        m.addActions([self.act_new, self.act_open])
        self.recent_menu = m.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        m.addSeparator()
        m.addAction(self.act_export)
        plots = m.addMenu("Export &plot (PNG/SVG)")
        plots.addActions([self.act_export_lc, self.act_export_pg, self.act_export_fold])
        m.addSeparator()
        m.addAction(self.act_close)
        m = bar.addMenu("&Edit")
        m.addActions([self.act_undo, self.act_redo])
        m.addSeparator()
        m.addAction(self.act_find)
        self.view_menu = m = bar.addMenu("&View")
        m.addActions(
            [
                self.act_errors,
                self.act_select,
                self.act_period_axis,
                self.act_log,
                self.act_window,
                self.act_pg_range,
            ]
        )
        m.addSeparator()
        m.addAction(self.act_advance)
        m.addSeparator()
        self.views_separator = m.addSeparator()
        m = bar.addMenu("&Star")
        m.addActions([self.act_next, self.act_prev, self.act_next_unrev])
        m.addSeparator()
        m.addActions(
            [self.act_confirm, self.act_relabel, self.act_reject, self.act_defer, self.act_note]
        )
        classes = m.addMenu("Relabel as")
        classes.addActions(self.class_actions)
        m = bar.addMenu("&Period")
        m.addActions(
            [
                self.act_nudge_up,
                self.act_nudge_down,
                self.act_nudge_up_large,
                self.act_nudge_down_large,
                self.act_halve,
                self.act_double,
                self.act_next_cand,
                self.act_prev_cand,
                self.act_reset_period,
                self.act_use_alt,
            ]
        )
        m = bar.addMenu("&Analysis")
        m.addActions(
            [self.act_settings, self.act_reanalyse, self.act_analyse_stale, self.act_reanalyse_all]
        )
        m = bar.addMenu("&Help")
        m.addActions([self.act_shortcuts, self.act_about])
        self.menu_groups = [
            (menu.title().replace("&", ""), _leaf_actions(menu))
            for menu in bar.findChildren(type(m))
            if menu.title() and menu.parent() is bar
        ]

    def _build_toolbar(self) -> None:
        tb = QToolBar("Main toolbar")
        tb.setObjectName("main_toolbar")
        tb.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonIconOnly)
        tb.addActions([self.act_new, self.act_open, self.act_export])
        tb.addSeparator()
        tb.addActions([self.act_undo, self.act_redo])
        tb.addSeparator()
        tb.addActions([self.act_prev, self.act_next])
        tb.addSeparator()
        tb.addActions([self.act_confirm, self.act_reject, self.act_defer])
        tb.addSeparator()
        tb.addActions([self.act_halve, self.act_double, self.act_prev_cand, self.act_next_cand])
        tb.addSeparator()
        tb.addAction(self.act_select)
        self.addToolBar(tb)
        self.toolbar = tb

    def _connect(self) -> None:
        self.star_list.currentStarChanged.connect(self.load_star)
        self.star_list.filterChanged.connect(self.filterChanged)
        self.star_list.filterDone.connect(self.focus_plots)
        self.periodogram.peakPicked.connect(lambda f: self.session.set_period(1.0 / f, "peak"))
        self.periodogram.methodChanged.connect(self._method_changed)
        self.periodogram.windowRequested.connect(self._compute_window)
        self.periodogram.axis_box.currentIndexChanged.connect(
            lambda i: self._sync_check(self.act_period_axis, i == 1)
        )
        self.periodogram.log_box.toggled.connect(lambda on: self._sync_check(self.act_log, on))
        self.periodogram.window_box.toggled.connect(
            lambda on: self._sync_check(self.act_window, on)
        )
        self.lightcurve.show_errors.toggled.connect(
            lambda on: self._sync_check(self.act_errors, on)
        )
        self.lightcurve.show_errors.toggled.connect(self.fold.set_errors_visible)
        self.lightcurve.select_box.toggled.connect(lambda on: self._sync_check(self.act_select, on))
        self.lightcurve.exclusionRequested.connect(self.exclude_points)
        self.fold.periodEntered.connect(lambda p: self.session.set_period(p, "entry"))
        self.fold.action.connect(self._fold_action)
        self.fold.bandChanged.connect(self._band_changed)
        self.sheet.verdictRequested.connect(
            lambda status, code, note: self.set_verdict(status, code or None, note)
        )
        self.sheet.note_edit.returnPressed.connect(self._note_entered)
        self.session.subscribe("period", self._period_changed)

    @staticmethod
    def _sync_check(action: QAction, on: bool) -> None:
        if action.isChecked() != on:
            action.blockSignals(True)
            action.setChecked(on)
            action.blockSignals(False)

    def _toggle_period_axis(self, on: bool) -> None:
        self.periodogram.axis_box.setCurrentIndex(1 if on else 0)

    # ========================================================= extension API
    def add_view(
        self,
        name: str,
        widget: QWidget,
        title: str | None = None,
        area=Qt.DockWidgetArea.BottomDockWidgetArea,
        visible: bool = False,
    ) -> QDockWidget:
        """Dock another view (e.g. the population diagrams) into the window."""
        dock = QDockWidget(title or name.capitalize(), self)
        dock.setObjectName(f"view_{name}")
        dock.setWidget(widget)
        self.addDockWidget(area, dock)
        dock.setVisible(visible)
        self.view_menu.insertAction(self.views_separator, dock.toggleViewAction())
        self.views[name] = dock
        return dock

    def show_view(self, name: str) -> None:
        """Bring a view to the front (``"desk"`` hides the docked views)."""
        if name == "desk":
            for dock in self.views.values():
                dock.setVisible(False)
            return
        if name not in self.views:
            raise PhasewiseError(
                f"no view named {name!r}; available: desk, {', '.join(self.views) or '(none)'}",
                field="view",
            )
        dock = self.views[name]
        dock.setVisible(True)
        dock.raise_()
        self._shown_view = name

    def select_star(self, star_id: str) -> None:
        """Make ``star_id`` the current star (from any view)."""
        if star_id != self.session.star_id:
            self.load_star(star_id)
        self.star_list.select_star(star_id)

    def select_stars(self, star_ids) -> None:
        self.star_list.select_stars(star_ids)

    def visible_star_ids(self) -> list[str]:
        """Stars that pass the star list's filters, in its order."""
        return self.star_list.proxy.visible_star_ids()

    @property
    def current_star(self) -> str | None:
        return self.session.star_id

    # ================================================================ ledger
    def set_ledger(self, ledger, path=None, first_star: str | None = None) -> None:
        """Show a ledger; select ``first_star`` or the first star of the list."""
        self._stars.clear()
        self._periodograms.clear()
        self.ledger = ledger
        self.analysis_settings = None  # each ledger brings its own
        self.ledger_path = Path(path) if path else None
        self.refresh_rows()
        name = self.ledger_path.name if self.ledger_path else "ledger"
        self.read_only = bool(ledger is not None and ledger.readonly)
        self.setWindowTitle(f"Phasewise — {name}" + (" (read-only)" if self.read_only else ""))
        self._enable_writes(not self.read_only)
        if self.ledger_path:
            self._add_recent(str(self.ledger_path))
        self._update_undo_labels()
        self.ledgerChanged.emit()
        ids = self.star_list.model.star_ids()
        target = first_star if first_star in ids else (ids[0] if ids else None)
        if first_star is not None and first_star not in ids:
            self.statusBar().showMessage(f"No star {first_star!r} in this ledger.")
        if target:
            self.select_star(target)
        self.focus_plots()  # one-key vetting works at once (not typing into the filter)
        if self.analysis_settings is None:
            # core.analysis (and scipy.stats) load after the first star is on screen
            self.workers.start(
                lambda: self._settings_of(ledger),
                on_result=lambda settings: self._settings_ready(ledger, settings),
            )

    def _enable_writes(self, on: bool) -> None:
        """Verdicts, exclusions and analyses need a writable ledger."""
        for action in (
            self.act_confirm,
            self.act_reject,
            self.act_defer,
            self.act_relabel,
            self.act_note,
            self.act_select,
            self.act_reanalyse,
            self.act_analyse_stale,
            self.act_reanalyse_all,
            *self.class_actions,
        ):
            action.setEnabled(on)
        self.sheet.setEnabled(True)
        for button in (
            self.sheet.confirm_button,
            self.sheet.relabel_button,
            self.sheet.reject_button,
            self.sheet.defer_button,
        ):
            button.setEnabled(on)
        self.sheet.note_edit.setReadOnly(not on)
        self.lightcurve.select_box.setEnabled(on)
        self.lightcurve.lasso_box.setEnabled(on)
        self.read_only_label.setVisible(not on)

    def _settings_of(self, ledger):
        """The ledger's own settings; the defaults (and a message) if they no longer fit."""
        try:
            return self.services.ledger_settings(ledger), ""
        except PhasewiseError as exc:
            return self.services.default_settings(), (
                f"The ledger's analysis settings could not be used ({exc}); defaults are in use."
            )

    def _settings_ready(self, ledger, outcome) -> None:
        settings, message = outcome
        if self.analysis_settings is None and ledger is self.ledger:
            self.analysis_settings = settings
            if message:
                self.statusBar().showMessage(message)
            if self.lc is not None:  # the folds drew with the defaults until now
                self._band_changed(self.fold.band_box.currentText())

    def settings(self):
        """The analysis settings in use: the ledger's own until changed here."""
        if self.analysis_settings is None:
            self._settings_ready(self.ledger, self._settings_of(self.ledger))
        return self.analysis_settings

    def refresh_rows(self) -> None:
        current = self.session.star_id
        self.star_list.set_rows(self.ledger.star_rows() if self.ledger is not None else [])
        if current:
            self.star_list.model.set_current(current)
            self.star_list.scroll_to(current)

    def open_ledger(self, path) -> None:
        """Open a ledger; one on read-only storage opens read-only (verdicts off)."""
        try:
            ledger = self.services.open_ledger(path)
        except LedgerError as exc:
            if "read-only here" not in exc.reason:
                raise
            ledger = self.services.open_ledger(path, readonly=True)
        self.close_ledger()
        self.set_ledger(ledger, path)

    def close_ledger(self) -> None:
        if self.ledger is not None and hasattr(self.ledger, "close"):
            self.workers.cancel_all()
            self.workers.wait(10000)
            self.ledger.close()
        self.ledger = None

    # ================================================================= stars
    def _star_data(self, star_id: str):
        if star_id in self._stars:
            self._stars.move_to_end(star_id)
            return self._stars[star_id]
        lc = self.ledger.lightcurve(star_id)
        stored = self.ledger.result(star_id)
        result = dict(_get(stored, "result") or {}) if stored is not None else {}
        if stored is not None and _get(stored, "failed"):
            result = {"status": "failed", "reason": _get(stored, "error") or "analysis failed"}
        stale = bool(_get(stored, "stale", False))
        self._stars[star_id] = (lc, result, stale)
        while len(self._stars) > STAR_CACHE:
            self._stars.popitem(last=False)
        return self._stars[star_id]

    def load_star(self, star_id: str) -> None:
        """Show one star: light curve, fold, periodogram, sheet."""
        if self.ledger is None or not star_id:
            return
        try:
            lc, result, stale = self._star_data(star_id)
        except PhasewiseError as exc:
            self.statusBar().showMessage(str(exc))
            return
        self.lc, self.result = lc, result
        self.verdict = self.ledger.verdict(star_id)
        self.star_list.model.set_current(star_id)
        self.lightcurve.set_lightcurve(lc)
        bands = list(lc.bands)
        band = (
            result.get("primary_band")
            if result.get("primary_band") in bands
            else (bands[0] if bands else None)
        )
        self.fold.set_bands(bands, band)
        self._set_fold_band(band)
        candidates = [c.get("period") for c in result.get("candidates") or []]
        period = _get(self.verdict, "period") or result.get("period")
        self.session.load_star(star_id, period, candidates, lc.baseline)
        self.sheet.set_star(star_id, result, self.verdict, self.session.period)
        if self.read_only:
            self._enable_writes(False)  # the sheet enables its buttons per star
        self._update_trial_label()
        message = f"{star_id}: {result.get('status', 'not analysed')}"
        if stale:
            message += " — result is stale (settings changed); Ctrl+R re-analyses"
        self.statusBar().showMessage(message)
        self._show_periodogram()
        self.starChanged.emit(star_id)

    def _set_fold_band(self, band: str | None) -> None:
        if self.lc is None or band is None:
            self.fold.set_star(None, None)
            return
        self.fold.set_star(
            self.lc,
            band,
            self.analysis_settings,
            is_eclipsing(self._class_code()),
            self.result,
        )

    def _band_changed(self, band: str) -> None:
        self._set_fold_band(band)
        self._period_changed(self.session.period, "band")

    def _period_changed(self, period, source) -> None:
        step = self.session.step()
        self.fold.show_period(period, step, (self.result or {}).get("epoch_max"))
        self.fold.show_alternative(self.session.alternative_period(self._class_code()))
        self.periodogram.set_frequency(1.0 / period if period else None)
        self._update_trial_label()

    def step_star(self, step: int) -> None:
        sid = self.star_list.neighbour(self.session.star_id, step)
        if sid:
            self.select_star(sid)

    def next_unreviewed(self) -> None:
        sid = self.star_list.neighbour(self.session.star_id, +1, unreviewed=True)
        if sid:
            self.select_star(sid)
        else:
            self.statusBar().showMessage("No unreviewed star left among those shown.")

    def _fold_action(self, key: str) -> None:
        {
            "halve": self.session.halve,
            "double": self.session.double,
            "prev": lambda: self.session.cycle_candidate(-1),
            "next": lambda: self.session.cycle_candidate(+1),
            "reset": self.session.reset_period,
            "use_alternative": self.use_alternative,
        }[key]()

    def _update_trial_label(self) -> None:
        code = self._class_code()
        if code in NON_PERIODIC_CLASSES:
            self.sheet.trial_label.setText(f"A verdict of {code} records no period")
        else:
            self.sheet.show_trial_period(
                self.session.period, self.session.overridden, self._suggested_period()
            )

    def _class_code(self) -> str | None:
        """The verdict's class, else the current star's top suggestion."""
        code = _get(self.verdict, "class_code")
        if code:
            return code
        suggestions = (self.result or {}).get("suggestions") or []
        return suggestion_class(suggestions[0]) if suggestions else None

    def _suggested_period(self) -> float | None:
        suggestions = (self.result or {}).get("suggestions") or []
        period = suggestions[0].get("period") if suggestions else None
        return float(period) if period else None

    def verdict_period(self, status: str, class_code: str | None = None) -> float | None:
        """The period a verdict records: none for a constant star; the trial period if
        changed by hand; for a confirmation otherwise the suggestion's own period
        (e.g. 2P for eclipsing)."""
        if class_code in NON_PERIODIC_CLASSES:
            return None
        if status == "confirmed" and not self.session.overridden and self._suggested_period():
            return self._suggested_period()
        return self.session.period

    def use_alternative(self) -> None:
        alt = self.session.alternative_period(self._class_code())
        if alt:
            self.session.set_period(alt, "candidate")

    # =========================================================== periodogram
    def _pg_settings(self):
        pg = self.services.periodogram_settings(self.analysis_settings)
        if self._pg_method and getattr(pg, "method", None) != self._pg_method:
            pg = self.services.replace_periodogram(pg, method=self._pg_method)
        return pg

    def _show_periodogram(self) -> None:
        star_id, lc = self.session.star_id, self.lc
        pg_settings = self._pg_settings()
        if lc is None or pg_settings is None or lc.too_few_points:
            self.periodogram.clear()
            self.periodogram.set_computing("no periodogram (too few points)" if lc else "")
            return
        key = (star_id, repr(pg_settings))
        if key in self._periodograms:
            view = self._periodograms[key]
            self.periodogram.set_periodogram(view, self._candidates_for(view))
            self.periodogram.set_frequency(
                1.0 / self.session.period if self.session.period else None
            )
            return
        self.periodogram.clear()
        self.periodogram.set_computing("computing periodogram…")
        if self._pg_worker is not None:
            self._pg_worker.cancel()  # the user moved on: skip a periodogram still queued
        # start a moment later: the star is drawn first, and stars skipped by a held
        # key never start one
        self._pg_pending = (key, star_id, lc, pg_settings)
        self._pg_timer.start()

    def _start_periodogram(self) -> None:
        if self._pg_pending is None:
            return
        key, star_id, lc, pg_settings = self._pg_pending
        self._pg_pending = None

        def done(view, key=key, star_id=star_id):
            self._periodograms[key] = view
            while len(self._periodograms) > PERIODOGRAM_CACHE:
                self._periodograms.popitem(last=False)
            if self.session.star_id == star_id:
                self.periodogram.set_periodogram(view, self._candidates_for(view))
                p = self.session.period
                self.periodogram.set_frequency(1.0 / p if p else None)

        self._pg_worker = self.workers.start(
            self.services.compute_periodogram,
            lc,
            pg_settings,
            on_result=done,
            on_error=lambda msg: self.periodogram.set_computing(f"error: {msg}"),
        )

    def _candidates_for(self, view) -> list:
        """The analysis' candidates for its own method, else those of this periodogram."""
        result = self.result or {}
        if view.method == result.get("method") and result.get("candidates"):
            return list(result["candidates"])
        return list(view.candidates)

    def _method_changed(self, method: str) -> None:
        self._pg_method = method
        self._show_periodogram()

    def _compute_window(self, _on: bool) -> None:
        view, lc, star_id = self.periodogram.view, self.lc, self.session.star_id
        if view is None or lc is None:
            return
        t, _m, _e = lc.arrays()

        def done(power, star_id=star_id):
            if self.session.star_id == star_id:
                self.periodogram.set_window(power)

        self.workers.start(
            self.services.spectral_window,
            t,
            view.frequency,
            on_result=done,
            on_error=lambda msg: self.statusBar().showMessage(msg),
        )

    # ============================================================== verdicts
    def set_verdict(self, status: str, class_code: str | None = None, note: str | None = None):
        """Write a verdict on the current star to the ledger at once."""
        star_id = self.session.star_id
        if self.ledger is None or star_id is None:
            return
        if self.read_only:
            self.statusBar().showMessage("Read-only ledger: no verdict recorded.")
            return
        if note is None:
            note = self.sheet.note_edit.text().strip()
        if status == "confirmed" and not class_code:
            class_code = self.sheet.top_suggestion()
        period = self.verdict_period(status, class_code)
        from phasewise.core.final import record_verdict

        try:
            # the catalogue's verdict policy: the final numbers are stored with the verdict
            record_verdict(
                self.ledger,
                star_id,
                status,
                class_code=class_code,
                period=period,
                note=note or None,
                settings=self.settings(),
            )
        except PhasewiseError as exc:
            QMessageBox.warning(self, "Verdict not saved", str(exc))
            return
        self.verdict = self.ledger.verdict(star_id)
        self._refresh_row(star_id)
        self.star_list.update_counts()
        self._update_undo_labels()
        self.sheet.set_verdict(self.verdict)
        self.statusBar().showMessage(
            f"{star_id}: {status}"
            + (f" as {class_code}" if class_code else "")
            + (f" at P = {period:.7f} d" if period else "")
            + " — saved"
        )
        self.verdictChanged.emit(star_id)
        if self.act_advance.isChecked():
            self.next_unreviewed()

    def relabel(self, class_code: str) -> None:
        self.sheet.relabel(class_code)

    def pick_class(self) -> None:
        """Pick any class from the keyboard and record a relabel verdict with it."""
        from phasewise.core.classes import CLASSES

        self.class_picker = ClassPicker([(c.code, c.label) for c in CLASSES.values()], self)
        self.class_picker.picked.connect(self.relabel)
        self.class_picker.finished.connect(lambda _r: self.focus_plots())
        self.class_picker.open()
        self.class_picker.typed.setFocus()

    def focus_plots(self) -> None:
        """Give the keyboard back to the plots (the one-key actions work there)."""
        self.fold.main.setFocus()

    def focus_note(self) -> None:
        self.sheet.note_edit.setFocus()
        self.sheet.note_edit.selectAll()

    def _note_entered(self) -> None:
        status = _get(self.verdict, "status")
        if status and status != "unreviewed":
            advance = self.act_advance.isChecked()
            self.act_advance.setChecked(False)
            self.set_verdict(status, _get(self.verdict, "class_code"))
            self.act_advance.setChecked(advance)
        self.focus_plots()

    def focus_filter(self) -> None:
        self.star_list.filter_edit.setFocus()
        self.star_list.filter_edit.selectAll()

    def undo(self) -> None:
        self._walk_history(self.ledger.undo if self.ledger is not None else None, "Undone")

    def redo(self) -> None:
        self._walk_history(self.ledger.redo if self.ledger is not None else None, "Redone")

    def _walk_history(self, step, word: str) -> None:
        if step is None:
            return
        try:
            entry = step()
        except PhasewiseError as exc:
            self.statusBar().showMessage(str(exc))
            return
        if entry is None or entry is False:
            self.statusBar().showMessage("Nothing to " + word.lower()[:-2] + ".")
            return
        entries = _get(entry, "entries") or ()
        star_ids = list(dict.fromkeys(_get(e, "star_id") for e in entries if _get(e, "star_id")))
        if not entries and _get(entry, "star_id"):
            star_ids = [_get(entry, "star_id")]
        for sid in star_ids:
            self._stars.pop(sid, None)
        if any(_get(e, "what") == "excluded" for e in entries):
            self._periodograms = OrderedDict(
                (k, v) for k, v in self._periodograms.items() if k[0] not in star_ids
            )
        if len(star_ids) <= 20 and hasattr(self.ledger, "star_row"):
            for sid in star_ids:
                self._refresh_row(sid)
            self.star_list.update_counts()
        else:
            self.refresh_rows()
        target = star_ids[0] if len(star_ids) == 1 else None
        if target and target != self.session.star_id:
            self.select_star(target)
        elif self.session.star_id:
            self.load_star(self.session.star_id)
        label = _get(entry, "label") or _get(entry, "what") or "last change"
        self.statusBar().showMessage(f"{word}: {label}")
        for sid in star_ids:
            self.verdictChanged.emit(sid)
        self._update_undo_labels()

    def _refresh_row(self, star_id: str) -> None:
        """Re-read one star's list line from the ledger."""
        if self.ledger is not None and hasattr(self.ledger, "star_row"):
            self.star_list.model.replace_row(self.ledger.star_row(star_id))

    def _update_undo_labels(self) -> None:
        ledger = self.ledger
        undo = getattr(ledger, "undo_label", lambda: None)() if ledger is not None else None
        redo = getattr(ledger, "redo_label", lambda: None)() if ledger is not None else None
        self.act_undo.setText(f"&Undo {undo}" if undo else "&Undo")
        self.act_redo.setText(f"&Redo {redo}" if redo else "&Redo")
        writable = ledger is not None and not self.read_only
        self.act_undo.setEnabled(writable and bool(undo or not hasattr(ledger, "undo_label")))
        self.act_redo.setEnabled(writable and bool(redo or not hasattr(ledger, "redo_label")))

    # ============================================================= exclusion
    def exclude_points(self, indices, exclude: bool) -> None:
        """Exclude (or restore) points of the current star; re-analyse off the GUI thread."""
        star_id, lc = self.session.star_id, self.lc
        if lc is None or self.ledger is None or self.read_only:
            return
        mask = np.array(lc.excluded, dtype=bool)
        mask[np.asarray(indices, dtype=int)] = bool(exclude)
        try:
            self.ledger.set_excluded(star_id, mask)
        except PhasewiseError as exc:
            QMessageBox.warning(self, "Exclusion not saved", str(exc))
            return
        new_lc = lc.with_excluded(mask)
        self._stars[star_id] = (new_lc, self.result or {}, True)
        self._refresh_row(star_id)
        self._update_undo_labels()
        self.lc = new_lc
        self.lightcurve.set_lightcurve(new_lc)
        self._set_fold_band(self.fold.band_box.currentText() or None)
        self._period_changed(self.session.period, "band")
        word = "excluded" if exclude else "restored"
        self.statusBar().showMessage(f"{star_id}: {len(indices)} points {word}; re-analysing…")
        self._reanalyse(star_id, new_lc)

    def _reanalyse(self, star_id: str, lc, on_done=None) -> None:
        settings = self.settings()
        services, ledger = self.services, self.ledger

        def run():
            return services.analyse(lc, settings)

        def done(result):
            services.store_result(ledger, star_id, result, settings)
            self._stars.pop(star_id, None)
            self._periodograms = OrderedDict(
                (k, v) for k, v in self._periodograms.items() if k[0] != star_id
            )
            self._refresh_row(star_id)
            if self.session.star_id == star_id:
                self.load_star(star_id)
            self.statusBar().showMessage(f"{star_id}: analysed ({result.get('status', '')})")
            if on_done:
                on_done(result)

        self.workers.start(
            run,
            on_result=done,
            on_error=lambda msg: self.statusBar().showMessage(f"{star_id}: {msg}"),
        )

    def reanalyse_current(self) -> None:
        if self.lc is not None:
            self._reanalyse(self.session.star_id, self.lc)

    def reanalyse_all(self, only: str = "all"):
        """Analyse stars with the current settings (worker, progress, cancel).

        ``only="all"``: every star; ``"stale"``: stars without a result or with a
        stale one.  Results are stored in chunks as they come, so a cancel keeps
        what was done.
        """
        if self.ledger is None:
            return None
        ledger, services = self.ledger, self.services
        settings = self.settings()
        services.record_settings(ledger, settings)
        if only == "all":
            ids = list(ledger.star_ids())
        else:
            ids = ledger.stars_needing_analysis(services.settings_record(settings)[1], only=only)
        if not ids:
            self.statusBar().showMessage("Every star has a fresh result.")
            return None

        def finished() -> None:
            self._stars.clear()
            self._periodograms.clear()
            self.refresh_rows()
            if self.session.star_id:
                self.load_star(self.session.star_id)

        worker = self.workers.run_with_progress(
            self,
            "Analysing stars",
            services.analyse_all,
            ledger,
            ids,
            settings,
            on_error=lambda msg: QMessageBox.warning(self, "Analysis", msg),
        )
        worker.signals.finished.connect(self.workers._guard(finished))
        return worker

    # =============================================================== dialogs
    def settings_dialog(self) -> None:
        pg = self.services.periodogram_settings(self.settings())
        dialog = AnalysisSettingsDialog(pg, self)
        if dialog.exec():
            try:
                new_pg = self.services.replace_periodogram(pg, **dialog.changes())
            except (PhasewiseError, TypeError) as exc:
                QMessageBox.warning(self, "Analysis settings", str(exc))
                return
            self.analysis_settings = self.services.with_periodogram_settings(
                self.analysis_settings, new_pg
            )
            self._pg_method = None
            self._periodograms.clear()
            self._show_periodogram()
            self.statusBar().showMessage("Settings changed: re-analyse (Ctrl+R, Ctrl+Shift+R).")

    def show_shortcuts(self) -> None:
        self.shortcut_sheet = ShortcutSheet(self.menu_groups, self)
        self.shortcut_sheet.show()

    def show_about(self) -> None:
        from phasewise.core import __version__

        QMessageBox.about(
            self,
            "About Phasewise",
            f"<b>Phasewise {__version__}</b><p>Find periods, classify and vet variable-star "
            "light curves. Suggestions and distances come from published empirical relations "
            "with known scatter; the astronomer decides.</p>",
        )

    def open_ledger_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(
            self,
            "Open ledger",
            self._last_dir(),
            "Ledgers (*.ledger.sqlite *.sqlite);;All files (*)",
        )
        if path:
            self._try(lambda: self.open_ledger(path), "Open ledger")

    def _try(self, fn, title: str):
        try:
            return fn()
        except PhasewiseError as exc:
            QMessageBox.warning(self, title, str(exc))
            return None

    def new_ledger_dialog(self) -> None:
        files, _ = QFileDialog.getOpenFileNames(
            self,
            "Photometry files",
            self._last_dir(),
            "Tables (*.csv *.tsv *.txt *.dat *.ecsv *.fits *.fit *.xml *.vot);;All files (*)",
        )
        if not files:
            return
        mapping = self.choose_mapping(files[0])
        if mapping is None:
            return
        target, _ = QFileDialog.getSaveFileName(
            self,
            "New ledger",
            str(Path(files[0]).with_suffix(".ledger.sqlite")),
            "Ledgers (*.ledger.sqlite)",
        )
        if target:
            self.build_ledger(files, mapping, target)

    def choose_mapping(self, path):
        """The column mapping for ``path`` from the mapping dialog, or None if cancelled.

        A file whose columns are not recognised opens the dialog too, with the
        reader's reason and a preview of its rows; the dialog comes back until
        the mapping reads the file (or the person cancels).
        """
        from phasewise.core.errors import ReadError

        note, mapping = "", None
        try:
            source = self.services.open_photometry(path)
            columns, preview = list(source.columns), source.preview(20)
        except ReadError as exc:
            note = f"The columns were not recognised: {exc}. Say which column is which."
            raw = self._try(lambda: self.services.raw_preview(path), "Read photometry")
            if raw is None:
                return None
            columns, preview = raw
        while True:
            self.mapping_dialog = ColumnMappingDialog(
                columns, preview, parent=self, title=f"Map columns of {Path(path).name}", note=note
            )
            if not self.mapping_dialog.exec():
                return None
            try:
                mapping = self.services.column_mapping(**self.mapping_dialog.roles())
                self.services.open_photometry(path, mapping)  # the mapping must read the file
                return mapping
            except PhasewiseError as exc:
                note = f"This mapping does not read the file: {exc}"

    def build_ledger(self, files, mapping, target, on_done=None):
        """Import ``files`` into a new ledger and analyse every star, in a worker."""
        from .building import build_ledger

        services, settings = (
            self.services,
            self.settings(),
        )

        def done(path):
            self.open_ledger(path)
            if on_done:
                on_done(path)

        return self.workers.run_with_progress(
            self,
            "Building the ledger",
            build_ledger,
            services,
            files,
            mapping,
            target,
            settings,
            on_result=done,
            on_error=lambda msg: QMessageBox.warning(self, "New ledger", msg),
        )

    def export_dialog(self) -> None:
        if self.ledger is None:
            return
        start = str((self.ledger_path or Path("catalogue")).with_suffix("").with_suffix(".ecsv"))
        path, chosen = QFileDialog.getSaveFileName(
            self, "Export vetted catalogue", start, ";;".join(f for _k, f in EXPORT_FORMATS)
        )
        if path:
            fmt = next((k for k, f in EXPORT_FORMATS if f == chosen), None)
            self.export_catalogue(path, fmt)

    def export_catalogue(self, path, fmt=None, on_done=None):
        """Write the vetted catalogue in a worker (temporary file, then renamed by core)."""
        ledger, services = self.ledger, self.services
        self.progress_label.setText("exporting…")

        def done(result):
            self.progress_label.setText("")
            self.statusBar().showMessage(f"Vetted catalogue written to {path}")
            if on_done:
                on_done(result)

        def failed(msg):
            self.progress_label.setText("")
            QMessageBox.warning(self, "Export", msg)

        return self.workers.start(
            services.write_catalogue, ledger, path, fmt, on_result=done, on_error=failed
        )

    def export_plot_dialog(self, which: str) -> None:
        path, _ = QFileDialog.getSaveFileName(
            self,
            "Export plot",
            str(Path(self._last_dir()) / f"{self.session.star_id}_{which}.png"),
            "PNG image (*.png);;SVG drawing (*.svg)",
        )
        if path:
            self._try(lambda: self.export_plot(which, path), "Export plot")

    def export_plot(self, which: str, path) -> Path:
        """Save one panel as PNG or SVG (by the file's suffix)."""
        path = Path(path)
        widget = {
            "lightcurve": self.lightcurve.plot,
            "periodogram": self.periodogram.plot,
            "fold": self.fold.main,
        }[which]
        suffix = path.suffix.lower()
        if suffix == ".svg":
            from PySide6.QtCore import QRect, QSize
            from PySide6.QtGui import QPainter
            from PySide6.QtSvg import QSvgGenerator

            generator = QSvgGenerator()
            generator.setFileName(str(path))
            size = widget.size()
            generator.setSize(QSize(size.width(), size.height()))
            generator.setViewBox(QRect(0, 0, size.width(), size.height()))
            generator.setTitle(f"Phasewise {which} of {self.session.star_id}")
            painter = QPainter(generator)
            try:
                widget.render(painter)
            finally:
                painter.end()
        elif suffix == ".png":
            # render at twice the screen size for print
            from PySide6.QtGui import QImage, QPainter

            size = widget.size()
            image = QImage(2 * size.width(), 2 * size.height(), QImage.Format.Format_ARGB32)
            image.fill(0xFFFFFFFF)
            painter = QPainter(image)
            try:
                painter.scale(2.0, 2.0)
                widget.render(painter)
            finally:
                painter.end()
            if not image.save(str(path)):
                raise PhasewiseError("could not write the image", file=str(path))
        else:
            raise PhasewiseError("plots are exported as .png or .svg", file=str(path))
        return path

    # ============================================================ persistence
    def _last_dir(self) -> str:
        return str(self.qsettings.value("last_dir", str(Path.home())))

    def recent_files(self) -> list[str]:
        value = self.qsettings.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def _add_recent(self, path: str) -> None:
        recent = [p for p in self.recent_files() if p != path]
        recent.insert(0, path)
        self.qsettings.setValue("recent_files", recent[:MAX_RECENT])
        self.qsettings.setValue("last_dir", str(Path(path).parent))

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        for p in self.recent_files():
            act = self.recent_menu.addAction(p)
            act.triggered.connect(
                lambda _c=False, p=p: self._try(lambda: self.open_ledger(p), "Open ledger")
            )
        if not self.recent_menu.actions():
            self.recent_menu.addAction("(none)").setEnabled(False)

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._layout_restored:
            self._layout_restored = True
            QTimer.singleShot(0, self, self._default_sizes)

    def _default_sizes(self) -> None:
        width = max(self.main_splitter.width(), self.width() - 8)
        # the list wide enough for its key columns (tests/app/test_desk_layout.py)
        self.main_splitter.setSizes([int(0.31 * width), int(0.47 * width), int(0.22 * width)])

    def _restore_layout(self) -> bool:
        geometry = self.qsettings.value("window/geometry")
        if isinstance(geometry, QByteArray):
            self.restoreGeometry(geometry)
        state = self.qsettings.value("window/state")
        if isinstance(state, QByteArray):
            self.restoreState(state)
        for name, splitter in self.splitters.items():
            value = self.qsettings.value(f"splitter/{name}")
            if isinstance(value, QByteArray):
                splitter.restoreState(value)
        return isinstance(self.qsettings.value("splitter/main"), QByteArray)

    def save_layout(self) -> None:
        self.qsettings.setValue("window/geometry", self.saveGeometry())
        self.qsettings.setValue("window/state", self.saveState())
        for name, splitter in self.splitters.items():
            self.qsettings.setValue(f"splitter/{name}", splitter.saveState())
        self.qsettings.sync()

    def closeEvent(self, event) -> None:
        self.save_layout()
        self.workers.shutdown()
        self.close_ledger()
        super().closeEvent(event)

    # ============================================================ screenshots
    def wait_idle(self, timeout_s: float = 30.0) -> None:
        """Process events until no worker runs (for screenshots and tests)."""
        import time

        end = time.monotonic() + timeout_s
        app = QApplication.instance()
        while time.monotonic() < end:
            app.processEvents()
            if not self.workers.busy and not self._pg_timer.isActive():
                app.processEvents()
                return
            time.sleep(0.01)

    def save_screenshot(self, path) -> Path:
        path = Path(path)
        self.wait_idle()
        QApplication.instance().processEvents()
        # a view shown in a window of its own is what was asked for: grab that window
        dock = self.views.get(getattr(self, "_shown_view", None) or "")
        shown_apart = dock is not None and dock.isVisible() and dock.isFloating()
        pixmap = dock.grab() if shown_apart else self.grab()
        if not pixmap.save(str(path)):
            raise PhasewiseError("could not write the screenshot", file=str(path))
        return path
