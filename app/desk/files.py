"""The desk's file commands: open, build, export, recent files (dialogs + workers)."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtWidgets import QFileDialog, QMessageBox

from phasewise.core.errors import PhasewiseError, ReadError

from .dialogs import ColumnMappingDialog

__all__ = ["FileCommands", "EXPORT_FORMATS", "MAX_RECENT"]

MAX_RECENT = 8
EXPORT_FORMATS = (
    ("ecsv", "ECSV (*.ecsv)"),
    ("fits", "FITS (*.fits)"),
    ("votable", "VOTable (*.xml *.vot)"),
    ("csv", "CSV (*.csv)"),
)


class FileCommands:
    """File menu of a desk ``window`` (its ``desk``, ``services``, ``workers``, ``qsettings``)."""

    def __init__(self, window) -> None:
        self.window = window
        self.recent_menu = None
        self.mapping_dialog = None

    # ------------------------------------------------------------- helpers
    def _try(self, fn, title: str):
        try:
            return fn()
        except PhasewiseError as exc:
            QMessageBox.warning(self.window, title, str(exc))
            return None

    def last_dir(self) -> str:
        return str(self.window.qsettings.value("last_dir", str(Path.home())))

    def recent_files(self) -> list[str]:
        value = self.window.qsettings.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def add_recent(self, path: str) -> None:
        recent = [p for p in self.recent_files() if p != path]
        recent.insert(0, path)
        self.window.qsettings.setValue("recent_files", recent[:MAX_RECENT])
        self.window.qsettings.setValue("last_dir", str(Path(path).parent))

    def place_recent(self, menu) -> None:
        """The *Open recent* submenu of ``menu`` (filled when shown)."""
        self.recent_menu = menu.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self.fill_recent)

    def fill_recent(self) -> None:
        self.recent_menu.clear()
        for p in self.recent_files():
            act = self.recent_menu.addAction(p)
            act.triggered.connect(
                lambda _c=False, p=p: self._try(lambda: self.window.open_ledger(p), "Open ledger")
            )
        if not self.recent_menu.actions():
            self.recent_menu.addAction("(none)").setEnabled(False)

    # ---------------------------------------------------------------- open
    def open_ledger_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(
            self.window,
            "Open ledger",
            self.last_dir(),
            "Ledgers (*.ledger.sqlite *.sqlite);;All files (*)",
        )
        if path:
            self._try(lambda: self.window.open_ledger(path), "Open ledger")

    def new_ledger_dialog(self) -> None:
        files, _ = QFileDialog.getOpenFileNames(
            self.window,
            "Photometry files",
            self.last_dir(),
            "Tables (*.csv *.tsv *.txt *.dat *.ecsv *.fits *.fit *.xml *.vot);;All files (*)",
        )
        if not files:
            return
        mapping = self.choose_mapping(files[0])
        if mapping is None:
            return
        target, _ = QFileDialog.getSaveFileName(
            self.window,
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
        services = self.window.services
        note, mapping = "", None
        try:
            source = services.open_photometry(path)
            columns, preview = list(source.columns), source.preview(20)
        except ReadError as exc:
            note = f"The columns were not recognised: {exc}. Say which column is which."
            raw = self._try(lambda: services.raw_preview(path), "Read photometry")
            if raw is None:
                return None
            columns, preview = raw
        while True:
            self.mapping_dialog = ColumnMappingDialog(
                columns,
                preview,
                parent=self.window,
                title=f"Map columns of {Path(path).name}",
                note=note,
            )
            if not self.mapping_dialog.exec():
                return None
            try:
                mapping = services.column_mapping(**self.mapping_dialog.roles())
                services.open_photometry(path, mapping)  # the mapping must read the file
                return mapping
            except PhasewiseError as exc:
                note = f"This mapping does not read the file: {exc}"

    def build_ledger(self, files, mapping, target, on_done=None):
        """Import ``files`` into a new ledger and analyse every star, in a worker."""
        from .building import build_ledger

        window = self.window
        settings = window.services.default_settings()

        def done(path):
            window.open_ledger(path)
            if on_done:
                on_done(path)

        return window.workers.run_with_progress(
            window,
            "Building the ledger",
            build_ledger,
            window.services,
            files,
            mapping,
            target,
            settings,
            on_result=done,
            on_error=lambda msg: QMessageBox.warning(window, "New ledger", msg),
        )

    # -------------------------------------------------------------- export
    def export_dialog(self) -> None:
        window = self.window
        if window.desk.ledger is None:
            return
        start = str(Path(window.desk.ledger.path).with_suffix("").with_suffix(".ecsv"))
        path, chosen = QFileDialog.getSaveFileName(
            window, "Export vetted catalogue", start, ";;".join(f for _k, f in EXPORT_FORMATS)
        )
        if path:
            fmt = next((k for k, f in EXPORT_FORMATS if f == chosen), None)
            self.export_catalogue(path, fmt)

    def export_catalogue(self, path, fmt=None, on_done=None):
        """Write the vetted catalogue in a worker (temporary file, then renamed by core)."""
        window = self.window
        window.progress_label.setText("exporting…")

        def done(result):
            window.progress_label.setText("")
            window.statusBar().showMessage(f"Vetted catalogue written to {path}")
            if on_done:
                on_done(result)

        def failed(msg):
            window.progress_label.setText("")
            QMessageBox.warning(window, "Export", msg)

        return window.workers.start(
            window.services.write_catalogue,
            window.desk.ledger,
            path,
            fmt,
            on_result=done,
            on_error=failed,
        )

    def export_plot_dialog(self, which: str) -> None:
        path, _ = QFileDialog.getSaveFileName(
            self.window,
            "Export plot",
            str(Path(self.last_dir()) / f"{self.window.desk.star_id}_{which}.png"),
            "PNG image (*.png);;SVG drawing (*.svg)",
        )
        if path:
            self._try(lambda: self.export_plot(which, path), "Export plot")

    def export_plot(self, which: str, path) -> Path:
        """Save one panel as PNG or SVG (by the file's suffix)."""
        window = self.window
        path = Path(path)
        widget = {
            "lightcurve": window.lightcurve.plot,
            "periodogram": window.periodogram.plot,
            "fold": window.fold.main,
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
            generator.setTitle(f"Phasewise {which} of {window.desk.star_id}")
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
