"""Dock the population view into the vetting desk and link it to the star list.

:func:`attach` is what ``phasewise demo`` / ``phasewise open`` call (through
``app.cli.gui``) after making the desk window.  It uses only the desk's
extension points: ``add_view``, ``select_star``, ``select_stars``,
``visible_star_ids``, ``current_star``, ``ledger``, ``desk`` (the
``core.desk.DeskModel``, whose ``"change"`` event it listens to),
``star_list`` (declared by :class:`StarList` and :class:`ListedStars`) and
the signals ``starChanged(str)``, ``ledgerChanged()``, ``verdictChanged(str)``,
``filterChanged()``.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any, Protocol, runtime_checkable

from PySide6 import QtCore, QtWidgets

from phasewise.core.errors import LedgerError

from .view import PopulationView

__all__ = ["attach", "VIEW_NAME", "OUTLIER_FLAG", "PopulationLink", "StarList", "ListedStars"]

#: The name of the view in the desk (``--view population``).
VIEW_NAME = "population"

#: Verdicts arriving within this time are applied to the diagrams together.
VERDICT_DELAY_MS = 250

#: The flag the star list shows for stars far from their class's locus
#: (type it in the list's filter to see them all).
OUTLIER_FLAG = "diagram outlier"


@runtime_checkable
class ListedStars(Protocol):
    """What the link uses of the star list's rows (``app.desk.star_list.StarTableModel``)."""

    def row_of(self, star_id: str) -> int | None: ...
    def value(self, star_id: str, field: str) -> Any: ...
    def update_star(self, star_id: str, **fields: Any) -> None: ...
    def prefetch(self, star_ids: Iterable[str]) -> None: ...


@runtime_checkable
class StarList(Protocol):
    """What the link uses of the desk's star list (``app.desk.star_list.StarListWidget``):
    its rows (``model``, :class:`ListedStars`), its table (``view``, whose
    selection model reports the selection) and ``selected_star_ids()``."""

    model: Any
    view: QtWidgets.QAbstractItemView

    def selected_star_ids(self) -> list[str]: ...


class PopulationLink(QtCore.QObject):
    """Keeps a :class:`PopulationView` and the desk window in step.

    The ledger is the one source of change events: the link listens to the
    desk model's ``"change"`` event (the ledger's :class:`Change`, relayed), so
    the diagrams follow every committed write, by this window, a re-analysis
    or an undo.
    """

    def __init__(self, window: Any, view: PopulationView) -> None:
        super().__init__(view)
        self.window = window
        self.view = view
        self._pending: set[str] = set()
        self._flagged: set[str] = set()
        self._timer = QtCore.QTimer(self, singleShot=True, interval=VERDICT_DELAY_MS)
        self._timer.timeout.connect(self._apply_verdicts)
        # the desk model delivers the ledger's changes in this (the GUI) thread
        unsubscribe = window.desk.subscribe("change", self.ledger_change)
        view.destroyed.connect(lambda *_: unsubscribe())
        window.ledgerChanged.connect(self.ledger_changed)
        window.starChanged.connect(view.set_current_star)
        window.filterChanged.connect(self.filter_changed)
        view.star_selected.connect(window.select_star)
        view.stars_brushed.connect(window.select_stars)
        view.outliers_changed.connect(self.mark_outliers)
        # the list's selection, marked in the diagrams (the desk has no signal for it:
        # listen to its table's selection model)
        star_list = window.star_list
        if not isinstance(star_list, StarList) or not isinstance(star_list.model, ListedStars):
            raise TypeError(
                "the population view needs the desk's star list (app.population.dock.StarList)"
            )
        self._rows: ListedStars = star_list.model
        self._selected_ids = star_list.selected_star_ids
        star_list.view.selectionModel().selectionChanged.connect(self.selection_changed)

    def selection_changed(self, *_: Any) -> None:
        self.view.set_selected_stars(self._selected_ids())

    def mark_outliers(self, reasons: dict) -> None:
        """Show the outlier rule's verdict in the star list's flags column."""
        model = self._rows
        flagged = set(reasons)
        model.prefetch(self._flagged | flagged)  # one query per 500 stars, not one each
        for star_id in self._flagged | flagged:
            current = model.value(star_id, "flags")
            if current is None and model.row_of(star_id) is None:
                continue
            flags = [f.strip() for f in str(current or "").split(",") if f.strip()]
            flags = [f for f in flags if f != OUTLIER_FLAG]
            if star_id in flagged:
                flags.append(OUTLIER_FLAG)
            text = ",".join(flags)
            if text != (current or ""):
                model.update_star(star_id, flags=text)
        self._flagged = flagged

    def ledger_change(self, change) -> None:
        """A committed write: redraw the stars it touched (all for an import)."""
        if change.what == "settings":
            return
        ids = set(change.star_ids)
        if change.what == "import" or not ids:
            try:
                self.ledger_changed()
            except LedgerError:
                pass  # closed since the change was queued
            return
        self._pending |= ids
        self._timer.start()

    def ledger_changed(self) -> None:
        self._pending.clear()
        self._flagged.clear()  # the desk re-read its rows from the ledger
        self.view.set_ledger(self.window.ledger)
        self.filter_changed()
        self.view.set_current_star(self.window.current_star)

    def _apply_verdicts(self) -> None:
        ids, self._pending = self._pending, set()
        if self.window.ledger is not None and ids:
            try:
                self.view.update_stars(ids)
            except LedgerError:
                pass  # closed since the change was queued: the next ledger redraws all

    def flush(self) -> None:
        """Apply waiting verdicts now (for tests and screenshots)."""
        self._timer.stop()
        self._apply_verdicts()

    def filter_changed(self) -> None:
        ids = self.window.visible_star_ids() if self.window.ledger is not None else None
        self.view.set_visible_stars(ids)


def attach(window: Any, *, visible: bool = False) -> PopulationView:
    """Add the population view to the desk ``window`` as a dock named ``population``."""
    view = PopulationView()
    link = PopulationLink(window, view)
    view.link = link
    dock = window.add_view(
        VIEW_NAME,
        view,
        "Population diagrams",
        area=QtCore.Qt.DockWidgetArea.BottomDockWidgetArea,
        visible=visible,
    )

    # its own window by default: docked under the plots it took their height (the
    # desk keeps minimum heights for the folds if the person docks it anyway)
    dock.setFloating(True)
    placed = []

    def place(shown: bool) -> None:
        if shown and dock.isFloating() and not placed:
            geometry = window.geometry()
            dock.resize(int(geometry.width() * 0.8), int(geometry.height() * 0.85))
            dock.move(geometry.x() + geometry.width() // 10, geometry.y() + 40)
            placed.append(True)

    dock.visibilityChanged.connect(place)
    if window.ledger is not None:
        link.ledger_changed()

    # screenshots wait for the window's workers; let them wait for the summary too
    wait_idle = getattr(window, "wait_idle", None)
    if wait_idle is not None:

        def wait_idle_and_summary(timeout_s: float = 30.0) -> None:
            wait_idle(timeout_s)
            link.flush()
            view.wait_for_points(int(timeout_s * 1000))
            view.wait_for_summary(int(timeout_s * 1000))

        window.wait_idle = wait_idle_and_summary
    return view
