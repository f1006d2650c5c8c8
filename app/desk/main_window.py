"""The vetting desk's main window: an assembly of panels and actions over the desk model.

The state (ledger, current star, trial period, caches, verdict policy) is the
Qt-free :class:`core.desk.DeskModel`; every panel takes it in its constructor
and listens to it, and the model listens to the ledger.  The actions are
declared once in :mod:`.actions`; file commands live in :mod:`.files` and
re-analyses in :mod:`.reanalysis`.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QSettings, Qt, QTimer, Signal
from PySide6.QtWidgets import (
    QApplication,
    QDockWidget,
    QLabel,
    QMainWindow,
    QMessageBox,
    QSplitter,
    QWidget,
)

from phasewise.core.desk import DeskModel
from phasewise.core.errors import LedgerError, PhasewiseError

from .actions import SPECS, build_actions, build_menus, build_toolbar
from .dialogs import AnalysisSettingsDialog, ClassPicker, ShortcutSheet, show_about
from .files import FileCommands
from .fold_panel import FoldPanel
from .icons import icon
from .layout import default_sizes, restore_layout, save_layout
from .lightcurve_panel import LightCurvePanel
from .periodogram_panel import PeriodogramPanel
from .reanalysis import Reanalysis
from .services import CoreServices
from .star_list import StarListWidget
from .star_sheet import StarSheet
from .style import configure_pyqtgraph
from .workers import GuiThread, WorkerPool

__all__ = ["MainWindow"]

#: Heights (px) below which the plots never shrink, whatever is docked beside them.
MIN_TOP_HEIGHT = 180
MIN_FOLD_HEIGHT = 260


class MainWindow(QMainWindow):
    """The vetting desk.

    Parameters
    ----------
    services : CoreServices, optional
        The calls into core (default: the real ones).
    settings : QSettings, optional
        Where window layout and recent files persist.

    Extension points for other views (e.g. the population view): ``desk``
    (the model), :meth:`add_view`, :meth:`show_view`, :meth:`select_star`,
    :meth:`select_stars`, :meth:`visible_star_ids`, and the signals
    ``starChanged(str)``, ``ledgerChanged()``, ``verdictChanged(str)``,
    ``filterChanged()`` (relays of the model's events and the list's filter).
    """

    starChanged = Signal(str)
    ledgerChanged = Signal()
    verdictChanged = Signal(str)
    filterChanged = Signal()

    def __init__(self, services: CoreServices | None = None, settings: QSettings | None = None):
        super().__init__()
        configure_pyqtgraph()
        self.services = services or CoreServices()
        self.qsettings = settings or QSettings("Phasewise", "Phasewise")
        self.desk = DeskModel(dispatch=GuiThread(self))
        self.workers = WorkerPool(self)
        self.files = FileCommands(self)
        self.reanalysis = Reanalysis(self)
        self.views: dict[str, QDockWidget] = {}
        self.advance = True
        self.setWindowTitle("Phasewise — vetting desk")
        self.setWindowIcon(icon("phasewise"))
        self._build_panels()
        self.acts = build_actions(self)
        self.class_actions = [a for k, a in self.acts.items() if k.startswith("class_")]
        self.menu_groups = build_menus(
            self, self.acts, {"@recent": self.files.place_recent, "@views": self._views_place}
        )
        self.toolbar = build_toolbar(self, self.acts)
        self._connect()
        self.statusBar().showMessage("Open a ledger (File ▸ Open ledger) or build one from files.")
        self.resize(1600, 1000)
        self._layout_restored = restore_layout(self)

    # ================================================================ layout
    def _build_panels(self) -> None:
        desk = self.desk
        self.star_list = StarListWidget(desk)
        self.lightcurve = LightCurvePanel(desk)
        self.periodogram = PeriodogramPanel(desk, self.services, self.workers)
        self.fold = FoldPanel(desk, workers=self.workers)
        self.sheet = StarSheet(desk)
        self.top_splitter = QSplitter(Qt.Orientation.Horizontal)
        self.top_splitter.addWidget(self.lightcurve)
        self.top_splitter.addWidget(self.periodogram)
        for index in (0, 1):  # the light curve and the periodogram share the row evenly
            self.top_splitter.setStretchFactor(index, 1)
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
            "The ledger's file or folder is not writable here (or a re-analysis holds it). "
            "Copy it to a writable folder to record verdicts."
        )
        self.read_only_label.setVisible(False)
        self.statusBar().addPermanentWidget(self.read_only_label)

    def _views_place(self, menu) -> None:
        self.view_menu, self.views_separator = menu, menu.addSeparator()

    def _connect(self) -> None:
        desk, act = self.desk, self.acts
        desk.subscribe("ledger", self._ledger_shown)
        desk.subscribe("star", self._star_shown)
        desk.subscribe("verdict", self.verdictChanged.emit)
        desk.subscribe("history", self._update_undo_labels)
        self.star_list.currentStarChanged.connect(self.load_star)
        self.star_list.filterChanged.connect(self.filterChanged)
        self.star_list.filterDone.connect(self.focus_plots)
        # the panels' own toggles and the actions show the same state
        for action, signal in (
            (act["period_axis"], self.periodogram.axis_box.currentIndexChanged),
            (act["log"], self.periodogram.log_box.toggled),
            (act["window"], self.periodogram.window_box.toggled),
            (act["errors"], self.lightcurve.show_errors.toggled),
            (act["select"], self.lightcurve.select_box.toggled),
        ):
            signal.connect(lambda value, a=action: self._sync_check(a, bool(value)))
        self.lightcurve.show_errors.toggled.connect(self.fold.set_errors_visible)
        self.lightcurve.exclusionRequested.connect(self.reanalysis.exclude)
        self.sheet.verdictRequested.connect(
            lambda status, code, note: self.set_verdict(status, code or None, note)
        )
        self.sheet.note_edit.returnPressed.connect(self._note_entered)

    @staticmethod
    def _sync_check(action, on: bool) -> None:
        if action.isChecked() != on:
            action.blockSignals(True)
            action.setChecked(on)
            action.blockSignals(False)

    def set_advance(self, on: bool) -> None:
        """Go to the next unreviewed star after each verdict (or stay)."""
        self.advance = bool(on)

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
        if star_id != self.desk.star_id:
            self.load_star(star_id)
        self.star_list.select_star(star_id)

    def select_stars(self, star_ids) -> None:
        self.star_list.select_stars(star_ids)

    def visible_star_ids(self) -> list[str]:
        """Stars that pass the star list's filters, in its order."""
        return self.star_list.visible_star_ids()

    @property
    def current_star(self) -> str | None:
        return self.desk.star_id

    @property
    def ledger(self):
        return self.desk.ledger

    @property
    def session(self):
        return self.desk.session

    @property
    def ledger_path(self) -> Path | None:
        return Path(self.desk.ledger.path) if self.desk.ledger is not None else None

    # ================================================================ ledger
    def open_ledger(self, path) -> None:
        """Open a ledger; one on read-only storage opens read-only (verdicts off)."""
        try:
            ledger = self.services.open_ledger(path)
        except LedgerError as exc:
            if "read-only here" not in exc.reason:
                raise
            ledger = self.services.open_ledger(path, readonly=True)
        self.close_ledger()
        self.set_ledger(ledger)

    def set_ledger(self, ledger, first_star: str | None = None) -> None:
        """Show a ledger; select ``first_star`` or the first star of the list."""
        self.desk.set_ledger(ledger)
        if ledger is not None:
            self.files.add_recent(str(ledger.path))
        ids = self.star_list.model.star_ids()
        target = first_star if first_star in ids else (ids[0] if ids else None)
        if first_star is not None and first_star not in ids:
            self.statusBar().showMessage(f"No star {first_star!r} in this ledger.")
        if target:
            self.select_star(target)
        self.focus_plots()  # one-key vetting works at once (not typing into the filter)
        if ledger is not None:
            # core.analysis (and scipy.stats) load after the first star is on screen
            self.workers.start(
                self.desk.load_settings,
                on_result=lambda outcome: self._settings_ready(ledger, outcome),
            )

    def _settings_ready(self, ledger, outcome) -> None:
        if self.desk.settings is None:
            self.desk.use_settings(*outcome, ledger=ledger)
            if outcome[1] and ledger is self.desk.ledger:
                self.statusBar().showMessage(outcome[1])

    def close_ledger(self) -> None:
        if self.desk.ledger is not None:
            self.workers.cancel_all()
            self.workers.wait(10000)
            self.desk.close_ledger()

    def _ledger_shown(self) -> None:
        ledger, writable = self.desk.ledger, not self.desk.read_only
        name = Path(ledger.path).name if ledger is not None else "vetting desk"
        self.setWindowTitle(f"Phasewise — {name}" + ("" if writable else " (read-only)"))
        for spec in SPECS.values():
            if spec.writes:
                self.acts[spec.id].setEnabled(writable)
        self.read_only_label.setVisible(ledger is not None and not writable)
        self.ledgerChanged.emit()

    def _star_shown(self, star_id: str) -> None:
        data = self.desk.data
        message = f"{star_id}: {data.result.get('status', 'not analysed')}"
        if data.stale:
            message += " — result is stale (settings changed); Ctrl+R re-analyses"
        self.statusBar().showMessage(message)
        self.starChanged.emit(star_id)

    def _update_undo_labels(self) -> None:
        undo, redo = self.desk.undo_labels()
        writable = self.desk.ledger is not None and not self.desk.read_only
        self.acts["undo"].setText(f"&Undo {undo}" if undo else "&Undo")
        self.acts["redo"].setText(f"&Redo {redo}" if redo else "&Redo")
        self.acts["undo"].setEnabled(writable and bool(undo))
        self.acts["redo"].setEnabled(writable and bool(redo))

    # ================================================================= stars
    def load_star(self, star_id: str) -> None:
        """Show one star: light curve, fold, periodogram, sheet."""
        try:
            self.desk.load_star(star_id)
        except PhasewiseError as exc:
            self.statusBar().showMessage(str(exc))

    def step_star(self, step: int) -> None:
        sid = self.star_list.neighbour(self.desk.star_id, step)
        if sid:
            self.select_star(sid)

    def next_unreviewed(self) -> None:
        sid = self.star_list.neighbour(self.desk.star_id, +1, unreviewed=True)
        if sid:
            self.select_star(sid)
        else:
            self.statusBar().showMessage("No unreviewed star left among those shown.")

    # ============================================================== verdicts
    def set_verdict(self, status: str, class_code: str | None = None, note: str | None = None):
        """Write a verdict on the current star to the ledger at once (the desk's policy)."""
        star_id = self.desk.star_id
        if self.desk.ledger is None or star_id is None:
            return
        if self.desk.read_only:
            self.statusBar().showMessage("Read-only ledger: no verdict recorded.")
            return
        if note is None:
            note = self.sheet.note_edit.text().strip()
        try:
            plan = self.desk.record_verdict(status, class_code, note)
        except PhasewiseError as exc:
            QMessageBox.warning(self, "Verdict not saved", str(exc))
            return
        self.statusBar().showMessage(
            f"{star_id}: {status}"
            + (f" as {plan.class_code}" if plan.class_code else "")
            + (f" at P = {plan.period:.7f} d" if plan.period else "")
            + " — saved"
        )
        if self.advance:
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

    def focus_filter(self) -> None:
        self.star_list.filter_edit.setFocus()
        self.star_list.filter_edit.selectAll()

    def _note_entered(self) -> None:
        """Enter in the note box: the note joins the star's present verdict."""
        verdict = self.desk.verdict
        if verdict is not None and verdict.status != "unreviewed":
            advance, self.advance = self.advance, False
            self.set_verdict(verdict.status, verdict.class_code)
            self.advance = advance
        self.focus_plots()

    def undo(self) -> None:
        self._walk_history(self.desk.undo, "Undone")

    def redo(self) -> None:
        self._walk_history(self.desk.redo, "Redone")

    def _walk_history(self, step, word: str) -> None:
        try:
            action = step()
        except PhasewiseError as exc:
            self.statusBar().showMessage(str(exc))
            return
        if action is None:
            self.statusBar().showMessage(f"Nothing to {word.lower()[:-2]}.")
            return
        ids = list(dict.fromkeys(e.star_id for e in action.entries if e.star_id))
        if len(ids) == 1 and ids[0] != self.desk.star_id:
            self.select_star(ids[0])
        self.statusBar().showMessage(f"{word}: {action.label or action.kind}")

    # =============================================================== dialogs
    def settings_dialog(self) -> None:
        desk, services = self.desk, self.services
        pg = services.periodogram_settings(desk.analysis_settings())
        dialog = AnalysisSettingsDialog(pg, self)
        if dialog.exec():
            try:
                new_pg = services.replace_periodogram(pg, **dialog.changes())
            except (PhasewiseError, TypeError) as exc:
                QMessageBox.warning(self, "Analysis settings", str(exc))
                return
            desk.use_settings(services.with_periodogram_settings(desk.settings, new_pg))
            self.periodogram.feed.method = None
            self.statusBar().showMessage("Settings changed: re-analyse (Ctrl+R, Ctrl+Shift+R).")

    def show_shortcuts(self) -> None:
        self.shortcut_sheet = ShortcutSheet(self.menu_groups, self)
        self.shortcut_sheet.show()

    def show_about(self) -> None:
        show_about(self)

    # ============================================================ persistence
    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._layout_restored:
            self._layout_restored = True
            QTimer.singleShot(0, self, lambda: default_sizes(self))

    def save_layout(self) -> None:
        save_layout(self)

    def closeEvent(self, event) -> None:
        self.save_layout()
        self.workers.shutdown()
        self.reanalysis.close()
        self.close_ledger()
        super().closeEvent(event)

    # ============================================================ screenshots
    def wait_idle(self, timeout_s: float = 30.0) -> bool:
        """Process events until no worker runs (for screenshots and tests).

        Returns False if workers were still running after ``timeout_s``.
        """
        import time

        end = time.monotonic() + timeout_s
        app = QApplication.instance()
        while time.monotonic() < end:
            app.processEvents()
            if not (self.workers.busy or self.periodogram.feed.busy or self.fold.busy):
                app.processEvents()
                return True
            time.sleep(0.01)
        return False

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
