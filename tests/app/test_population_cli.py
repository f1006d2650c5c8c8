"""``phasewise open LEDGER --screenshot OUT --view population`` renders the population view."""

import subprocess
import sys
from pathlib import Path

import pytest

from phasewise.app.cli import COMMAND_MODULES

from .population_fakes import build_ledger

ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.skipif(
    "gui" not in COMMAND_MODULES, reason="the window commands (app.cli.gui) are not merged yet"
)


@pytest.mark.slow
def test_open_with_the_population_view_writes_a_screenshot(tmp_path):
    ledger_path = tmp_path / "nyx.ledger.sqlite"
    build_ledger(ledger_path).close()
    out = tmp_path / "population.png"
    result = subprocess.run(
        [
            sys.executable,
            "-m",
            "phasewise",
            "open",
            str(ledger_path),
            "--screenshot",
            str(out),
            "--view",
            "population",
            "--star",
            "NX-ODD",
        ],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
        env={"QT_QPA_PLATFORM": "offscreen", "PATH": "/usr/bin:/bin", "HOME": str(tmp_path)},
    )
    assert result.returncode == 0, result.stderr[-3000:]
    assert "deallocating" not in result.stderr
    from PySide6.QtGui import QImage

    image = QImage(str(out))
    assert image.width() >= 800 and image.height() >= 600
    # the population dock is open: its caution strip (pale yellow) is in the picture
    pale = sum(
        1
        for x in range(0, image.width(), 8)
        for y in range(image.height() // 2, image.height(), 8)
        if image.pixelColor(x, y).name() == "#fff6e0"
    )
    assert pale > 20
