import os

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")


@pytest.fixture
def qsettings(tmp_path):
    from PySide6.QtCore import QSettings

    return QSettings(str(tmp_path / "phasewise.ini"), QSettings.Format.IniFormat)


def dispose(window):
    """Close and delete a window now, while the QApplication is alive.

    Windows left to the interpreter's final garbage collection crash
    PySide6 + pyqtgraph at exit; tests delete theirs explicitly.
    """
    import gc

    from PySide6.QtCore import QCoreApplication, QEvent

    window.close()
    window.deleteLater()
    QCoreApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete)
    QCoreApplication.processEvents()
    gc.collect()
