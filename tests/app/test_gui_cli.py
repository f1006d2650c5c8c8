"""The window commands run in a subprocess: exit code 0 and a real PNG."""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from PySide6.QtGui import QImage

ROOT = Path(__file__).resolve().parents[2]


def _env() -> dict:
    # a throw-away home: the window's QSettings (layout, recent files) land there
    home = tempfile.mkdtemp(prefix="phasewise-home-")
    return {
        "QT_QPA_PLATFORM": "offscreen",
        "PATH": "/usr/bin:/bin",
        "HOME": home,
        "XDG_CONFIG_HOME": str(Path(home) / ".config"),
    }


def _run(*args, timeout=120):
    env = _env()
    return subprocess.run(
        [sys.executable, "-m", "phasewise", *args],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=timeout,
        env=env,
    )


@pytest.mark.slow
def test_open_ledger_screenshot_exits_cleanly(subset_copy, tmp_path):
    out = tmp_path / "desk.png"
    proc = _run("open", str(subset_copy), "--screenshot", str(out), "--star", "CAL-V003")
    assert proc.returncode == 0, proc.stderr
    assert "deallocating" not in proc.stderr
    image = QImage(str(out))
    assert image.width() >= 1200 and image.height() >= 800
    # non-trivial: many distinct colours (plots drawn), not a blank window
    colours = {
        image.pixel(x, y) for x in range(0, image.width(), 7) for y in range(0, image.height(), 7)
    }
    assert len(colours) > 50
    assert out.stat().st_size > 50_000


@pytest.mark.slow
def test_unknown_star_and_missing_file_are_named(subset_copy, tmp_path):
    proc = _run("open", str(subset_copy), "--screenshot", str(tmp_path / "x.png"), "--star", "V9")
    assert proc.returncode == 2
    assert "no star 'V9' in the ledger" in proc.stderr
    proc = _run("open", str(tmp_path / "absent.ledger.sqlite"))
    assert proc.returncode == 2 and "absent.ledger.sqlite: no such file" in proc.stderr


def test_command_line_imports_no_qt():
    code = "import sys; from phasewise.app.cli import build_parser; build_parser().parse_args(['open', '-h'])"
    proc = subprocess.run(
        [sys.executable, "-c", code + "\n"], cwd=ROOT, capture_output=True, text=True
    )
    assert "--screenshot" in proc.stdout
    check = "import sys; import phasewise.app.cli as c; c.build_parser(); print('PySide6' in sys.modules)"
    proc = subprocess.run([sys.executable, "-c", check], cwd=ROOT, capture_output=True, text=True)
    assert proc.stdout.strip() == "False", proc.stderr


def test_demo_ledger_is_reused_only_when_up_to_date(subset_copy, tmp_path):
    import dataclasses
    import os

    from phasewise.app.cli.gui import _up_to_date, demo_files
    from phasewise.core.analysis import AnalysisSettings

    assert demo_files(ROOT / "demo_data") == [ROOT / "demo_data" / "caldera_survey.ecsv"]
    source = tmp_path / "survey.ecsv"
    source.write_text("# stand-in source file\n")
    old = subset_copy.stat().st_mtime - 100
    os.utime(source, (old, old))
    settings = AnalysisSettings()
    assert _up_to_date(subset_copy, [source], settings)
    other = dataclasses.replace(settings, fap_threshold=0.01)
    assert not _up_to_date(subset_copy, [source], other)  # analysed with other settings
    os.utime(source, None)  # the survey changed after the ledger was built
    assert not _up_to_date(subset_copy, [source], settings)
    assert not _up_to_date(tmp_path / "absent.ledger.sqlite", [source], settings)


@pytest.mark.slow
def test_open_files_imports_them_into_a_new_ledger(tmp_path):
    import shutil

    folder = tmp_path / "night"
    folder.mkdir()
    for sid in ("CAL-V001", "CAL-V002"):
        shutil.copy(ROOT / "demo_data" / "stars" / f"{sid}.csv", folder)
    out = tmp_path / "shot.png"
    proc = _run("open", str(folder), "--screenshot", str(out), "--star", "CAL-V002")
    assert proc.returncode == 0, proc.stderr
    ledger_path = tmp_path / "night.ledger.sqlite"
    assert ledger_path.exists() and out.stat().st_size > 50_000
    from phasewise.core.ledger import Ledger

    with Ledger.open(ledger_path, readonly=True) as ledger:
        assert ledger.star_ids() == ["CAL-V001", "CAL-V002"]
        assert ledger.result("CAL-V002").result["status"] == "ok"
    # a second time the ledger exists: the user is told, nothing is overwritten
    again = _run("open", str(folder), "--screenshot", str(out))
    assert again.returncode == 2 and "a ledger of that name exists" in again.stderr


@pytest.mark.slow
def test_window_closed_by_the_user_exits_cleanly(subset_copy):
    # the interactive path: app.exec() until the window closes, then a clean exit
    script = (
        "import sys\n"
        "from PySide6.QtCore import QTimer\n"
        "from PySide6.QtWidgets import QApplication\n"
        "app = QApplication(sys.argv[:1])\n"
        "QTimer.singleShot(2500, QApplication.closeAllWindows)\n"
        "from phasewise.app.cli import main\n"
        f"sys.exit(main(['open', {str(subset_copy)!r}]))\n"
    )
    env = _env()
    proc = subprocess.run(
        [sys.executable, "-c", script],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert "deallocating" not in proc.stderr and "Traceback" not in proc.stderr
