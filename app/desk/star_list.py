"""The star list: a real table model for tens of thousands of stars."""

from __future__ import annotations

from collections.abc import Iterable

from PySide6.QtCore import (
    QAbstractTableModel,
    QEvent,
    QModelIndex,
    Qt,
    QTimer,
    Signal,
)
from PySide6.QtGui import QColor, QFont
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from phasewise.core.ledger import StarRow
from phasewise.core.vetting import NON_PERIODIC_CLASSES

from .style import STATUS_COLOURS, fmt, fmt_period

__all__ = [
    "COLUMNS",
    "STATUSES",
    "StarTableModel",
    "StarListWidget",
    "row_values",
]

STATUSES = ("unreviewed", "confirmed", "relabelled", "rejected", "deferred")

#: (field, header, tooltip)
COLUMNS = (
    ("star_id", "Star", "Star identifier"),
    ("status", "Verdict", "Verdict status"),
    ("suggested_class", "Sugg.", "Top suggested class"),
    ("suggested_score", "Score", "Score of the top suggestion (0–1)"),
    ("verdict_class", "Class", "Class given in the verdict"),
    ("period", "Period (d)", "Period in days (verdict period if set, else analysed)"),
    ("amplitude", "Amp", "Peak-to-peak amplitude in magnitudes"),
    ("fap", "FAP", "False-alarm probability of the period"),
    ("flags", "Flags", "Flags from analysis; 'stale' when settings changed"),
)
FIELDS = tuple(c[0] for c in COLUMNS)
#: Columns from left to right on screen (the model keeps ``COLUMNS`` order).
VISUAL_ORDER = (
    "star_id",
    "suggested_class",  # what an unreviewed star is thought to be: first thing to see
    "verdict_class",
    "period",
    "amplitude",
    "fap",
    "flags",
    "status",
    "suggested_score",
)
#: The columns the list shows whole at its default width, left to right.
KEY_COLUMNS = VISUAL_ORDER[:7]
#: The longest star id the list shows whole at its default width (13 digits).
ID_SAMPLE = "0000000000000"
CELL_PADDING_PX = 8
#: Above this many changed stars the whole list is read again.
ROW_REFRESH_LIMIT = 200
#: Lines read from the ledger at once (a screen or two).
PAGE = 128
#: Lines kept in memory before the model forgets them and reads again.
KEPT_LINES = 20_000
SORT_ARROW_PX = 10


def listed_period(row: StarRow) -> float | None:
    """The period the catalogue would give the star: none for a rejected star or a
    class without a period (the verdict's class, else the top suggestion's)."""
    if row.status == "rejected":
        return None
    code = row.verdict_class or row.suggested_class
    return None if code in NON_PERIODIC_CLASSES else row.period


def row_values(row: StarRow) -> list:
    """The list of :data:`FIELDS` (+ stale) of one ledger star row."""
    flags = ",".join(row.flags) if row.flags else ""
    if row.failed:
        flags = "failed," + flags if flags else "failed"
    elif not row.analysed:
        flags = "not analysed," + flags if flags else "not analysed"
    return [
        row.star_id,
        row.status or "unreviewed",
        row.suggested_class,
        row.suggested_score,
        row.verdict_class,
        listed_period(row),
        row.amplitude,
        row.fap,
        flags,
        bool(row.stale),
    ]


_LINE_ROLES = frozenset(
    {
        Qt.ItemDataRole.DisplayRole,
        Qt.ItemDataRole.UserRole,
        Qt.ItemDataRole.ForegroundRole,
        Qt.ItemDataRole.BackgroundRole,
        Qt.ItemDataRole.FontRole,
    }
)


class StarTableModel(QAbstractTableModel):
    """The star list over the ledger's summary table, read a page at a time.

    The model holds the ids of the stars shown, in their order (sorting and
    filtering are the ledger's SQL, :meth:`Ledger.star_order`), and builds
    the line of a star only when a view asks for it: opening a survey of
    10^5 stars reads no line beyond the first screen.
    """

    StarIdRole = Qt.ItemDataRole.UserRole + 1

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.ledger = None
        self._ids: list[str] = []
        self._index: dict[str, int] | None = None  # built when first asked
        self._lines: dict[str, list] = {}
        self._overrides: dict[str, dict[str, object]] = {}
        self._sort: tuple[str | None, bool] = (None, False)
        self._status: str | None = None
        self._text = ""
        self.current_star: str | None = None
        self._bold = QFont()
        self._bold.setBold(True)
        self._status_brush = {k: QColor(v) for k, v in STATUS_COLOURS.items()}
        self._current_bg = QColor("#FFF3C4")

    # ------------------------------------------------------------ contents
    def set_ledger(self, ledger) -> None:
        """Show the stars of ``ledger`` (None: none), with the sort and filters kept."""
        self.ledger = ledger
        self._overrides.clear()
        self.refresh()

    def refresh(self) -> None:
        """Read the shown stars' order again (every line is read afresh)."""
        self.beginResetModel()
        self._lines.clear()
        self._ids = self._order()
        self._index = None
        self.endResetModel()

    def _order(self) -> list[str]:
        if self.ledger is None:
            return []
        sort, descending = self._sort
        if sort is None and self._status is None and not self._text:
            return self.ledger.star_ids()  # import order, known since the ledger opened
        ids = self.ledger.star_order(
            sort,
            descending=descending,
            status=self._status,
            text=self._text,
            no_period=NON_PERIODIC_CLASSES,
        )
        if self._text:
            # flags shown from other views (diagram outliers) are not in the ledger
            extra = {
                sid
                for sid, fields in self._overrides.items()
                if self._text in str(fields.get("flags", "")).lower()
            } - set(ids)
            if extra:
                wanted = set(ids) | extra
                every = self.ledger.star_order(
                    sort, descending=descending, status=self._status, no_period=NON_PERIODIC_CLASSES
                )
                ids = [sid for sid in every if sid in wanted]
        return ids

    def set_filter(self, text: str | None = None, status: object = ...) -> None:
        """Show only stars matching ``text`` (id, classes, flags) and of ``status``."""
        text = self._text if text is None else text.strip().lower()
        status = self._status if status is ... else status
        if (text, status) != (self._text, self._status):
            self._text, self._status = text, status
            self.refresh()

    def star_ids(self) -> list[str]:
        """The ids of the stars shown, in their order."""
        return list(self._ids)

    def row_of(self, star_id: str) -> int | None:
        if self._index is None:
            self._index = {sid: i for i, sid in enumerate(self._ids)}
        return self._index.get(star_id)

    def line(self, star_id: str) -> list | None:
        """The list values of a star (:data:`FIELDS` + stale), read if not yet read."""
        values = self._lines.get(star_id)
        if values is None:
            if self.ledger is None or star_id not in self.ledger:
                return None
            self._read([star_id])
            values = self._lines[star_id]
        return values

    def _line_at(self, row: int) -> list:
        star_id = self._ids[row]
        values = self._lines.get(star_id)
        if values is None:
            start = row - row % PAGE
            self._read([s for s in self._ids[start : start + PAGE] if s not in self._lines])
            values = self._lines[star_id]
        return values

    def _read(self, star_ids: list[str]) -> None:
        if len(self._lines) > KEPT_LINES:
            self._lines.clear()  # a long scroll through a survey: start again
        for row in self.ledger.star_rows_of(star_ids):
            values = row_values(row)
            for name, value in self._overrides.get(row.star_id, {}).items():
                values[FIELDS.index(name)] = value
            self._lines[row.star_id] = values

    def value(self, star_id: str, field: str):
        values = self.line(star_id)
        return None if values is None else values[FIELDS.index(field)]

    def update_star(self, star_id: str, **fields) -> None:
        """Show other values in some fields of one star's line (kept until the
        ledger changes that star: diagram outliers in the flags)."""
        if self.line(star_id) is None:
            return
        self._overrides.setdefault(star_id, {}).update(fields)
        for name, value in fields.items():
            self._lines[star_id][FIELDS.index(name)] = value
        self._changed(star_id)

    def stars_changed(self, star_ids: Iterable[str]) -> bool:
        """Read these stars' lines again (after a ledger change); True if the
        order was read again too (the model was reset).

        Lines stay where they are in a sorted list (as a verdict should not
        make the list jump); under the status filter alone a star that left
        it is taken out; otherwise a filter reads the order again.
        """
        star_ids = [s for s in dict.fromkeys(star_ids) if s in self.ledger]
        for star_id in star_ids:
            self._overrides.pop(star_id, None)
            self._lines.pop(star_id, None)
        if self._text or (self._status is not None and not self._leave(star_ids)):
            self.refresh()  # a changed star may now pass the filter
            return True
        for star_id in star_ids:
            self._changed(star_id)
        return False

    def _leave(self, star_ids: list[str]) -> bool:
        """Under the status filter: take out the stars whose status no longer
        passes; False (nothing done) if a star not shown now passes it."""
        self._read(star_ids)
        passing = {s for s in star_ids if self._lines[s][1] == self._status}
        if any(self.row_of(s) is None for s in passing):
            return False
        for star_id in star_ids:
            row = self.row_of(star_id)
            if star_id not in passing and row is not None:
                self.beginRemoveRows(QModelIndex(), row, row)
                del self._ids[row]
                self._index = None
                self.endRemoveRows()
        return True

    def prefetch(self, star_ids: Iterable[str]) -> None:
        """Read the lines of many stars at once (before asking for their values)."""
        if self.ledger is not None:
            self._read(
                [s for s in dict.fromkeys(star_ids) if s not in self._lines and s in self.ledger]
            )

    def _changed(self, star_id: str) -> None:
        i = self.row_of(star_id)
        if i is not None:
            self.dataChanged.emit(self.index(i, 0), self.index(i, len(COLUMNS) - 1))

    def set_current(self, star_id: str | None) -> None:
        old, self.current_star = self.current_star, star_id
        for sid in (old, star_id):
            if sid:
                self._changed(sid)

    def status_counts(self) -> dict[str, int]:
        """Stars of each verdict status in the ledger (shown or not)."""
        counts = dict.fromkeys(STATUSES, 0)
        if self.ledger is not None:
            counts.update(self.ledger.status_counts())
        return counts

    def n_stars(self) -> int:
        return 0 if self.ledger is None else self.ledger.n_stars

    # ---------------------------------------------------------- Qt model API
    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: B008
        return 0 if parent.isValid() else len(self._ids)

    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: B008
        return 0 if parent.isValid() else len(COLUMNS)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if orientation == Qt.Orientation.Horizontal:
            if role == Qt.ItemDataRole.DisplayRole:
                return COLUMNS[section][1]
            if role == Qt.ItemDataRole.ToolTipRole:
                return COLUMNS[section][2]
        return None

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        if role == self.StarIdRole:
            return self._ids[index.row()]
        col = index.column()
        if role == Qt.ItemDataRole.TextAlignmentRole:
            if col in (3, 5, 6, 7):
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            return None
        if role not in _LINE_ROLES:
            return None
        row = self._line_at(index.row())
        if role == Qt.ItemDataRole.DisplayRole:
            value = row[col]
            if col == 5:
                return fmt_period(value) if value is not None else "–"
            if col in (3, 6):
                return "–" if value is None else f"{float(value):.2f}"
            if col == 7:
                return fmt(value, 2)
            if col == 8 and row[9]:
                return ("stale," + value) if value else "stale"
            return "–" if value is None else str(value)
        if role == Qt.ItemDataRole.UserRole:
            return row[col]
        if role == Qt.ItemDataRole.ForegroundRole and col == 1:
            return self._status_brush.get(row[1])
        if role == Qt.ItemDataRole.BackgroundRole and row[0] == self.current_star:
            return self._current_bg
        if role == Qt.ItemDataRole.FontRole and row[0] == self.current_star:
            return self._bold
        return None

    def star_at(self, row: int) -> str:
        return self._ids[row]

    def status_at(self, row: int) -> str:
        return self._line_at(row)[1]

    def unreviewed_rows(self) -> list[int]:
        """Rows of the shown stars whose verdict is still ``unreviewed``."""
        if self.ledger is None or self._status not in (None, "unreviewed"):
            return []
        sort, descending = self._sort
        waiting = self.ledger.star_order(
            sort,
            descending=descending,
            status="unreviewed",
            text=self._text,
            no_period=NON_PERIODIC_CLASSES,
        )
        rows = (self.row_of(s) for s in waiting)
        return [r for r in rows if r is not None]

    def sort(self, column: int, order=Qt.SortOrder.AscendingOrder) -> None:
        """Order the stars by one column (the ledger's SQL; missing values last)."""
        self._sort = (FIELDS[column], order == Qt.SortOrder.DescendingOrder)
        self.refresh()


class StarListWidget(QWidget):
    """Filter bar, status counts and the star table."""

    currentStarChanged = Signal(str)
    filterChanged = Signal()
    #: Enter or Escape in the filter box: the typing is done, the keys go back to vetting.
    filterDone = Signal()

    def __init__(self, desk=None, parent=None) -> None:
        super().__init__(parent)
        self.desk = desk
        self.model = StarTableModel(self)

        self.filter_edit = QLineEdit(placeholderText="Filter: id, class or flag")
        self.filter_edit.setClearButtonEnabled(True)
        self.status_box = QComboBox()
        self.status_box.addItem("All verdicts", None)
        for s in STATUSES:
            self.status_box.addItem(s.capitalize(), s)
        self.counts_label = QLabel()
        self.counts_label.setWordWrap(True)

        self.view = QTableView()
        self.view.setModel(self.model)
        self.view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.view.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.view.setSortingEnabled(False)
        header = self.view.horizontalHeader()
        header.setSectionsClickable(True)
        header.setSortIndicatorShown(True)
        header.setSortIndicator(-1, Qt.SortOrder.AscendingOrder)  # ledger order until a click
        header.sectionClicked.connect(self._sort_by)
        header.setStretchLastSection(True)
        vheader = self.view.verticalHeader()
        vheader.setVisible(False)
        vheader.setSectionResizeMode(QHeaderView.ResizeMode.Fixed)
        vheader.setDefaultSectionSize(self.fontMetrics().height() + 6)
        self.view.setWordWrap(False)
        self._set_column_widths()
        # the key columns first, so the default width shows them: id, class, period,
        # amplitude, FAP, flags; then verdict state and suggestion (scroll or widen)
        for visual, field in enumerate(VISUAL_ORDER):
            header.moveSection(header.visualIndex(FIELDS.index(field)), visual)
        self.view.setAlternatingRowColors(True)

        top = QHBoxLayout()
        top.addWidget(self.filter_edit, 1)
        top.addWidget(self.status_box)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(top)
        layout.addWidget(self.counts_label)
        layout.addWidget(self.view, 1)

        self.filter_edit.textChanged.connect(self._text_changed)
        self.filter_edit.returnPressed.connect(self.filterDone)
        self.filter_edit.installEventFilter(self)
        self.status_box.currentIndexChanged.connect(self._status_changed)
        self.view.selectionModel().currentRowChanged.connect(self._row_changed)
        self._sort_order = {}
        if desk is not None:
            desk.subscribe("ledger", self.reload)
            desk.subscribe("rows", self.rows_changed)
            desk.subscribe("star", self.model.set_current)

    def key_columns_width(self) -> int:
        """Width (px) the widget needs to show the key columns (id … flags) whole."""
        header = self.view.horizontalHeader()
        last = FIELDS.index(KEY_COLUMNS[-1])
        inner = header.sectionViewportPosition(last) + header.sectionSize(last)
        inner += header.offset()  # as if scrolled to the left
        frame = 2 * self.view.frameWidth() + self.view.verticalScrollBar().sizeHint().width()
        margins = self.layout().contentsMargins()
        return inner + frame + margins.left() + margins.right()

    # ------------------------------------------------------ the desk model
    def reload(self) -> None:
        """Every line again from the ledger (the current star kept in view)."""
        self.model.set_ledger(self.desk.ledger)
        self._after_reset()

    def rows_changed(self, star_ids) -> None:
        """Lines to re-read after a ledger change (all of them for an empty tuple)."""
        if not star_ids or len(star_ids) > ROW_REFRESH_LIMIT:
            self.model.set_ledger(self.desk.ledger)
        elif not self.model.stars_changed(star_ids):
            self.update_counts()  # the lines stayed where they were
            return
        self._after_reset()

    def _after_reset(self) -> None:
        """The counts, and the current star selected and in view again."""
        self.update_counts()
        current = self.model.current_star or (self.desk.star_id if self.desk else None)
        if current:
            self.model.set_current(current)
            index = self.index_of(current)
            selection = self.view.selectionModel()
            if index.isValid() and selection.currentIndex() != index:
                selection.setCurrentIndex(
                    index, selection.SelectionFlag.ClearAndSelect | selection.SelectionFlag.Rows
                )
            if index.isValid():
                self.view.scrollTo(index)

    def _set_column_widths(self) -> None:
        """Columns as wide as their header or a typical value, ids of 13 digits whole."""
        metrics = self.view.fontMetrics()
        samples = {
            "star_id": ID_SAMPLE,
            "status": "deferred",
            "suggested_class": "RRab",
            "suggested_score": "0.00",
            "verdict_class": "RRab",
            "period": "0.0000000",
            "amplitude": "0.000",
            "fap": "1.3e-28",
            "flags": "stale",
        }
        for col, (field, header, _tip) in enumerate(COLUMNS):
            text_width = max(
                metrics.horizontalAdvance(samples.get(field, "")),
                metrics.horizontalAdvance(header) + SORT_ARROW_PX,
            )
            self.view.setColumnWidth(col, text_width + CELL_PADDING_PX)

    def eventFilter(self, obj, event) -> bool:
        if (
            obj is self.filter_edit
            and event.type() == QEvent.Type.KeyPress
            and event.key() == Qt.Key.Key_Escape
        ):
            self.filterDone.emit()
            return True
        return super().eventFilter(obj, event)

    # ------------------------------------------------------------- actions
    def update_counts(self) -> None:
        counts = self.model.status_counts()
        shown = self.model.rowCount()
        total = self.model.n_stars()
        parts = [f"{counts.get(s, 0)} {s}" for s in STATUSES]
        self.counts_label.setText(f"{shown} of {total} shown · " + " · ".join(parts))

    def _sort_by(self, column: int) -> None:
        order = self._sort_order.get(column, Qt.SortOrder.DescendingOrder)
        order = (
            Qt.SortOrder.AscendingOrder
            if order == Qt.SortOrder.DescendingOrder
            else Qt.SortOrder.DescendingOrder
        )
        self._sort_order[column] = order
        self.view.horizontalHeader().setSortIndicator(column, order)
        self.model.sort(column, order)
        self._after_reset()

    def _text_changed(self, text: str) -> None:
        self.model.set_filter(text=text)
        self._after_reset()
        self.filterChanged.emit()

    def _status_changed(self, _i: int) -> None:
        self.model.set_filter(status=self.status_box.currentData())
        self._after_reset()
        self.filterChanged.emit()

    def visible_star_ids(self) -> list[str]:
        """Stars that pass the filters, in the list's order."""
        return self.model.star_ids()

    def _row_changed(self, current, _previous) -> None:
        # react after the model finished its change (filtering can move the current row)
        if current.isValid():
            QTimer.singleShot(0, self, self._emit_current)

    def _emit_current(self) -> None:
        current = self.view.selectionModel().currentIndex()
        if current.isValid():
            sid = self.model.data(current, StarTableModel.StarIdRole)
            if sid and sid != self.model.current_star:
                self.currentStarChanged.emit(sid)

    def index_of(self, star_id: str):
        """The table index of a star's line (invalid if it is not shown)."""
        row = self.model.row_of(star_id)
        return QModelIndex() if row is None else self.model.index(row, 0)

    def select_star(self, star_id: str) -> bool:
        """Make ``star_id`` the current row (if it passes the filter)."""
        index = self.index_of(star_id)
        if not index.isValid():
            return False
        self.view.selectionModel().setCurrentIndex(
            index,
            self.view.selectionModel().SelectionFlag.ClearAndSelect
            | self.view.selectionModel().SelectionFlag.Rows,
        )
        self.view.scrollTo(index)
        return True

    def select_stars(self, star_ids: Iterable[str]) -> None:
        """Select several rows (brushing from another view)."""
        from PySide6.QtCore import QItemSelection, QItemSelectionModel

        selection = QItemSelection()
        for sid in star_ids:
            index = self.index_of(sid)
            if index.isValid():
                selection.select(index, index)
        flags = (
            QItemSelectionModel.SelectionFlag.ClearAndSelect
            | QItemSelectionModel.SelectionFlag.Rows
        )
        self.view.selectionModel().select(selection, flags)

    def selected_star_ids(self) -> list[str]:
        rows = self.view.selectionModel().selectedRows()
        return [self.model.data(i, StarTableModel.StarIdRole) for i in rows]

    def scroll_to(self, star_id: str) -> None:
        index = self.index_of(star_id)
        if index.isValid():
            self.view.scrollTo(index)

    def neighbour(self, star_id: str | None, step: int, unreviewed: bool = False) -> str | None:
        """The star ``step`` rows away in the shown order (or the next unreviewed one,
        going round the end of the list)."""
        model = self.model
        n = model.rowCount()
        if n == 0:
            return None
        row = model.row_of(star_id) if star_id else None
        start = row if row is not None else (-1 if step > 0 else n)
        if not unreviewed:
            r = start + step
            return model.star_at(r) if 0 <= r < n else None
        # lines near the current one first (read a page at a time), then the ledger's query
        for k in range(1, min(n, 2 * PAGE) + 1):
            r = (start + k * step) % n
            if model.status_at(r) == "unreviewed":
                return model.star_at(r)
        waiting = model.unreviewed_rows()
        if not waiting:
            return None
        # the nearest in the direction of travel, round the end; the current star last
        return model.star_at(min(waiting, key=lambda r: ((r - start) * step - 1) % n))
