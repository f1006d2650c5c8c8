import os
import shutil
from pathlib import Path

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

# This test process is a Qt program, as the window commands are: guard the
# singletons PySide6 6.12 loses references to on Python 3.11 (see refguard).
from phasewise.app.refguard import guard_none  # noqa: E402

guard_none()

ROOT = Path(__file__).resolve().parents[2]
#: The first stars of the committed demo survey: two RR Lyrae of each kind and constants.
SUBSET = ("CAL-V001", "CAL-V002", "CAL-V003", "CAL-V004", "CAL-V005", "CAL-V006")


@pytest.fixture
def qsettings(tmp_path):
    from PySide6.QtCore import QSettings

    return QSettings(str(tmp_path / "phasewise.ini"), QSettings.Format.IniFormat)


@pytest.fixture(scope="session")
def demo_subset(tmp_path_factory) -> Path:
    """A ledger of six demo stars analysed by core.analysis (built once per run)."""
    from phasewise.core.analysis import AnalysisSettings, analyse
    from phasewise.core.io import open_photometry
    from phasewise.core.ledger import Ledger
    from phasewise.core.settings import settings_hash, settings_to_dict

    path = tmp_path_factory.mktemp("ledger") / "subset.ledger.sqlite"
    source = open_photometry(ROOT / "demo_data" / "stars")
    settings = AnalysisSettings()
    ledger = Ledger.create(path)
    ledger.set_analysis_settings(settings_to_dict(settings), settings_hash(settings))
    stars = [source.star(sid) for sid in SUBSET]
    ledger.add_stars(stars, source_file="demo_data/stars")
    ledger.store_results(
        [(lc.star_id, settings_hash(settings), analyse(lc, settings).to_dict()) for lc in stars]
    )
    ledger.close()
    return path


@pytest.fixture
def subset_copy(demo_subset, tmp_path) -> Path:
    """A fresh copy of the six-star ledger for one test."""
    target = tmp_path / "field.ledger.sqlite"
    shutil.copy(demo_subset, target)
    return target


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
