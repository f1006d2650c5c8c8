"""Import from the desk: unrecognised columns reach the mapping dialog; a failed import
leaves no ledger behind (pytest-qt, offscreen; invented stars)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from PySide6.QtWidgets import QFileDialog

from phasewise.app.desk import MainWindow
from phasewise.app.desk.building import build_ledger
from phasewise.app.desk.dialogs import ColumnMappingDialog
from phasewise.app.desk.services import CoreServices
from phasewise.core.errors import PhasewiseError

from .conftest import dispose

#: Column names no reader recognises (no id, time or magnitude by name).
ODD_COLUMNS = ("obj", "when", "brightness", "unc")


def _odd_table(path: Path, n_stars: int = 3) -> Path:
    """Invented sinusoidal stars under column names the readers do not know."""
    rng = np.random.default_rng(7)
    lines = [",".join(ODD_COLUMNS)]
    for k in range(n_stars):
        t = np.sort(2460000 + rng.uniform(0, 60, 80))
        m = 15 + 0.3 * np.sin(2 * np.pi * t / (0.5 + 0.1 * k)) + rng.normal(0, 0.01, t.size)
        lines += [f"NV-{k:03d},{a:.5f},{b:.4f},0.010" for a, b in zip(t, m, strict=True)]
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.slow  # a few seconds (subprocesses or a worker); run by the slow suite
def test_unrecognised_columns_open_the_mapping_dialog_with_a_preview(
    qtbot, qsettings, tmp_path, monkeypatch
):
    table = _odd_table(tmp_path / "odd.csv")
    target = tmp_path / "odd.ledger.sqlite"
    seen = []

    def fill_in(dialog):
        seen.append(dialog)
        preview = dialog.preview_table
        headers = [preview.horizontalHeaderItem(j).text() for j in range(preview.columnCount())]
        assert headers == list(ODD_COLUMNS) and preview.rowCount() == 20
        assert preview.item(0, 0).text() == "NV-000"
        assert "not recognised" in dialog.note.text() and "time" in dialog.note.text()
        for role, column in zip(("star_id", "time", "mag", "err"), ODD_COLUMNS, strict=True):
            box = dialog.boxes[role]
            box.setCurrentIndex(box.findData(column))
        dialog.scale_box.setCurrentIndex(dialog.scale_box.findData("HJD"))
        return 1

    monkeypatch.setattr(ColumnMappingDialog, "exec", fill_in)
    monkeypatch.setattr(QFileDialog, "getOpenFileNames", lambda *a, **k: ([str(table)], ""))
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    window = MainWindow(settings=qsettings)
    try:
        window.show()
        window.files.new_ledger_dialog()  # no error box: the dialog, then the build
        assert len(seen) == 1
        qtbot.waitUntil(lambda: window.ledger is not None, timeout=60000)
        window.wait_idle()
        assert sorted(window.ledger.star_ids()) == ["NV-000", "NV-001", "NV-002"]
        assert window.ledger.lightcurve("NV-001").time_scale == "HJD"
    finally:
        dispose(window)


def test_a_mapping_that_does_not_read_the_file_brings_the_dialog_back(
    qsettings, tmp_path, monkeypatch
):
    table = _odd_table(tmp_path / "odd.csv")
    calls = []

    def answer(dialog):
        calls.append(dialog.note.text())
        if len(calls) == 1:  # a first try with no time scale: the reader refuses it
            for role, column in zip(("star_id", "time", "mag"), ODD_COLUMNS[:3], strict=True):
                dialog.boxes[role].setCurrentIndex(dialog.boxes[role].findData(column))
            return 1
        return 0  # then the person gives up

    monkeypatch.setattr(ColumnMappingDialog, "exec", answer)
    window = MainWindow(settings=qsettings)
    try:
        assert window.files.choose_mapping(table) is None
        assert len(calls) == 2 and "does not read the file" in calls[1]
    finally:
        dispose(window)


@pytest.mark.slow  # a few seconds (subprocesses or a worker); run by the slow suite
def test_a_failed_import_leaves_no_ledger_and_the_retry_works(tmp_path):
    from phasewise.core.analysis import AnalysisSettings
    from phasewise.core.io import ColumnMapping

    good = _odd_table(tmp_path / "good.csv")
    # the same stars again in a second file: the ledger refuses the duplicate ids
    again = tmp_path / "again.csv"
    again.write_text(good.read_text())
    mapping = ColumnMapping(
        star_id="obj", time="when", mag="brightness", err="unc", time_scale="HJD"
    )
    services, settings = CoreServices(), AnalysisSettings()
    target = tmp_path / "field.ledger.sqlite"
    with pytest.raises(PhasewiseError):
        build_ledger(services, [good, again], mapping, target, settings)
    assert not target.exists()
    assert not [p for p in tmp_path.iterdir() if "ledger" in p.name]
    # an empty file imports no star: refused, and again no ledger left
    empty = tmp_path / "empty.csv"
    empty.write_text("obj,when,brightness,unc\n")
    with pytest.raises(PhasewiseError):
        build_ledger(services, [empty], mapping, target, settings)
    assert not target.exists()
    # the retry with the good file alone builds the ledger
    assert build_ledger(services, [good], mapping, target, settings) == target
    ledger = services.open_ledger(target)
    try:
        assert len(ledger.star_ids()) == 3
        assert all(ledger.result(s) is not None for s in ledger.star_ids())
    finally:
        ledger.close()
