"""A Qt session survives PySide6 6.12's lost references to None and True on Python 3.11."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# Without app.refguard this aborts (measured): each call of a Qt method returning
# nothing lost a reference to None, each signal emit one to True, and both start
# with only a few thousand references.
PROBE = """
import phasewise.app.desk  # the window package guards the singletons
import pyqtgraph as pg
from PySide6 import QtWidgets
application = QtWidgets.QApplication([])
widget = QtWidgets.QWidget()
plot = pg.PlotWidget()
scatter = pg.ScatterPlotItem()
plot.addItem(scatter)
for k in range(3000):
    widget.setEnabled(True)
    scatter.setData([0, 1, 2], [k, 1, 2])
plot.close()
del scatter, plot, widget, application
print("done")
"""


def test_many_qt_calls_then_a_clean_exit():
    result = subprocess.run(
        [sys.executable, "-c", PROBE],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env={"QT_QPA_PLATFORM": "offscreen", "PATH": "/usr/bin:/bin"},
        timeout=60,
    )
    assert result.returncode == 0, result.stderr[-2000:]
    assert result.stdout.strip() == "done"
    assert "deallocating None" not in result.stderr
