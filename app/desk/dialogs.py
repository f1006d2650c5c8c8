"""Dialogs of the desk: column mapping with a preview, analysis settings, shortcuts."""

from __future__ import annotations

import re

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtGui import QKeySequence
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QGridLayout,
    QLabel,
    QLineEdit,
    QListWidget,
    QListWidgetItem,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
)

from .periodogram_panel import METHODS

__all__ = [
    "ColumnMappingDialog",
    "AnalysisSettingsDialog",
    "ShortcutSheet",
    "ClassPicker",
    "preview_rows",
]

#: Roles of a ColumnMapping, with the text shown in the dialog.
ROLES = (
    ("star_id", "Star id"),
    ("time", "Time"),
    ("mag", "Magnitude"),
    ("err", "Magnitude error"),
    ("band", "Band"),
    ("flux", "Flux (instead of magnitude)"),
    ("flux_err", "Flux error"),
    ("ra", "RA (deg)"),
    ("dec", "Dec (deg)"),
)
TIME_SCALES = ("JD", "MJD", "HJD", "BJD_TDB")


def preview_rows(preview, columns) -> tuple[list[str], list[list[str]]]:
    """Column names and rows of text from whatever ``source.preview(n)`` gives."""
    if hasattr(preview, "colnames"):  # an astropy Table
        names = list(preview.colnames)
        return names, [[str(row[c]) for c in names] for row in preview]
    rows = list(preview or [])
    if rows and isinstance(rows[0], dict):
        names = list(columns) if columns else list(rows[0])
        return names, [[str(r.get(c, "")) for c in names] for r in rows]
    names = list(columns or [])
    return names, [[str(v) for v in r] for r in rows]


class ColumnMappingDialog(QDialog):
    """Choose which column plays which role, looking at the first rows."""

    def __init__(
        self, columns, preview, guessed=None, parent=None, title="Map columns", note=""
    ) -> None:
        super().__init__(parent)
        self.setWindowTitle(title)
        self.note = QLabel(note)
        self.note.setWordWrap(True)
        self.note.setStyleSheet("color: #B03000;")
        self.note.setVisible(bool(note))
        names, rows = preview_rows(preview, columns)
        self.columns = list(columns) if columns else names
        table = QTableWidget(len(rows), len(names))
        table.setHorizontalHeaderLabels(names)
        for i, row in enumerate(rows):
            for j, text in enumerate(row):
                table.setItem(i, j, QTableWidgetItem(text))
        table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        table.resizeColumnsToContents()
        self.preview_table = table
        form = QGridLayout()
        self.boxes: dict[str, QComboBox] = {}
        guessed = guessed or {}
        for k, (role, text) in enumerate(ROLES):
            box = QComboBox()
            box.addItem("(none)", None)
            for c in self.columns:
                box.addItem(c, c)
            guess = guessed.get(role) or _guess(role, self.columns)
            if guess in self.columns:
                box.setCurrentIndex(self.columns.index(guess) + 1)
            form.addWidget(QLabel(text + ":"), k // 2, 2 * (k % 2))
            form.addWidget(box, k // 2, 2 * (k % 2) + 1)
            self.boxes[role] = box
        row = (len(ROLES) + 1) // 2
        self.scale_box = QComboBox()
        self.scale_box.addItem("from the time column's name", None)
        for scale in TIME_SCALES:
            self.scale_box.addItem(scale, scale)
        self.scale_box.setToolTip(
            "The time scale is never guessed: it comes from the column name (hjd, bjd, mjd …) "
            "or from this choice"
        )
        form.addWidget(QLabel("Time scale:"), row, 0)
        form.addWidget(self.scale_box, row, 1)
        self.zero_point = QLineEdit(placeholderText="for flux columns, e.g. 25.0")
        form.addWidget(QLabel("Zero point (mag):"), row, 2)
        form.addWidget(self.zero_point, row, 3)
        self.default_band = QLineEdit(placeholderText="band of files without a band column")
        form.addWidget(QLabel("Default band:"), row + 1, 0)
        form.addWidget(self.default_band, row + 1, 1)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addWidget(self.note)
        layout.addWidget(QLabel(f"First {len(rows)} rows of the table:"))
        layout.addWidget(table, 1)
        layout.addLayout(form)
        layout.addWidget(buttons)
        self.resize(820, 560)

    def roles(self) -> dict[str, str]:
        """The chosen mapping as keyword arguments for ``ColumnMapping``."""
        out = {role: box.currentData() for role, box in self.boxes.items() if box.currentData()}
        if self.scale_box.currentData():
            out["time_scale"] = self.scale_box.currentData()
        if self.zero_point.text().strip():
            out["zero_point"] = self.zero_point.text().strip()  # ColumnMapping checks it
        if self.default_band.text().strip():
            out["default_band"] = self.default_band.text().strip()
        return out


def _guess(role: str, columns) -> str | None:
    lower = {c.lower(): c for c in columns}
    candidates = {
        "star_id": ("star_id", "id", "star", "name", "source_id"),
        "time": ("time", "hjd", "bjd", "mjd", "jd", "t"),
        "mag": ("mag", "magnitude", "v", "m"),
        "err": ("err", "mag_err", "magerr", "e_mag", "sigma", "error"),
        "band": ("band", "filter", "passband"),
        "flux": ("flux",),
        "flux_err": ("flux_err", "e_flux"),
        "ra": ("ra", "raj2000"),
        "dec": ("dec", "dej2000", "decj2000"),
    }.get(role, ())
    for c in candidates:
        if c in lower:
            return lower[c]
    return None


class AnalysisSettingsDialog(QDialog):
    """The periodogram grid and method used by the analysis."""

    def __init__(self, pg_settings, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Analysis settings")
        self.method = QComboBox()
        for key, text in METHODS:
            self.method.addItem(text, key)
        i = self.method.findData(getattr(pg_settings, "method", "gls"))
        self.method.setCurrentIndex(max(i, 0))
        self.fmin = QDoubleSpinBox(decimals=5, maximum=1000.0, singleStep=0.01)
        self.fmin.setSpecialValueText("automatic")
        self.fmin.setValue(getattr(pg_settings, "fmin", None) or 0.0)
        self.fmax = QDoubleSpinBox(decimals=3, maximum=1000.0, singleStep=1.0)
        self.fmax.setSpecialValueText("automatic")
        self.fmax.setValue(getattr(pg_settings, "fmax", None) or 0.0)
        self.oversampling = QSpinBox(minimum=1, maximum=100)
        self.oversampling.setValue(int(getattr(pg_settings, "oversampling", 5) or 5))
        self.nterms = QSpinBox(minimum=1, maximum=10)
        self.nterms.setValue(int(getattr(pg_settings, "nterms", 3) or 3))
        form = QFormLayout()
        form.addRow("Method:", self.method)
        form.addRow("Lowest frequency (cycles/d):", self.fmin)
        form.addRow("Highest frequency (cycles/d):", self.fmax)
        form.addRow("Oversampling:", self.oversampling)
        form.addRow("Harmonics (multi-harmonic):", self.nterms)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        layout.addWidget(
            QLabel("Results computed with other settings show as stale until re-analysed.")
        )
        layout.addWidget(buttons)

    def changes(self) -> dict:
        """Keyword changes for ``dataclasses.replace`` on the periodogram settings."""
        return {
            "method": self.method.currentData(),
            "fmin": self.fmin.value() or None,
            "fmax": self.fmax.value() or None,
            "oversampling": self.oversampling.value(),
            "nterms": self.nterms.value(),
        }


class ShortcutSheet(QDialog):
    """Every keyboard shortcut of the window, grouped by menu."""

    def __init__(self, groups, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Keyboard shortcuts")
        rows = [
            (group, action.text().replace("&", ""), _shown_keys(action.shortcuts()))
            for group, actions in groups
            for action in actions
            if _shown_keys(action.shortcuts())
        ]
        table = QTableWidget(len(rows), 3)
        table.setHorizontalHeaderLabels(["Menu", "Action", "Keys"])
        for i, (group, text, keys) in enumerate(rows):
            table.setItem(i, 0, QTableWidgetItem(group))
            table.setItem(i, 1, QTableWidgetItem(text))
            shown = ",   ".join(keys)
            table.setItem(i, 2, QTableWidgetItem(shown))
        table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        table.verticalHeader().setVisible(False)
        table.resizeColumnsToContents()
        table.horizontalHeader().setStretchLastSection(True)
        self.table = table
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addWidget(table)
        layout.addWidget(buttons)
        self.resize(560, 620)
        self.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, False)


def _shown_keys(sequences) -> list[str]:
    """Key sequences as text, without the multimedia keys (named "Open", "Undo" …)
    that some platforms add to the standard bindings."""
    out = []
    for seq in sequences:
        text = seq.toString(QKeySequence.SequenceFormat.NativeText)
        if text and (
            "+" in text or len(text) == 1 or re.fullmatch(r"F\d+", text) or text == "Backspace"
        ):
            out.append(text)
    return out


class ClassPicker(QDialog):
    """Pick any class from the keyboard: type to narrow the list, Enter records it.

    ``classes`` is a sequence of ``(code, label)``.  Up/Down move in the
    list while the typing box keeps the focus; Escape closes without a verdict.

    Signals
    -------
    picked(str)
        The chosen class code.
    """

    picked = Signal(str)

    def __init__(self, classes, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Relabel as")
        self.typed = QLineEdit(placeholderText="Type a class code or name, then Enter")
        self.list = QListWidget()
        for code, label in classes:
            item = QListWidgetItem(f"{code}  —  {label}")
            item.setData(Qt.ItemDataRole.UserRole, code)
            self.list.addItem(item)
        self.list.setCurrentRow(0)
        layout = QVBoxLayout(self)
        layout.addWidget(self.typed)
        layout.addWidget(self.list)
        self.typed.textChanged.connect(self._narrow)
        self.typed.installEventFilter(self)
        self.typed.returnPressed.connect(self.accept)
        self.list.itemActivated.connect(lambda _item: self.accept())

    def _narrow(self, text: str) -> None:
        """Show the classes whose code starts with, or whose name holds, the text."""
        text = text.strip().lower()
        first = None
        for row in range(self.list.count()):
            item = self.list.item(row)
            code = str(item.data(Qt.ItemDataRole.UserRole)).lower()
            shown = not text or code.startswith(text) or text in item.text().lower()
            item.setHidden(not shown)
            if shown and (first is None or code == text):
                first = row
        if first is not None:
            self.list.setCurrentRow(first)

    def eventFilter(self, obj, event) -> bool:
        if obj is self.typed and event.type() == QEvent.Type.KeyPress:
            if event.key() in (Qt.Key.Key_Up, Qt.Key.Key_Down):
                step = -1 if event.key() == Qt.Key.Key_Up else 1
                row = self.list.currentRow()
                while 0 <= row + step < self.list.count():
                    row += step
                    if not self.list.item(row).isHidden():
                        self.list.setCurrentRow(row)
                        break
                return True
        return super().eventFilter(obj, event)

    def current_code(self) -> str | None:
        item = self.list.currentItem()
        if item is None or item.isHidden():
            return None
        return str(item.data(Qt.ItemDataRole.UserRole))

    def accept(self) -> None:
        code = self.current_code()
        super().accept()
        if code:
            self.picked.emit(code)


def show_about(parent) -> None:
    """The About box: what Phasewise is, and the caution its suggestions carry."""
    from PySide6.QtWidgets import QMessageBox

    from phasewise.core import __version__

    QMessageBox.about(
        parent,
        "About Phasewise",
        f"<b>Phasewise {__version__}</b><p>Find periods, classify and vet variable-star "
        "light curves. Suggestions and distances come from published empirical relations "
        "with known scatter; the astronomer decides.</p>",
    )
