"""The star list: a real table model for tens of thousands of stars."""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

from PySide6.QtCore import (
    QAbstractTableModel,
    QEvent,
    QModelIndex,
    QSortFilterProxyModel,
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
    "StarFilterProxy",
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
#: Above this many changed stars the whole list is read again (one query).
ROW_REFRESH_LIMIT = 200
SORT_ARROW_PX = 10
_ALIASES = {
    "star_id": ("star_id", "id"),
    "status": ("status", "verdict_status"),
    "suggested_class": ("suggested_class", "suggestion", "suggested"),
    "suggested_score": ("suggested_score", "score", "suggestion_score"),
    "verdict_class": ("verdict_class", "class_code"),
    "period": ("period",),
    "amplitude": ("amplitude",),
    "fap": ("fap",),
    "flags": ("flags",),
    "stale": ("stale",),
}


def listed_period(row: StarRow) -> float | None:
    """The period the catalogue would give the star: none for a rejected star or a
    class without a period (the verdict's class, else the top suggestion's)."""
    if row.status == "rejected":
        return None
    code = row.verdict_class or row.suggested_class
    return None if code in NON_PERIODIC_CLASSES else row.period


def row_values(row) -> list:
    """The list of :data:`FIELDS` (+ stale) of one ledger star row."""
    if isinstance(row, StarRow):
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
    if isinstance(row, dict):
        get = row.get
    elif isinstance(row, Sequence) and not hasattr(row, "_fields"):
        values = list(row) + [None] * (len(FIELDS) + 1 - len(row))
        return _clean(values[: len(FIELDS) + 1])
    else:

        def get(name, default=None):
            return getattr(row, name, default)

    values = []
    for name in (*FIELDS, "stale"):
        value = None
        for alias in _ALIASES[name]:
            value = get(alias, None)
            if value is not None:
                break
        values.append(value)
    values = _clean(values)
    extra = []
    if get("failed", False):
        extra.append("failed")
    elif get("analysed", True) is False:
        extra.append("not analysed")
    if extra:
        values[8] = ",".join(extra + ([values[8]] if values[8] else []))
    return values


def _clean(values: list) -> list:
    values[0] = str(values[0])
    values[1] = str(values[1] or "unreviewed")
    flags = values[8]
    if flags is None:
        flags = ""
    elif not isinstance(flags, str):
        flags = ",".join(str(f) for f in flags)
    values[8] = flags
    values[9] = bool(values[9])
    return values


def _sort_key(value):
    # missing values sort last in ascending order
    if value is None:
        return (2, 0, "")
    if isinstance(value, (int, float)):
        if isinstance(value, float) and not math.isfinite(value):
            return (2, 0, "")
        return (0, value, "")
    return (1, 0, str(value).lower())


class StarTableModel(QAbstractTableModel):
    """Rows of the ledger's star list, held as plain lists."""

    StarIdRole = Qt.ItemDataRole.UserRole + 1

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._rows: list[list] = []
        self._index: dict[str, int] = {}
        self.current_star: str | None = None
        self._bold = QFont()
        self._bold.setBold(True)
        self._status_brush = {k: QColor(v) for k, v in STATUS_COLOURS.items()}
        self._current_bg = QColor("#FFF3C4")

    # ------------------------------------------------------------ contents
    def set_rows(self, rows: Iterable) -> None:
        self.beginResetModel()
        self._rows = [row_values(r) for r in rows]
        self._reindex()
        self.endResetModel()

    def _reindex(self) -> None:
        self._index = {r[0]: i for i, r in enumerate(self._rows)}

    def star_ids(self) -> list[str]:
        return [r[0] for r in self._rows]

    def row_of(self, star_id: str) -> int | None:
        return self._index.get(star_id)

    def value(self, star_id: str, field: str):
        i = self._index.get(star_id)
        return None if i is None else self._rows[i][FIELDS.index(field)]

    def update_star(self, star_id: str, **fields) -> None:
        """Change some fields of one star's row (after a verdict)."""
        i = self._index.get(star_id)
        if i is None:
            return
        for name, value in fields.items():
            self._rows[i][FIELDS.index(name)] = value
        self.dataChanged.emit(self.index(i, 0), self.index(i, len(COLUMNS) - 1))

    def replace_row(self, row) -> None:
        """Put a fresh ledger row in place of the star's current one."""
        values = row_values(row)
        i = self._index.get(values[0])
        if i is None:
            return
        self._rows[i] = values
        self.dataChanged.emit(self.index(i, 0), self.index(i, len(COLUMNS) - 1))

    def set_current(self, star_id: str | None) -> None:
        old, self.current_star = self.current_star, star_id
        for sid in (old, star_id):
            i = self._index.get(sid) if sid else None
            if i is not None:
                self.dataChanged.emit(self.index(i, 0), self.index(i, len(COLUMNS) - 1))

    def status_counts(self) -> dict[str, int]:
        counts = dict.fromkeys(STATUSES, 0)
        for r in self._rows:
            counts[r[1]] = counts.get(r[1], 0) + 1
        return counts

    # ---------------------------------------------------------- Qt model API
    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: B008
        return 0 if parent.isValid() else len(self._rows)

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
        row = self._rows[index.row()]
        col = index.column()
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
        if role == self.StarIdRole:
            return row[0]
        if role == Qt.ItemDataRole.ForegroundRole and col == 1:
            return self._status_brush.get(row[1])
        if role == Qt.ItemDataRole.BackgroundRole and row[0] == self.current_star:
            return self._current_bg
        if role == Qt.ItemDataRole.FontRole and row[0] == self.current_star:
            return self._bold
        if role == Qt.ItemDataRole.TextAlignmentRole and col in (3, 5, 6, 7):
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return None

    def sort(self, column: int, order=Qt.SortOrder.AscendingOrder) -> None:
        self.layoutAboutToBeChanged.emit()
        old_ids = [r[0] for r in self._rows]
        persistent = self.persistentIndexList()
        self._rows.sort(
            key=lambda r: _sort_key(r[column]),
            reverse=order == Qt.SortOrder.DescendingOrder,
        )
        self._reindex()
        self.changePersistentIndexList(
            persistent,
            [self.index(self._index[old_ids[p.row()]], p.column()) for p in persistent],
        )
        self.layoutChanged.emit()


class StarFilterProxy(QSortFilterProxyModel):
    """Text and status filter; sorting is done by the source model (fast)."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._text = ""
        self._status: str | None = None

    def set_text(self, text: str) -> None:
        text = text.strip().lower()
        if text != self._text:
            self.beginFilterChange()
            self._text = text
            self.endFilterChange(QSortFilterProxyModel.Direction.Rows)

    def set_status(self, status: str | None) -> None:
        if status != self._status:
            self.beginFilterChange()
            self._status = status
            self.endFilterChange(QSortFilterProxyModel.Direction.Rows)

    def filterAcceptsRow(self, source_row: int, source_parent) -> bool:
        row = self.sourceModel()._rows[source_row]
        if self._status and row[1] != self._status:
            return False
        if self._text:
            text = self._text
            return (
                text in row[0].lower()
                or text in str(row[2] or "").lower()
                or text in str(row[4] or "").lower()
                or text in row[8].lower()
            )
        return True

    def sort(self, column: int, order=Qt.SortOrder.AscendingOrder) -> None:
        self.sourceModel().sort(column, order)

    def visible_star_ids(self) -> list[str]:
        model = self.sourceModel()
        return [
            model._rows[self.mapToSource(self.index(i, 0)).row()][0] for i in range(self.rowCount())
        ]


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
        self.proxy = StarFilterProxy(self)
        self.proxy.setSourceModel(self.model)

        self.filter_edit = QLineEdit(placeholderText="Filter: id, class or flag")
        self.filter_edit.setClearButtonEnabled(True)
        self.status_box = QComboBox()
        self.status_box.addItem("All verdicts", None)
        for s in STATUSES:
            self.status_box.addItem(s.capitalize(), s)
        self.counts_label = QLabel()
        self.counts_label.setWordWrap(True)

        self.view = QTableView()
        self.view.setModel(self.proxy)
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
        ledger = self.desk.ledger
        self.set_rows(ledger.star_rows() if ledger is not None else [])
        current = self.desk.star_id
        if current:
            self.model.set_current(current)
            self.scroll_to(current)

    def rows_changed(self, star_ids) -> None:
        """Lines to re-read after a ledger change (all of them for an empty tuple)."""
        if not star_ids or len(star_ids) > ROW_REFRESH_LIMIT:
            self.reload()
            return
        for star_id in star_ids:
            self.model.replace_row(self.desk.ledger.star_row(star_id))
        self.update_counts()

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
    def set_rows(self, rows) -> None:
        self.model.set_rows(rows)
        self.update_counts()

    def update_counts(self) -> None:
        counts = self.model.status_counts()
        shown = self.proxy.rowCount()
        total = self.model.rowCount()
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
        self.proxy.sort(column, order)
        if self.model.current_star:
            self.scroll_to(self.model.current_star)

    def _text_changed(self, text: str) -> None:
        self.proxy.set_text(text)
        self.update_counts()
        self.filterChanged.emit()

    def _status_changed(self, _i: int) -> None:
        self.proxy.set_status(self.status_box.currentData())
        self.update_counts()
        self.filterChanged.emit()

    def _row_changed(self, current, _previous) -> None:
        # react after the model finished its change (filtering can move the current row)
        if current.isValid():
            QTimer.singleShot(0, self, self._emit_current)

    def _emit_current(self) -> None:
        current = self.view.selectionModel().currentIndex()
        if current.isValid():
            sid = self.proxy.data(current, StarTableModel.StarIdRole)
            if sid and sid != self.model.current_star:
                self.currentStarChanged.emit(sid)

    def proxy_index_of(self, star_id: str):
        row = self.model.row_of(star_id)
        if row is None:
            return QModelIndex()
        return self.proxy.mapFromSource(self.model.index(row, 0))

    def select_star(self, star_id: str) -> bool:
        """Make ``star_id`` the current row (if it passes the filter)."""
        index = self.proxy_index_of(star_id)
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
            index = self.proxy_index_of(sid)
            if index.isValid():
                selection.select(index, index)
        flags = (
            QItemSelectionModel.SelectionFlag.ClearAndSelect
            | QItemSelectionModel.SelectionFlag.Rows
        )
        self.view.selectionModel().select(selection, flags)

    def selected_star_ids(self) -> list[str]:
        rows = self.view.selectionModel().selectedRows()
        return [self.proxy.data(i, StarTableModel.StarIdRole) for i in rows]

    def scroll_to(self, star_id: str) -> None:
        index = self.proxy_index_of(star_id)
        if index.isValid():
            self.view.scrollTo(index)

    def neighbour(self, star_id: str | None, step: int, unreviewed: bool = False) -> str | None:
        """The star ``step`` rows away in the shown order (or next unreviewed)."""
        n = self.proxy.rowCount()
        if n == 0:
            return None
        index = self.proxy_index_of(star_id) if star_id else QModelIndex()
        start = index.row() if index.isValid() else (-1 if step > 0 else n)
        rows = self.model._rows
        for k in range(1, n + 1):
            r = start + k * step
            if not unreviewed and not (0 <= r < n):
                return None
            r %= n
            src = rows[self.proxy.mapToSource(self.proxy.index(r, 0)).row()]
            if not unreviewed or src[1] == "unreviewed":
                return src[0]
        return None
