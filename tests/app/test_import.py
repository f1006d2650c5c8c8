"""New ledger from files: the column-mapping dialog on a real table, then the build."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from phasewise.app.desk import MainWindow
from phasewise.app.desk.dialogs import ColumnMappingDialog
from phasewise.core.io import ColumnMapping, open_photometry, write_stars

from .conftest import dispose
from .invented import make_star


def _table(tmp_path: Path) -> Path:
    path = tmp_path / "field.csv"
    stars = [make_star(f"NV-{i:03d}", 0.5 + 0.1 * i, n=120, seed=i) for i in range(3)]
    write_stars(stars, path)
    return path


def test_mapping_dialog_previews_and_maps(qtbot, tmp_path):
    path = _table(tmp_path)
    source = open_photometry(path)
    dialog = ColumnMappingDialog(list(source.columns), source.preview(8))
    qtbot.addWidget(dialog)
    table = dialog.preview_table
    assert table.rowCount() == 8
    headers = [table.horizontalHeaderItem(j).text() for j in range(table.columnCount())]
    assert headers == list(source.columns)
    assert table.item(0, headers.index("star_id")).text() == "NV-000"
    roles = dialog.roles()
    assert roles["star_id"] == "star_id" and roles["mag"] == "mag"
    assert "time_scale" not in roles  # never guessed: the column name or the user says
    dialog.scale_box.setCurrentIndex(dialog.scale_box.findData("HJD"))
    dialog.zero_point.setText("25.0")
    assert dialog.roles()["time_scale"] == "HJD"
    assert ColumnMapping(**dialog.roles()).zero_point == 25.0
    mapping = ColumnMapping(**roles)
    assert open_photometry(path, mapping).star_ids() == ("NV-000", "NV-001", "NV-002")


@pytest.mark.slow  # about 5 s; run by the slow suite
def test_build_ledger_from_files_in_a_worker(qtbot, qsettings, tmp_path):
    path = _table(tmp_path)
    window = MainWindow(settings=qsettings)
    window.show()
    done = []
    target = tmp_path / "new.ledger.sqlite"
    window.files.build_ledger([path], None, target, on_done=done.append)
    qtbot.waitUntil(lambda: bool(done), timeout=30000)
    assert window.ledger is not None and window.ledger_path == target
    assert window.star_list.model.star_ids() == ["NV-000", "NV-001", "NV-002"]
    stored = window.ledger.result("NV-001")
    assert stored is not None and np.isfinite(stored.result["period"])
    assert window.current_star == "NV-000"
    dispose(window)
